// Logger dialects of the record reader (docs/FORMATS.md section 2.1), each
// made from one canonical record: after reading, the samples are the same
// (bit for bit where the text carries the same digits; to the printed
// precision where a unit conversion is written out) and so is the estimate.
// Broken and ambiguous files: the message names the line, the column and
// the candidates. Members and records are invented.
#include <gtest/gtest.h>

#include <cmath>
#include <cstdio>
#include <cstring>
#include <functional>
#include <sstream>
#include <string>
#include <vector>

#include "estimation/identify_record.h"
#include "estimation/record.h"
#include "model/ambient_synthesis.h"

namespace taut::estimation {
namespace {

using model::Direction;

// An invented 5.8 m round iron tie (28 mm, E = 190 GPa), three sensors at
// the quarter points with calibration entries.
model::Member Tie() {
  model::Member m;
  m.id = "invented-tie-d1";
  m.length_m = 5.8;
  m.section.shape = model::Section::Shape::kCircle;
  m.section.diameter_m = 0.028;
  m.elastic_modulus_pa = 1.9e11;
  m.density_kg_m3 = 7800.0;
  m.sensors = {{"v1", 1.45, 0.04, Direction::kVertical},
               {"v2", 2.90, 0.04, Direction::kVertical},
               {"v3", 4.35, 0.04, Direction::kVertical}};
  const double sens[] = {100.0, 98.7, 101.3};  // mV/g, invented calibration sheet
  for (int c = 0; c < 3; ++c) {
    m.sensors[c].sensitivity_mv_per_g = sens[c];
    m.sensors[c].serial = "INV-" + std::to_string(c + 1);
    m.sensors[c].calibrated_on = "2026-06-01";
  }
  return m;
}

constexpr double kFs = 256.0;  // step 1/256 s: exact in binary
constexpr double kG = 9.80665;

// The canonical record: 40 s of model ambient vibration at 12 kN, values
// printed with %.9g (the digits every dialect below repeats).
struct Canon {
  model::Member member = Tie();
  std::vector<std::string> channels;
  std::vector<std::vector<std::string>> cells;  // per row, per channel: the printed value
  Eigen::MatrixXd values;                       // the printed values read back by strtod
  Canon() {
    model::ModalParameters p;
    p.axial_force_n = 12000.0;
    p.fixity_left = 0.3;
    p.fixity_right = 0.6;
    model::AmbientSpec spec;
    spec.duration_s = 40.0;
    spec.sample_rate_hz = kFs;
    spec.modes = 4;
    spec.elements = 40;
    Eigen::MatrixXd a;
    if (!model::SynthesizeAmbient(member, Direction::kVertical, p, spec, &channels, &a).ok()) return;
    values.resize(a.rows(), a.cols());
    cells.resize(static_cast<std::size_t>(a.rows()));
    for (Eigen::Index i = 0; i < a.rows(); ++i) {
      for (Eigen::Index c = 0; c < a.cols(); ++c) {
        char buf[40];
        std::snprintf(buf, sizeof buf, "%.9g", a(i, c));
        cells[static_cast<std::size_t>(i)].push_back(buf);
        values(i, c) = std::strtod(buf, nullptr);
      }
    }
  }
  Eigen::Index rows() const { return values.rows(); }
};

const Canon& C() {
  static const Canon c;
  return c;
}

// How a dialect writes a record.
struct Dialect {
  std::string preamble;     // lines above the header (metadata, logger text)
  std::string time_header;  // "time_s", "time_ms", "timestamp"; "" = no time column
  char sep = ',';
  bool decimal_comma = false;
  std::string eol = "\n";
  // The time cell of row i.
  std::function<std::string(Eigen::Index)> time;
  // The value cell of row i, channel c (default: the canonical digits).
  std::function<std::string(Eigen::Index, Eigen::Index)> value;
};

std::string Write(const Dialect& d) {
  const Canon& c = C();
  std::string out = d.preamble;
  std::string header = d.time_header;
  for (const auto& ch : c.channels) header += (header.empty() ? "" : std::string(1, d.sep)) + ch;
  out += header + d.eol;
  auto put = [&](std::string s) {
    if (d.decimal_comma)
      for (char& ch : s)
        if (ch == '.') ch = ',';
    out += s;
  };
  for (Eigen::Index i = 0; i < c.rows(); ++i) {
    bool first = true;
    if (!d.time_header.empty()) {
      put(d.time(i));
      first = false;
    }
    for (Eigen::Index k = 0; k < c.values.cols(); ++k) {
      if (!first) out += d.sep;
      first = false;
      put(d.value ? d.value(i, k) : c.cells[static_cast<std::size_t>(i)][static_cast<std::size_t>(k)]);
    }
    out += d.eol;
  }
  return out;
}

std::string Printf(const char* fmt, double v) {
  char buf[48];
  std::snprintf(buf, sizeof buf, fmt, v);
  return buf;
}

Dialect Canonical() {
  Dialect d;
  d.preamble = "# recorded_at=2026-11-20T10:00:00Z\n# temperature_c=12.5\n";
  d.time_header = "time_s";
  d.time = [](Eigen::Index i) { return Printf("%.9f", static_cast<double>(i) / kFs); };
  return d;
}

// ISO 8601 time stamps at +01:00, rounded to 1 ms (as loggers write them):
// up to 0.5 ms off the uniform grid.
std::string IsoStamp(Eigen::Index i) {
  const long long ms = std::llround(static_cast<double>(i) * 1000.0 / kFs);
  char buf[64];
  std::snprintf(buf, sizeof buf, "2026-11-20T11:%02lld:%02lld.%03lld+01:00", ms / 60000, ms / 1000 % 60,
                ms % 1000);
  return buf;
}

Status Read(const std::string& text, Record* r, RecordReadOptions o = {}) {
  if (o.member == nullptr) o.member = &C().member;
  if (o.now_unix_ms == 0) o.now_unix_ms = 1796126400000;  // 2026-12-01T12:00:00Z
  std::istringstream in(text);
  return ParseRecordCsv(in, o, r);
}

bool BitIdentical(const Eigen::MatrixXd& a, const Eigen::MatrixXd& b) {
  return a.rows() == b.rows() && a.cols() == b.cols() &&
         std::memcmp(a.data(), b.data(), sizeof(double) * static_cast<std::size_t>(a.size())) == 0;
}

bool HasCaution(const Record& r, const std::string& code) {
  for (const auto& c : r.cautions)
    if (c.code == code) return true;
  return false;
}

// ---- Broken and ambiguous files: line, column, candidates.

void ExpectError(const std::string& text, const std::vector<std::string>& fragments,
                 RecordReadOptions o = {}) {
  Record r;
  const Status s = Read(text, &r, o);
  ASSERT_FALSE(s.ok()) << "expected an error containing " << fragments.front();
  for (const auto& f : fragments)
    EXPECT_NE(s.message.find(f), std::string::npos) << s.message << " lacks " << f;
}

// Line k of `text` (1-based) replaced.
std::string ReplaceLine(const std::string& text, int line, const std::string& with) {
  std::istringstream in(text);
  std::ostringstream out;
  std::string l;
  for (int k = 1; std::getline(in, l); ++k) out << (k == line ? with : l) << "\n";
  return out.str();
}

TEST(RecordDialects, TextDialectsReadBitForBit) {
  ASSERT_GT(C().rows(), 10000);
  Record canon;
  ASSERT_TRUE(Read(Write(Canonical()), &canon).ok());
  ASSERT_TRUE(BitIdentical(canon.samples, C().values));  // strtod of the printed digits
  EXPECT_EQ(canon.sample_rate_hz, kFs);

  struct Case {
    const char* name;
    Dialect d;
  };
  std::vector<Case> cases;
  {
    Dialect d = Canonical();
    d.sep = ';';
    d.decimal_comma = true;
    cases.push_back({"semicolon, decimal comma", d});
    d.sep = '\t';
    cases.push_back({"tab, decimal comma", d});
    d.decimal_comma = false;
    cases.push_back({"tab, decimal point", d});
    d = Canonical();
    d.sep = ';';
    cases.push_back({"semicolon, decimal point", d});
    d = Canonical();
    d.preamble =
        "\xEF\xBB\xBFLogger XR-7 firmware 2.4\r\nStation: invented yard\r\n4711\r\n\r\n"
        "# recorded_at=2026-11-20T10:00:00Z\r\n# temperature_c=12.5\r\n";
    d.eol = "\r\n";
    cases.push_back({"BOM, logger text, CRLF", d});
    d = Canonical();
    d.time_header = "time_ms";
    d.time = [](Eigen::Index i) { return Printf("%.3f", static_cast<double>(i) * 1000.0 / kFs); };
    cases.push_back({"time_ms (1.953 / 1.954 ms at 512 Hz style rounding)", d});
    d = Canonical();
    d.preamble = "# recorded_at=2026-11-20T10:00:00Z\n# sample_rate_hz=256\n";
    d.time_header = "";
    cases.push_back({"no time column, sample_rate_hz", d});
    d = Canonical();
    d.preamble = "";
    d.time_header = "timestamp";
    d.time = IsoStamp;
    cases.push_back({"ISO 8601 +01:00, 1 ms rounding", d});
  }
  for (const auto& c : cases) {
    SCOPED_TRACE(c.name);
    Record r;
    const Status s = Read(Write(c.d), &r);
    ASSERT_TRUE(s.ok()) << s.message;
    EXPECT_EQ(r.channels, canon.channels);
    EXPECT_TRUE(BitIdentical(r.samples, canon.samples));
    // The rate from the time column: exact for seconds with 9 decimals
    // (|error| <= 5e-10 s over 40 s); for times rounded to 1 us or 1 ms the
    // first and last stamps are off by at most half the rounding, so the
    // rate by at most 1e-3 s / 40 s = 2.5e-5 relative.
    EXPECT_NEAR(r.sample_rate_hz, kFs, 2.5e-5 * kFs);
    EXPECT_EQ(r.recorded_at, "2026-11-20T10:00:00Z");
  }
}

TEST(RecordDialects, JitterOfMillisecondStampsIsAcceptedAndSaid) {
  Dialect d = Canonical();
  d.preamble = "";
  d.time_header = "timestamp";
  d.time = IsoStamp;
  Record r;
  ASSERT_TRUE(Read(Write(d), &r).ok());
  // 1 ms stamps at 256 Hz are up to 0.5 ms off a 3.906 ms step: more than
  // 1 % of it, within the 0.5 ms floor (docs/FORMATS.md section 2.1).
  EXPECT_TRUE(HasCaution(r, "time-jitter"));
  // Row 64 lies at exactly 250 ms (64 x 3.90625), its neighbours at
  // 246.094 -> 246 and 253.906 -> 254 ms. Moved to 251 ms, its spacing is
  // 5 ms: 1.094 ms off the step, beyond twice the 0.5 ms jitter.
  std::string text = Write(d);
  const std::size_t at = text.find("2026-11-20T11:00:00.250+01:00");
  ASSERT_NE(at, std::string::npos);
  text.replace(at, 29, "2026-11-20T11:00:00.251+01:00");
  ExpectError(text, {"line 66, column 1 (timestamp)", "uniform", "0.5 ms"});
}

TEST(RecordDialects, UnitsAndCalibrationToThePrintedPrecision) {
  const Canon& c = C();
  Record canon;
  ASSERT_TRUE(Read(Write(Canonical()), &canon).ok());
  const model::Member& m = c.member;
  struct Case {
    const char* units;
    std::function<double(double, Eigen::Index)> to_file;  // m/s^2 of channel k -> file value
  };
  const std::vector<Case> cases = {
      {"g", [](double a, Eigen::Index) { return a / kG; }},
      {"mg", [](double a, Eigen::Index) { return a / kG * 1000.0; }},
      {"mV", [&](double a, Eigen::Index k) { return a / kG * *m.sensors[k].sensitivity_mv_per_g; }},
      {"V", [&](double a, Eigen::Index k) { return a / kG * *m.sensors[k].sensitivity_mv_per_g / 1000.0; }},
  };
  for (const auto& u : cases) {
    SCOPED_TRACE(u.units);
    Dialect d = Canonical();
    d.preamble += std::string("# units=") + u.units + "\n";
    d.value = [&](Eigen::Index i, Eigen::Index k) { return Printf("%.9g", u.to_file(c.values(i, k), k)); };
    Record r;
    const Status s = Read(Write(d), &r);
    ASSERT_TRUE(s.ok()) << s.message;
    // 9 significant digits: relative rounding <= 5e-10 x 10 = 5e-9 of each
    // value, plus a few ulps of the conversion; 1e-8 of the channel's peak.
    for (Eigen::Index k = 0; k < 3; ++k) {
      const double peak = canon.samples.col(k).cwiseAbs().maxCoeff();
      EXPECT_LE((r.samples.col(k) - canon.samples.col(k)).cwiseAbs().maxCoeff(), 1e-8 * peak);
    }
    if (std::string(u.units) == "mV") {
      ASSERT_FALSE(r.notes.empty());
      EXPECT_NE(r.notes.back().find("v2 98.7 mV/g (serial INV-2) calibrated on 2026-06-01"),
                std::string::npos)
          << r.notes.back();
    }
  }
  // Polarity -1 flips the sign exactly.
  model::Member flipped = m;
  flipped.sensors[1].polarity = -1;
  Dialect d = Canonical();
  d.value = [&](Eigen::Index i, Eigen::Index k) {
    const std::string& s = c.cells[static_cast<std::size_t>(i)][static_cast<std::size_t>(k)];
    if (k != 1) return s;
    return s[0] == '-' ? s.substr(1) : "-" + s;
  };
  Record r;
  RecordReadOptions o;
  o.member = &flipped;
  ASSERT_TRUE(Read(Write(d), &r, o).ok());
  EXPECT_TRUE(BitIdentical(r.samples, canon.samples));  // -(-x) is exact, -(-0) = +0
}

// The estimate is the same for the dialects whose numbers differ from the
// canonical ones (the bit-identical ones give the same estimate by
// construction: same samples, same rate). Tolerance: the rate of the 1 ms
// stamps is off by at most 2.5e-5 relative (above), which moves every
// frequency by that share and N = 4 m L^2 f^2 (taut string, Irvine 1981)
// by 5e-5 relative = 0.6 N at 12 kN; the mV values by 5e-9 relative. On
// top of that each fit stops where Ceres' function tolerance (1e-6 relative
// change of the cost, its default) is met, a few thousandths of a standard
// deviation from the exact minimum, and the multi-start search may stop on
// either side of it: 2 % of the estimate's std covers both, far below the
// std itself.
TEST(RecordDialects, SameEstimate) {
  const Canon& c = C();
  Record canon, iso, mv;
  ASSERT_TRUE(Read(Write(Canonical()), &canon).ok());
  Dialect d = Canonical();
  d.preamble = "";
  d.time_header = "timestamp";
  d.time = IsoStamp;
  ASSERT_TRUE(Read(Write(d), &iso).ok());
  d = Canonical();
  d.preamble += "# units=mV\n";
  d.value = [&](Eigen::Index i, Eigen::Index k) {
    return Printf("%.9g", c.values(i, k) / kG * *c.member.sensors[k].sensitivity_mv_per_g);
  };
  ASSERT_TRUE(Read(Write(d), &mv).ok());
  Estimate e0, e1, e2;
  ASSERT_TRUE(IdentifyRecord(c.member, canon, {}, &e0).ok());
  ASSERT_TRUE(IdentifyRecord(c.member, iso, {}, &e1).ok());
  ASSERT_TRUE(IdentifyRecord(c.member, mv, {}, &e2).ok());
  const double tol_n = 2.0 + 0.02 * e0.axial_force_n.std;
  EXPECT_NEAR(e1.axial_force_n.value, e0.axial_force_n.value, tol_n);
  EXPECT_NEAR(e2.axial_force_n.value, e0.axial_force_n.value, tol_n);
  EXPECT_LT(tol_n, 0.05 * e0.axial_force_n.std);
  // EI scales with f^2 too: 5e-5 relative, doubled, plus the same stopping
  // allowance.
  EXPECT_NEAR(e1.bending_stiffness_nm2.value, e0.bending_stiffness_nm2.value,
              1e-4 * e0.bending_stiffness_nm2.value + 0.02 * e0.bending_stiffness_nm2.std);
}

TEST(RecordDialects, BrokenAndAmbiguousFilesNameLineColumnAndCandidates) {
  const std::string canon = Write(Canonical());  // header on line 3
  // "time" with numbers: seconds or milliseconds?
  ExpectError(ReplaceLine(canon, 3, "time,v1,v2,v3"),
              {"line 4, column 1 (time)", "seconds or milliseconds", "time_s", "time_ms"});
  // An unknown time column name.
  ExpectError(ReplaceLine(canon, 3, "Zeit,v1,v2,v3"),
              {"line 3, column 1", "\"Zeit\"", "time_s", "time_ms", "ISO 8601", "sample_rate_hz"});
  // A thousands separator in a semicolon file.
  Dialect d = Canonical();
  d.sep = ';';
  d.decimal_comma = true;
  ExpectError(ReplaceLine(Write(d), 10, "0,0234375;1.234,5;0,1;0,2"),
              {"line 10, column 2 (v1)", "not a number"});
  // A decimal comma in a comma file: one cell too many.
  ExpectError(ReplaceLine(canon, 10, "0.0234375,0,5,0.1,0.2"), {"line 10", "more than 4 cells"});
  // ISO 8601 without a zone.
  d = Canonical();
  d.preamble = "";
  d.time_header = "timestamp";
  d.time = [](Eigen::Index i) { return IsoStamp(i).substr(0, 23); };
  ExpectError(Write(d), {"line 2, column 1 (timestamp)", "no zone", "time_zone"});
  // A header where data was expected.
  ExpectError("0.0,1,2\n", {"line 1", "header line was expected", "time_s"});
  // Units needing a sensitivity the sensor entry lacks.
  model::Member bare = Tie();
  bare.sensors[2].sensitivity_mv_per_g.reset();
  RecordReadOptions o;
  o.member = &bare;
  ExpectError(ReplaceLine(canon, 2, "# units=mV"), {"units mV", "channel v3", "sensitivity_mv_per_g"}, o);
  // Samples the binary32 store cannot hold: 3e38 g is 2.9e39 m/s^2.
  ExpectError(ReplaceLine(ReplaceLine(canon, 2, "# units=g"), 12, "0.03125,0.1,3e38,0.2"),
              {"line 12, column 3 (v2)", "largest storable sample"});
  ExpectError(ReplaceLine(canon, 12, "0.03125,0.1,1e39,0.2"), {"line 12, column 3 (v2)", "largest storable"});
  // recorded_at: an impossible date, before 1900, in the future.
  ExpectError(ReplaceLine(canon, 1, "# recorded_at=2026-02-30T10:00:00Z"), {"line 1", "ISO 8601"});
  ExpectError(ReplaceLine(canon, 1, "# recorded_at=1899-12-31T23:59:59Z"), {"line 1", "before 1900"});
  ExpectError(ReplaceLine(canon, 1, "# recorded_at=2026-12-01T13:00:00Z"),
              {"line 1", "1 h after now", "clock"});
  // 10 minutes ahead is clock skew, accepted; an offset is applied.
  Record r;
  ASSERT_TRUE(Read(ReplaceLine(canon, 1, "# recorded_at=2026-12-01T13:10:00+01:00"), &r).ok());
  EXPECT_EQ(r.recorded_at, "2026-12-01T12:10:00Z");
  // A rate that changes within the record: every spacing of the second
  // half is 0.29 ms longer (within twice the 0.5 ms jitter of a spacing),
  // but the stamps drift off the line through the ends by ~1.5 ms.
  d = Canonical();
  d.time = [](Eigen::Index i) {
    const double t = static_cast<double>(i) / kFs, half = 5120.0 / kFs;
    return Printf("%.9f", i < 5120 ? t : half + (t - half) * (4.2e-3 * kFs));
  };
  ExpectError(Write(d), {"column 1 (time_s)", "off the uniform grid", "rate changes"});
  // A time column and a sample rate both.
  ExpectError(ReplaceLine(canon, 2, "# sample_rate_hz=256"), {"line 2", "keep one"});
  // Logger text without end.
  std::string noise;
  for (int k = 0; k < kMaxFreeTextLines + 1; ++k) noise += "logger line " + std::to_string(k) + "\n";
  ExpectError(noise + canon, {"line 21", "more than 20 lines of text", "time_s"});
}

TEST(RecordDialects, ProfileReadsWhatDetectionCannot) {
  // A logger export with German headers, 2 lines of preamble, local times
  // without a zone (UTC+1), a spare column, and counts to scale.
  const Canon& c = C();
  std::string text = "Export XR-7\nKanalliste folgt\nZeit;Temp;K1;K2;K3\n";
  for (Eigen::Index i = 0; i < c.rows(); ++i) {
    text += IsoStamp(i).substr(0, 23) + ";21,5";
    for (Eigen::Index k = 0; k < 3; ++k) {
      std::string s = Printf("%.9g", c.values(i, k) * 1000.0);  // mm/s^2
      for (char& ch : s)
        if (ch == '.') ch = ',';
      text += ";" + s;
    }
    text += "\n";
  }
  ImportProfile p;
  p.delimiter = ';';
  p.decimal_mark = ',';
  p.skip_lines = 2;
  p.time = TimeColumn::kIso8601;
  p.time_column = "Zeit";
  p.utc_offset_minutes = 60;
  p.channels = {{"K1", "v1", 1e-3, 0.0}, {"K2", "v2", 1e-3, 0.0}, {"K3", "v3", 1e-3, 0.0}};
  RecordReadOptions o;
  o.profile = &p;
  Record r;
  const Status s = Read(text, &r, o);
  ASSERT_TRUE(s.ok()) << s.message;
  EXPECT_EQ(r.recorded_at, "2026-11-20T10:00:00Z");
  ASSERT_EQ(r.samples.rows(), c.rows());
  // x 1000 printed with 9 digits, x 1e-3 back: 1e-8 of the peak.
  const double peak = c.values.cwiseAbs().maxCoeff();
  EXPECT_LE((r.samples - c.values).cwiseAbs().maxCoeff(), 1e-8 * peak);
  // A profile column missing from the header is named.
  p.channels[2].column = "K4";
  ExpectError(text, {"line 23", "profile's columns", "\"K4\""}, o);
}

}  // namespace
}  // namespace taut::estimation
