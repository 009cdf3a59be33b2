// The docs/FORMATS.md section 2 CSV reader (estimation/record.h): every rule of
// the format has a test whose error must name the line (and column) and the
// rule; quality checks raise cautions; garbled input never crashes.
// All records are invented.
#include <gtest/gtest.h>

#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <random>
#include <sstream>
#include <string>
#include <vector>

#include "estimation/record.h"

namespace taut::estimation {
namespace {

constexpr double kFs = 100.0;
constexpr int kRows = 1100;  // 11 s at 100 Hz: just over both minimums

// Metadata on lines 1-4, header on line 5, row k (0-based) on line 6 + k.
std::string ValidCsv(int rows = kRows, double fs = kFs, const std::string& meta = "") {
  std::ostringstream o;
  o.precision(10);
  if (meta.empty()) {
    o << "# recorded_at=2026-11-20T10:00:00Z\n# temperature_c=12.5\n# units=m/s2\n# excitation=ambient\n";
  } else {
    o << meta;
  }
  o << "time_s,a1,a2\n";
  std::mt19937_64 rng(1);
  std::normal_distribution<double> g(0.0, 0.01);
  for (int k = 0; k < rows; ++k) {
    const double t = k / fs;
    o << t << "," << std::sin(2 * M_PI * 7.0 * t) + g(rng) << ","
      << 0.5 * std::cos(2 * M_PI * 11.0 * t) + g(rng) << "\n";
  }
  return o.str();
}

// Replaces line `line` (1-based) of `text` with `replacement`.
std::string ReplaceLine(const std::string& text, int line, const std::string& replacement) {
  std::istringstream in(text);
  std::ostringstream out;
  std::string l;
  for (int k = 1; std::getline(in, l); ++k) out << (k == line ? replacement : l) << "\n";
  return out.str();
}

Status Parse(const std::string& text, Record* r, RecordReadOptions o = {}) {
  std::istringstream in(text);
  return ParseRecordCsv(in, o, r);
}

// Asserts an error whose message contains every fragment.
void ExpectError(const std::string& text, const std::vector<std::string>& fragments,
                 RecordReadOptions o = {}) {
  Record r;
  const Status s = Parse(text, &r, o);
  ASSERT_FALSE(s.ok()) << "expected an error containing " << fragments.front();
  EXPECT_EQ(s.code, Status::Code::kInvalidArgument);
  for (const auto& f : fragments)
    EXPECT_NE(s.message.find(f), std::string::npos) << s.message << " lacks " << f;
}

bool HasCaution(const Record& r, const std::string& code) {
  for (const auto& c : r.cautions)
    if (c.code == code) return true;
  return false;
}

TEST(RecordReader, ValidRecord) {
  Record r;
  ASSERT_TRUE(Parse(ValidCsv(), &r).ok());
  EXPECT_EQ(r.channels, (std::vector<std::string>{"a1", "a2"}));
  EXPECT_EQ(r.samples.rows(), kRows);
  EXPECT_EQ(r.samples.cols(), 2);
  // Times are printed with 10 significant digits: the rate is exact to
  // about 1e-9 relative.
  EXPECT_NEAR(r.sample_rate_hz, kFs, 1e-6);
  EXPECT_EQ(r.start_time_s, 0.0);
  EXPECT_EQ(r.recorded_at, "2026-11-20T10:00:00Z");
  ASSERT_TRUE(r.temperature_c.has_value());
  EXPECT_EQ(*r.temperature_c, 12.5);
  EXPECT_EQ(r.excitation, Excitation::kAmbient);
  EXPECT_NEAR(r.samples(1, 0), std::sin(2 * M_PI * 7.0 * 0.01), 0.05);
  EXPECT_FALSE(HasCaution(r, "single-channel"));
  EXPECT_FALSE(HasCaution(r, "low-sample-rate"));  // 100 Hz is not below kLowSampleRate_hz
}

// Every cell value is the double the C library's strtod (ISO C 7.22.1.3:
// correctly rounded for decimal input, glibc) gives for the same text:
// the reader's fast decimal path (Clinger 1990) must not change a bit.
// Values in the formats gateways write (%.7g, %.9f, %.17g, exponents at the
// fast path's limits 1e+-22 and beyond, leading zeros, signs), exact
// equality.
TEST(RecordReader, CellValuesEqualStrtod) {
  std::mt19937_64 rng(99);
  std::normal_distribution<double> g(0.0, 1.0);
  std::uniform_int_distribution<int> e(-30, 30);
  std::vector<std::string> cells;
  const char* formats[] = {"%.7g", "%.9f", "%.17g", "%.3e", "%.16e"};
  for (int k = 0; k < kRows; ++k) {
    char buf[64];
    const double x = g(rng) * std::pow(10.0, e(rng));
    std::snprintf(buf, sizeof buf, formats[k % 5], x);
    cells.push_back(buf);
  }
  cells[0] = "-0.0";
  cells[1] = "007.50";
  cells[2] = "1e22";
  cells[3] = "9007199254740993";  // 2^53 + 1: beyond the fast path, rounds to even
  cells[4] = "-4.5E-22";
  cells[5] = "123456789012345678901234567890e-25";
  std::ostringstream o;
  o << "time_s,a1\n";
  for (int k = 0; k < kRows; ++k) o << k / kFs << "," << cells[k] << "\n";
  Record r;
  ASSERT_TRUE(Parse(o.str(), &r).ok());
  for (int k = 0; k < kRows; ++k) {
    const double expected = std::strtod(cells[k].c_str(), nullptr);
    ASSERT_EQ(std::memcmp(&r.samples(k, 0), &expected, sizeof(double)), 0)
        << cells[k] << ": read " << r.samples(k, 0) << ", strtod " << expected;
  }
}

TEST(RecordReader, CrLfAndTrailingBlankLinesAccepted) {
  std::string text = ValidCsv();
  std::string crlf;
  for (char c : text) {
    if (c == '\n') crlf += '\r';
    crlf += c;
  }
  crlf += "\r\n\n";
  Record r;
  const Status s = Parse(crlf, &r);
  ASSERT_TRUE(s.ok()) << s.message;
  EXPECT_EQ(r.samples.rows(), kRows);
}

// A UTF-8 byte order mark before the first line (spreadsheet exports) is
// not part of the text.
TEST(RecordReader, ByteOrderMarkIgnored) {
  Record r;
  const Status s = Parse("\xEF\xBB\xBF" + ValidCsv(), &r);
  ASSERT_TRUE(s.ok()) << s.message;
  EXPECT_EQ(r.recorded_at, "2026-11-20T10:00:00Z");
}

// units=g: samples scaled by the standard gravity 9.80665 m/s^2 (CGPM 1901,
// ISO 80000-3), exactly.
TEST(RecordReader, UnitsGConverted) {
  Record a, b;
  ASSERT_TRUE(Parse(ValidCsv(), &a).ok());
  ASSERT_TRUE(Parse(ReplaceLine(ValidCsv(), 3, "# units=g"), &b).ok());
  EXPECT_EQ(b.units, "g");
  EXPECT_NEAR((b.samples - a.samples * 9.80665).cwiseAbs().maxCoeff(), 0.0, 1e-15);
}

// Flags override the file's metadata (docs/FORMATS.md section 2).
TEST(RecordReader, OverridesWin) {
  RecordReadOptions o;
  o.units = "g";
  o.temperature_c = -3.0;
  o.excitation = Excitation::kImpact;
  Record a, b;
  ASSERT_TRUE(Parse(ValidCsv(), &a).ok());
  ASSERT_TRUE(Parse(ValidCsv(), &b, o).ok());
  EXPECT_EQ(*b.temperature_c, -3.0);
  EXPECT_EQ(b.excitation, Excitation::kImpact);
  EXPECT_NEAR(b.samples(5, 1), 9.80665 * a.samples(5, 1), 1e-15);
  o = {};
  o.units = "mm/s2";
  ExpectError(ValidCsv(), {"units override", "\"mm/s2\"", "m/s2"}, o);
}

TEST(RecordReader, MetadataRules) {
  ExpectError(ReplaceLine(ValidCsv(), 2, "# temperature 12.5"), {"line 2", "# key=value"});
  ExpectError(ReplaceLine(ValidCsv(), 2, "# temprature_c=12.5"),
              {"line 2", "unknown metadata key", "temprature_c"});
  ExpectError(ReplaceLine(ValidCsv(), 2, "# units=m/s2"), {"line 3", "given twice", "units"});
  ExpectError(ReplaceLine(ValidCsv(), 1, "# recorded_at=2026-11-20 10:00"),
              {"line 1", "recorded_at", "ISO 8601"});
  ExpectError(ReplaceLine(ValidCsv(), 1, "# recorded_at=2026-13-20T10:00:00Z"), {"line 1", "ISO 8601"});
  ExpectError(ReplaceLine(ValidCsv(), 2, "# temperature_c=warm"), {"line 2", "temperature_c", "number"});
  ExpectError(ReplaceLine(ValidCsv(), 2, "# temperature_c=250"), {"line 2", "temperature_c", "[-80, 100]"});
  ExpectError(ReplaceLine(ValidCsv(), 3, "# units=mm/s2"), {"line 3", "units", "\"m/s2\" or \"g\""});
  ExpectError(ReplaceLine(ValidCsv(), 4, "# excitation=hammer"),
              {"line 4", "excitation", "\"ambient\" or \"impact\""});
  ExpectError(ReplaceLine(ValidCsv(), 300, "# units=g"), {"line 300", "metadata line after the header"});
}

TEST(RecordReader, HeaderRules) {
  ExpectError("# units=g\n", {"no header"});
  ExpectError("", {"no header"});
  ExpectError(ReplaceLine(ValidCsv(), 5, "t,a1,a2"), {"line 5", "column 1", "time_s"});
  ExpectError(ReplaceLine(ValidCsv(), 5, "time_s,a1,a-2"), {"line 5", "column 3", "[A-Za-z0-9_]{1,32}"});
  ExpectError(ReplaceLine(ValidCsv(), 5, "time_s,a1,"), {"line 5", "column 3", "channel name"});
  ExpectError(ReplaceLine(ValidCsv(), 5, "time_s,a1,a1"), {"line 5", "column 3", "appears twice"});
  ExpectError(ReplaceLine(ValidCsv(), 5, "time_s"), {"line 5", "no channel"});
  std::string many = "time_s";
  for (int c = 0; c < kMaxChannels + 1; ++c) many += ",c" + std::to_string(c);
  ExpectError(many + "\n", {"line 1", "65 channels", "at most 64"});
}

TEST(RecordReader, ChannelsMustBeSensorsOfTheMember) {
  model::Member m;
  m.id = "tannery-yard-hanger-1";
  m.sensors = {{"a2", 1.0, 0.0, model::Direction::kVertical},
               {"a1", 2.0, 0.0, model::Direction::kVertical},
               {"a3", 3.0, 0.0, model::Direction::kVertical}};
  RecordReadOptions o;
  o.member = &m;
  Record r;
  EXPECT_TRUE(Parse(ValidCsv(), &r, o).ok());  // subset, other order
  ExpectError(ReplaceLine(ValidCsv(), 5, "time_s,a1,b7"),
              {"line 5", "column 3", "\"b7\"", "not a sensor", "tannery-yard-hanger-1"}, o);
}

TEST(RecordReader, CellRules) {
  const std::string v = ValidCsv();
  ExpectError(ReplaceLine(v, 10, "0.04,0.1"), {"line 10", "2 cells", "expected 3"});
  ExpectError(ReplaceLine(v, 10, "0.04,0.1,0.2,0.3"), {"line 10", "more than 3 cells"});
  ExpectError(ReplaceLine(v, 10, "0.04,,0.2"), {"line 10", "column 2 (a1)", "empty cell"});
  ExpectError(ReplaceLine(v, 10, "0.04,0.1,"), {"line 10", "column 3 (a2)", "empty cell"});
  ExpectError(ReplaceLine(v, 10, "0.04,0.1,abc"), {"line 10", "column 3 (a2)", "\"abc\"", "not a number"});
  ExpectError(ReplaceLine(v, 10, "0.04,0.1x,0.2"), {"line 10", "column 2 (a1)", "not a number"});
  ExpectError(ReplaceLine(v, 10, "0.04,nan,0.2"), {"line 10", "column 2 (a1)", "not a finite number"});
  ExpectError(ReplaceLine(v, 10, "0.04,0.1,-inf"), {"line 10", "column 3 (a2)", "not a finite number"});
  ExpectError(ReplaceLine(v, 10, "0.04,1e999,0.2"), {"line 10", "column 2 (a1)", "not a number"});
  ExpectError(ReplaceLine(v, 10, ""), {"line 10", "empty line inside the data"});
}

TEST(RecordReader, SamplingRules) {
  const std::string v = ValidCsv();
  // Row 4 (line 10) at t = 0.04 s; 0.03 repeats the previous time.
  ExpectError(ReplaceLine(v, 10, "0.03,0.1,0.2"), {"line 10", "column 1 (time_s)", "does not increase"});
  // 0.0412 s: spacing 0.0112 s against a 0.01 s step, 12 % off.
  ExpectError(ReplaceLine(v, 10, "0.0412,0.1,0.2"), {"line 10", "column 1 (time_s)", "uniform", "1 %"});
  // 0.5 % off is within the 1 % rule.
  Record r;
  EXPECT_TRUE(Parse(ReplaceLine(v, 10, "0.04005,0.1,0.2"), &r).ok());
}

TEST(RecordReader, LengthLimits) {
  ExpectError(ValidCsv(999, kFs), {"999 samples", "at least 1000"});
  // 1000 samples at 200 Hz last 5 s.
  ExpectError(ValidCsv(1000, 200.0), {"5 s", "at least 10 s"});
  RecordReadOptions o;
  o.max_cells = 2000;  // 1000 rows of 2 channels: row 1001 (line 1006) breaks it
  ExpectError(ValidCsv(), {"line 1006", "more than 2000 data cells"}, o);
  std::string longline = ValidCsv() + std::string(kMaxLineBytes + 10, '1') + "\n";
  ExpectError(longline, {"line 1106", "longer than 65536 bytes"});
}

TEST(RecordReader, ReadFromFileNamesThePath) {
  Record r;
  const Status s = ReadRecordCsv("/nonexistent/dir/r.csv", {}, &r);
  ASSERT_FALSE(s.ok());
  EXPECT_NE(s.message.find("/nonexistent/dir/r.csv"), std::string::npos);
}

// ---- Quality checks -> cautions ----

Record QualityRecord(Eigen::MatrixXd y, double fs = 200.0) {
  Record r;
  for (Eigen::Index j = 0; j < y.cols(); ++j) r.channels.push_back("c" + std::to_string(j + 1));
  r.samples = std::move(y);
  r.sample_rate_hz = fs;
  CheckRecordQuality(&r);
  return r;
}

Eigen::MatrixXd Noise(Eigen::Index n, Eigen::Index c, unsigned seed = 2) {
  std::mt19937_64 rng(seed);
  std::normal_distribution<double> g(0.0, 1.0);
  Eigen::MatrixXd y(n, c);
  for (Eigen::Index k = 0; k < y.size(); ++k) y.data()[k] = g(rng);
  return y;
}

TEST(RecordQuality, CleanRecordHasNoCautions) {
  const Record r = QualityRecord(Noise(4000, 3));
  EXPECT_TRUE(r.cautions.empty()) << r.cautions.front().code;
}

TEST(RecordQuality, ClippingDropoutDeadDriftSingleLowRate) {
  Eigen::MatrixXd y = Noise(4000, 4);
  // c1 clipped: capped at 2.0 with a run of 6 samples held at the cap (a
  // rail; white noise itself stays above 2 sigma for 6 samples with
  // probability 0.023^6, about 1e-10).
  y.col(0) = y.col(0).cwiseMin(2.0);
  y.col(0).segment(100, 6).setConstant(2.0);
  y.col(1).segment(2000, 20).setZero();  // c2 dropout
  y.col(2) *= 1e-5;                      // c3 dead: variance 1e-10 of the others
  for (Eigen::Index k = 0; k < y.rows(); ++k)
    y(k, 3) += 5.0 * std::sin(2 * M_PI * 0.05 * k / 200.0);  // c4 drift
  const Record r = QualityRecord(y);
  auto names = [&](const std::string& code) {
    std::string s;
    for (const auto& c : r.cautions)
      if (c.code == code) s += c.message + "|";
    return s;
  };
  EXPECT_NE(names("clipped-channel").find("c1"), std::string::npos);
  EXPECT_NE(names("dropout").find("c2"), std::string::npos);
  EXPECT_NE(names("dead-channel").find("c3"), std::string::npos);
  EXPECT_NE(names("drift").find("c4"), std::string::npos);
  EXPECT_EQ(names("clipped-channel").find("c2"), std::string::npos);
  EXPECT_EQ(names("drift").find("c1"), std::string::npos);

  const Record single = QualityRecord(Noise(4000, 1), 50.0);
  EXPECT_TRUE(HasCaution(single, "single-channel"));
  EXPECT_TRUE(HasCaution(single, "low-sample-rate"));
}

// ---- Fuzz ----

// Truncations and byte garbling of a valid record (fixed seed, 400 cases):
// each must give either an error that names a line or a valid record with
// finite samples of the right shape; never a crash (the test runs under
// the sanitizers in CI's TAUT_SANITIZE build).
TEST(RecordReader, FuzzTruncatedAndGarbled) {
  const std::string base = ValidCsv();
  std::mt19937_64 rng(12345);
  int errors = 0, valid = 0;
  for (int c = 0; c < 400; ++c) {
    std::string t = base;
    const int kind = c % 4;
    if (kind == 0) {
      t.resize(std::uniform_int_distribution<std::size_t>(0, t.size())(rng));
    } else {
      const int flips = 1 + static_cast<int>(rng() % 8);
      for (int f = 0; f < flips; ++f) {
        const std::size_t at = std::uniform_int_distribution<std::size_t>(0, t.size() - 1)(rng);
        if (kind == 1) t[at] = static_cast<char>(rng() & 0xff);  // any byte
        if (kind == 2) t[at] = ",\n\r.-+e#=0 \t"[rng() % 13];    // structural bytes
        if (kind == 3) t.insert(at, std::string(1 + rng() % 5, static_cast<char>(rng() & 0xff)));
      }
    }
    Record r;
    const Status s = Parse(t, &r);
    if (s.ok()) {
      ++valid;
      EXPECT_EQ(static_cast<std::size_t>(r.samples.cols()), r.channels.size());
      EXPECT_GE(r.samples.rows(), kMinSamples);
      EXPECT_TRUE(r.samples.allFinite());
      EXPECT_GT(r.sample_rate_hz, 0.0);
    } else {
      ++errors;
      EXPECT_FALSE(s.message.empty());
      const bool names_line = s.message.find("line ") != std::string::npos;
      const bool whole_file = s.message.find("samples") != std::string::npos ||
                              s.message.find("record lasts") != std::string::npos ||
                              s.message.find("no header") != std::string::npos;
      EXPECT_TRUE(names_line || whole_file) << s.message;
    }
  }
  EXPECT_GT(errors, 100);
  EXPECT_GT(valid, 0);  // garbling a digit in a cell often leaves a valid record
}

}  // namespace
}  // namespace taut::estimation
