#include "estimation/record.h"

#include <algorithm>
#include <charconv>
#include <cmath>
#include <cstdio>
#include <cstring>
#include <fstream>
#include <istream>
#include <sstream>
#include <string_view>
#include <unordered_set>

namespace taut::estimation {

namespace {

// Read buffer of the streaming line reader. A line is handed out as a view
// into this buffer; a line that straddles a refill is moved to the front.
constexpr std::size_t kReadBufferBytes = 1 << 20;
static_assert(kReadBufferBytes > 2 * kMaxLineBytes, "a full line must fit after compaction");

class LineReader {
 public:
  explicit LineReader(std::istream& in) : in_(in), buf_(kReadBufferBytes) {}

  // Next line without its terminator ("\n" or "\r\n"). Returns false at end
  // of input. Sets too_long() when a line exceeds kMaxLineBytes.
  bool Next(std::string_view* line) {
    for (;;) {
      const char* begin = buf_.data() + pos_;
      const char* nl = static_cast<const char*>(std::memchr(begin, '\n', end_ - pos_));
      if (nl != nullptr) {
        std::size_t len = static_cast<std::size_t>(nl - begin);
        if (len > kMaxLineBytes) {
          too_long_ = true;
          return false;
        }
        pos_ += len + 1;
        ++line_number_;
        *line = Trim(std::string_view(begin, len));
        if (line_number_ == 1) SkipBom(line);
        return true;
      }
      if (end_ - pos_ > kMaxLineBytes) {
        too_long_ = true;
        return false;
      }
      if (eof_) {
        if (pos_ == end_) return false;
        std::size_t len = end_ - pos_;
        pos_ = end_;
        ++line_number_;
        *line = Trim(std::string_view(begin, len));
        if (line_number_ == 1) SkipBom(line);
        return true;
      }
      // Compact and refill.
      std::memmove(buf_.data(), begin, end_ - pos_);
      end_ -= pos_;
      pos_ = 0;
      in_.read(buf_.data() + end_, static_cast<std::streamsize>(buf_.size() - end_));
      std::streamsize got = in_.gcount();
      end_ += static_cast<std::size_t>(got);
      if (got == 0 || !in_) eof_ = true;
    }
  }

  std::int64_t line_number() const { return line_number_; }
  bool too_long() const { return too_long_; }

 private:
  // A UTF-8 byte order mark (spreadsheet exports write one) is not part of
  // the first line's text.
  static void SkipBom(std::string_view* s) {
    if (s->size() >= 3 && s->substr(0, 3) == "\xEF\xBB\xBF") s->remove_prefix(3);
  }
  static std::string_view Trim(std::string_view s) {
    if (!s.empty() && s.back() == '\r') s.remove_suffix(1);
    return s;
  }
  std::istream& in_;
  std::vector<char> buf_;
  std::size_t pos_ = 0, end_ = 0;
  bool eof_ = false;
  bool too_long_ = false;
  std::int64_t line_number_ = 0;
};

std::string_view StripBlanks(std::string_view s) {
  while (!s.empty() && (s.front() == ' ' || s.front() == '\t')) s.remove_prefix(1);
  while (!s.empty() && (s.back() == ' ' || s.back() == '\t')) s.remove_suffix(1);
  return s;
}

// Printable excerpt of a cell for an error message (garbage bytes escaped).
std::string Excerpt(std::string_view s) {
  constexpr std::size_t kMaxExcerpt = 24;
  std::string out;
  for (std::size_t i = 0; i < s.size() && i < kMaxExcerpt; ++i) {
    unsigned char c = static_cast<unsigned char>(s[i]);
    if (c >= 0x20 && c < 0x7f) {
      out.push_back(static_cast<char>(c));
    } else {
      char hex[8];
      std::snprintf(hex, sizeof hex, "\\x%02x", c);
      out += hex;
    }
  }
  if (s.size() > kMaxExcerpt) out += "...";
  return out;
}

std::string Where(std::int64_t line) { return "line " + std::to_string(line); }
std::string Where(std::int64_t line, std::size_t col, const std::string& name) {
  return "line " + std::to_string(line) + ", column " + std::to_string(col) + " (" + name + ")";
}

// std::from_chars for double (GCC 12 implements it; locale independent and
// several times faster than strtod). Accepts an optional leading '+'.
// Clinger's fast path (W. D. Clinger, How to read floating point numbers
// accurately, PLDI 1990): a decimal [-]digits[.digits][(e|E)[+-]digits]
// whose digits, read as one integer m, stay below 2^53 and whose decimal
// exponent e satisfies |e| <= 22 is m * 10^e (or m / 10^-e) with both
// operands exact doubles (10^22 is the largest exact power of ten), and one
// IEEE 754 multiplication or division is correctly rounded: the double
// std::from_chars returns. It covers what gateways write (%.7g and the like)
// at a fraction of the general algorithm's cost (the reader's hot loop:
// half of its time went to from_chars). Anything else returns false and
// goes to std::from_chars.
// Parses the longest fast-path decimal at [p, end) and returns the pointer
// past it, or nullptr when the text there is not one (the caller then uses
// the general path).
const char* FastDecimalPrefix(const char* p, const char* const end, double* v) {
  static constexpr double kPow10[] = {1e0,  1e1,  1e2,  1e3,  1e4,  1e5,  1e6,  1e7,  1e8,  1e9,  1e10, 1e11,
                                      1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18, 1e19, 1e20, 1e21, 1e22};
  constexpr std::uint64_t kMaxExactMantissa = std::uint64_t{1} << 53;
  // 19 decimal digits always fit in 64 bits (10^19 < 2^64), so the digit
  // loops need no overflow check; the mantissa is checked once at the end.
  constexpr std::ptrdiff_t kMaxDigits = 19;
  const bool negative = p < end && *p == '-';
  if (negative) ++p;
  std::uint64_t m = 0;
  auto read_digits = [&]() {
    const char* const first = p;
    for (; p < end; ++p) {
      const unsigned d = static_cast<unsigned char>(*p) - static_cast<unsigned>('0');
      if (d > 9) break;
      m = m * 10 + d;
    }
    return p - first;
  };
  const std::ptrdiff_t int_digits = read_digits();
  std::ptrdiff_t frac_digits = 0;
  if (p < end && *p == '.') {
    ++p;
    frac_digits = read_digits();
  }
  if (int_digits + frac_digits == 0 || int_digits + frac_digits > kMaxDigits || m >= kMaxExactMantissa)
    return nullptr;
  int exp10 = -static_cast<int>(frac_digits);
  if (p < end && (*p == 'e' || *p == 'E')) {
    ++p;
    const bool neg_exp = p < end && *p == '-';
    if (p < end && (*p == '-' || *p == '+')) ++p;
    int e = 0;
    const char* const first = p;
    for (; p < end && p - first < 4; ++p) {
      const unsigned d = static_cast<unsigned char>(*p) - static_cast<unsigned>('0');
      if (d > 9) break;
      e = e * 10 + static_cast<int>(d);
    }
    if (p == first) return nullptr;
    exp10 += neg_exp ? -e : e;
  }
  if (exp10 < -22 || exp10 > 22) return nullptr;
  const double x = static_cast<double>(m);  // exact: m < 2^53
  const double r = exp10 < 0 ? x / kPow10[-exp10] : x * kPow10[exp10];
  *v = negative ? -r : r;
  return p;
}

bool FastDecimal(std::string_view s, double* v) {
  const char* const end = s.data() + s.size();
  return FastDecimalPrefix(s.data(), end, v) == end;
}

// A well-formed data row on the fast path: `cells` fast-path decimals
// separated by single commas, nothing else (no blanks, no trailing comma).
// Anything else returns false and the row goes through the general path,
// which names what is wrong.
bool FastRow(std::string_view line, std::size_t cells, double* values) {
  const char* p = line.data();
  const char* const end = p + line.size();
  for (std::size_t c = 0; c < cells; ++c) {
    const char* q = FastDecimalPrefix(p, end, &values[c]);
    if (q == nullptr) return false;
    if (c + 1 < cells) {
      if (q == end || *q != ',') return false;
      p = q + 1;
    } else if (q != end) {
      return false;
    }
  }
  return true;
}

bool ParseDouble(std::string_view s, double* v) {
  s = StripBlanks(s);
  if (!s.empty() && s.front() == '+') s.remove_prefix(1);
  if (s.empty()) return false;
  if (FastDecimal(s, v)) return true;
  auto [p, ec] = std::from_chars(s.data(), s.data() + s.size(), *v);
  return ec == std::errc() && p == s.data() + s.size();
}

bool ValidChannelName(std::string_view s) {
  if (s.empty() || s.size() > kMaxChannelNameLength) return false;
  for (char c : s) {
    if (!((c >= 'A' && c <= 'Z') || (c >= 'a' && c <= 'z') || (c >= '0' && c <= '9') || c == '_'))
      return false;
  }
  return true;
}

// ISO 8601 UTC, "YYYY-MM-DDTHH:MM:SS[.fraction]Z".
bool ValidIsoUtc(std::string_view s) {
  auto digits = [&](std::size_t at, std::size_t n, int lo, int hi) {
    if (at + n > s.size()) return false;
    int v = 0;
    for (std::size_t i = at; i < at + n; ++i) {
      if (s[i] < '0' || s[i] > '9') return false;
      v = v * 10 + (s[i] - '0');
    }
    return v >= lo && v <= hi;
  };
  if (s.size() < 20) return false;
  if (!digits(0, 4, 1900, 9999) || s[4] != '-' || !digits(5, 2, 1, 12) || s[7] != '-' ||
      !digits(8, 2, 1, 31) || s[10] != 'T' || !digits(11, 2, 0, 23) || s[13] != ':' ||
      !digits(14, 2, 0, 59) || s[16] != ':' || !digits(17, 2, 0, 60))
    return false;
  std::size_t i = 19;
  if (i < s.size() && s[i] == '.') {
    ++i;
    std::size_t start = i;
    while (i < s.size() && s[i] >= '0' && s[i] <= '9') ++i;
    if (i == start) return false;
  }
  return i + 1 == s.size() && s[i] == 'Z';
}

// Longest run of consecutive samples equal to `value` in column `x`.
Eigen::Index LongestRun(const Eigen::Ref<const Eigen::VectorXd>& x, double value) {
  Eigen::Index best = 0, run = 0;
  for (Eigen::Index i = 0; i < x.size(); ++i) {
    run = (x[i] == value) ? run + 1 : 0;
    best = std::max(best, run);
  }
  return best;
}

std::string Fmt(double v, int precision = 3) {
  std::ostringstream o;
  o.precision(precision);
  o << v;
  return o.str();
}

}  // namespace

const char* ToString(Excitation e) { return e == Excitation::kImpact ? "impact" : "ambient"; }

bool ParseExcitation(const std::string& text, Excitation* e) {
  if (text == "ambient") {
    *e = Excitation::kAmbient;
    return true;
  }
  if (text == "impact") {
    *e = Excitation::kImpact;
    return true;
  }
  return false;
}

Status ParseRecordCsv(std::istream& in, const RecordReadOptions& options, Record* record) {
  *record = Record{};
  LineReader reader(in);
  std::string_view line;
  std::unordered_set<std::string> seen_keys;
  std::optional<std::string> file_units;
  std::optional<double> file_temperature;
  std::optional<Excitation> file_excitation;

  // 1. Metadata lines and the header.
  bool have_header = false;
  while (reader.Next(&line)) {
    const std::int64_t ln = reader.line_number();
    if (!line.empty() && line.front() == '#') {
      std::string_view body = StripBlanks(line.substr(1));
      std::size_t eq = body.find('=');
      if (eq == std::string_view::npos)
        return Status::InvalidArgument(Where(ln) + ": metadata line \"" + Excerpt(line) +
                                       "\" is not of the form # key=value");
      std::string key(StripBlanks(body.substr(0, eq)));
      std::string value(StripBlanks(body.substr(eq + 1)));
      if (!seen_keys.insert(key).second)
        return Status::InvalidArgument(Where(ln) + ": metadata key \"" + Excerpt(key) + "\" given twice");
      if (key == "recorded_at") {
        if (!ValidIsoUtc(value))
          return Status::InvalidArgument(Where(ln) + ": recorded_at = \"" + Excerpt(value) +
                                         "\" is not ISO 8601 UTC (YYYY-MM-DDTHH:MM:SSZ)");
        record->recorded_at = value;
      } else if (key == "temperature_c") {
        double t;
        if (!ParseDouble(value, &t) || !std::isfinite(t) || t < kMinTemperature_c || t > kMaxTemperature_c)
          return Status::InvalidArgument(Where(ln) + ": temperature_c = \"" + Excerpt(value) +
                                         "\" must be a number in [" + Fmt(kMinTemperature_c) + ", " +
                                         Fmt(kMaxTemperature_c) + "] C");
        file_temperature = t;
      } else if (key == "units") {
        if (value != "m/s2" && value != "g")
          return Status::InvalidArgument(Where(ln) + ": units = \"" + Excerpt(value) +
                                         "\" must be \"m/s2\" or \"g\"");
        file_units = value;
      } else if (key == "excitation") {
        Excitation e;
        if (!ParseExcitation(value, &e))
          return Status::InvalidArgument(Where(ln) + ": excitation = \"" + Excerpt(value) +
                                         "\" must be \"ambient\" or \"impact\"");
        file_excitation = e;
      } else {
        return Status::InvalidArgument(Where(ln) + ": unknown metadata key \"" + Excerpt(key) +
                                       "\" (known: recorded_at, temperature_c, units, excitation)");
      }
      continue;
    }
    // The header.
    std::size_t col = 0;
    std::size_t start = 0;
    std::unordered_set<std::string> names;
    for (;;) {
      std::size_t comma = line.find(',', start);
      std::string_view cell =
          StripBlanks(line.substr(start, comma == std::string_view::npos ? line.npos : comma - start));
      ++col;
      if (col == 1) {
        if (cell != "time_s")
          return Status::InvalidArgument(
              Where(ln) + ", column 1: header must start with \"time_s\", found \"" + Excerpt(cell) + "\"");
      } else {
        std::string name(cell);
        if (!ValidChannelName(name))
          return Status::InvalidArgument(Where(ln) + ", column " + std::to_string(col) + ": channel name \"" +
                                         Excerpt(cell) + "\" must match [A-Za-z0-9_]{1,32}");
        if (!names.insert(name).second)
          return Status::InvalidArgument(Where(ln) + ", column " + std::to_string(col) + ": channel \"" +
                                         name + "\" appears twice");
        if (options.member != nullptr) {
          const auto& s = options.member->sensors;
          if (std::none_of(s.begin(), s.end(), [&](const model::Sensor& x) { return x.channel == name; }))
            return Status::InvalidArgument(Where(ln) + ", column " + std::to_string(col) + ": channel \"" +
                                           name + "\" is not a sensor of member \"" + options.member->id +
                                           "\"");
        }
        record->channels.push_back(name);
      }
      if (comma == std::string_view::npos) break;
      start = comma + 1;
    }
    if (record->channels.empty())
      return Status::InvalidArgument(Where(ln) + ": header has no channel after time_s (at least 1 needed)");
    if (record->channels.size() > static_cast<std::size_t>(kMaxChannels))
      return Status::InvalidArgument(Where(ln) + ": " + std::to_string(record->channels.size()) +
                                     " channels, at most " + std::to_string(kMaxChannels) + " allowed");
    have_header = true;
    break;
  }
  if (reader.too_long())
    return Status::InvalidArgument(Where(reader.line_number() + 1) + ": line longer than " +
                                   std::to_string(kMaxLineBytes) + " bytes");
  if (!have_header) return Status::InvalidArgument("no header line (time_s,<channels>) found");

  // 2. Data rows, row-major into `data`; times kept for the spacing check.
  const std::size_t nch = record->channels.size();
  const std::int64_t max_cells = std::min(options.max_cells, kMaxCells);
  const std::int64_t max_rows = max_cells / static_cast<std::int64_t>(nch);
  std::vector<double> data;
  std::vector<double> times;
  std::vector<std::int64_t> blank_lines;  // pending blank lines (allowed at end of file only)
  const std::int64_t header_line = reader.line_number();
  std::vector<double> row(nch + 1);  // one row's cells on the fast path
  while (reader.Next(&line)) {
    const std::int64_t ln = reader.line_number();
    if (StripBlanks(line).empty()) {
      blank_lines.push_back(ln);
      continue;
    }
    if (!blank_lines.empty())
      return Status::InvalidArgument(Where(blank_lines.front()) + ": empty line inside the data");
    if (line.front() == '#')
      return Status::InvalidArgument(Where(ln) +
                                     ": metadata line after the header (metadata must come first)");
    if (static_cast<std::int64_t>(times.size()) >= max_rows)
      return Status::InvalidArgument(Where(ln) + ": more than " + std::to_string(max_cells) +
                                     " data cells (samples x channels)");
    if (FastRow(line, nch + 1, row.data()) && (times.empty() || row[0] > times.back())) {
      times.push_back(row[0]);
      data.insert(data.end(), row.begin() + 1, row.end());
      continue;
    }
    std::size_t start = 0;
    for (std::size_t col = 1; col <= nch + 1; ++col) {
      std::size_t comma = line.find(',', start);
      if (col <= nch && comma == std::string_view::npos)
        return Status::InvalidArgument(Where(ln) + ": " + std::to_string(col) + " cells, expected " +
                                       std::to_string(nch + 1) + " (time_s and " + std::to_string(nch) +
                                       " channels)");
      if (col == nch + 1 && comma != std::string_view::npos)
        return Status::InvalidArgument(Where(ln) + ": more than " + std::to_string(nch + 1) + " cells");
      std::string_view cell = line.substr(start, comma == std::string_view::npos ? line.npos : comma - start);
      // Column name for messages only (no copy on the hot path).
      auto name = [&] { return col == 1 ? std::string("time_s") : record->channels[col - 2]; };
      if (StripBlanks(cell).empty()) return Status::InvalidArgument(Where(ln, col, name()) + ": empty cell");
      double v;
      if (!ParseDouble(cell, &v))
        return Status::InvalidArgument(Where(ln, col, name()) + ": cell \"" + Excerpt(cell) +
                                       "\" is not a number");
      if (!std::isfinite(v))
        return Status::InvalidArgument(Where(ln, col, name()) + ": cell \"" + Excerpt(cell) +
                                       "\" is not a finite number");
      if (col == 1) {
        if (!times.empty() && !(v > times.back()))
          return Status::InvalidArgument(Where(ln, 1, "time_s") + ": time " + Excerpt(cell) +
                                         " s does not increase (previous " + Fmt(times.back(), 9) + " s)");
        times.push_back(v);
      } else {
        data.push_back(v);
      }
      start = comma + 1;
    }
  }
  if (reader.too_long())
    return Status::InvalidArgument(Where(reader.line_number() + 1) + ": line longer than " +
                                   std::to_string(kMaxLineBytes) + " bytes");
  if (in.bad()) return Status::InvalidArgument("read error after " + Where(reader.line_number()));

  const std::int64_t n = static_cast<std::int64_t>(times.size());
  if (n < kMinSamples)
    return Status::InvalidArgument(std::to_string(n) + " samples after the header (line " +
                                   std::to_string(header_line) + "), at least " +
                                   std::to_string(kMinSamples) + " needed");
  const double step = (times.back() - times.front()) / static_cast<double>(n - 1);
  const double duration = step * static_cast<double>(n);
  if (duration < kMinRecordDuration_s)
    return Status::InvalidArgument("record lasts " + Fmt(duration) + " s (" + std::to_string(n) +
                                   " samples), at least " + Fmt(kMinRecordDuration_s) + " s needed");
  for (std::int64_t k = 1; k < n; ++k) {
    double dt = times[k] - times[k - 1];
    if (std::abs(dt - step) > kMaxStepDeviation * step)
      return Status::InvalidArgument(Where(header_line + 1 + k, 1, "time_s") + ": spacing " + Fmt(dt, 6) +
                                     " s departs from the record's step " + Fmt(step, 6) +
                                     " s by more than " + Fmt(100 * kMaxStepDeviation) +
                                     " % (sampling must be uniform)");
  }

  // 3. Units and overrides.
  std::string units = options.units.value_or(file_units.value_or("m/s2"));
  if (units != "m/s2" && units != "g")
    return Status::InvalidArgument("units override \"" + Excerpt(units) + "\" must be \"m/s2\" or \"g\"");
  record->units = units;
  if (options.temperature_c) {
    double t = *options.temperature_c;
    if (!std::isfinite(t) || t < kMinTemperature_c || t > kMaxTemperature_c)
      return Status::InvalidArgument("temperature override " + Fmt(t) + " C outside [" +
                                     Fmt(kMinTemperature_c) + ", " + Fmt(kMaxTemperature_c) + "] C");
    record->temperature_c = t;
  } else {
    record->temperature_c = file_temperature;
  }
  record->excitation = options.excitation.value_or(file_excitation.value_or(Excitation::kAmbient));

  record->sample_rate_hz = 1.0 / step;
  record->start_time_s = times.front();
  std::vector<double>().swap(times);
  record->samples = Eigen::Map<const Eigen::Matrix<double, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor>>(
      data.data(), static_cast<Eigen::Index>(n), static_cast<Eigen::Index>(nch));
  std::vector<double>().swap(data);
  if (units == "g") record->samples *= kStandardGravity_m_s2;

  CheckRecordQuality(record);
  return Status::Ok();
}

Status ReadRecordCsv(const std::string& path, const RecordReadOptions& options, Record* record) {
  std::ifstream in(path, std::ios::binary);
  if (!in) return Status::InvalidArgument(path + ": cannot open the record file");
  Status s = ParseRecordCsv(in, options, record);
  if (!s.ok()) s.message = path + ": " + s.message;
  return s;
}

void CheckRecordQuality(Record* r) {
  const Eigen::Index n = r->samples.rows();
  const Eigen::Index nch = r->samples.cols();
  if (n == 0 || nch == 0) return;
  if (nch == 1)
    r->cautions.push_back(
        {"single-channel",
         "the record has one channel only: mode shapes cannot be measured and modes cannot be "
         "told apart by shape."});
  if (r->sample_rate_hz < kLowSampleRate_hz)
    r->cautions.push_back(
        {"low-sample-rate", "sampling rate " + Fmt(r->sample_rate_hz) + " Hz is below " +
                                Fmt(kLowSampleRate_hz) +
                                " Hz: higher bending modes may lie above the Nyquist frequency " +
                                Fmt(r->sample_rate_hz / 2) + " Hz."});
  Eigen::VectorXd var(nch);
  for (Eigen::Index c = 0; c < nch; ++c) {
    auto x = r->samples.col(c);
    double mean = x.mean();
    var[c] = (x.array() - mean).square().sum() / static_cast<double>(n);
  }
  const double max_var = var.maxCoeff();
  const Eigen::Index block =
      std::max<Eigen::Index>(1, static_cast<Eigen::Index>(kDriftBlock_s * r->sample_rate_hz));
  for (Eigen::Index c = 0; c < nch; ++c) {
    const std::string& name = r->channels[static_cast<std::size_t>(c)];
    auto x = r->samples.col(c);
    if (var[c] == 0.0 || var[c] < kDeadChannelVarianceRatio * max_var) {
      r->cautions.push_back({"dead-channel", "channel " + name + " carries almost no signal (variance " +
                                                 Fmt(var[c]) +
                                                 " (m/s^2)^2): check the sensor and its cable."});
      continue;
    }
    const double hi = x.maxCoeff(), lo = x.minCoeff();
    Eigen::Index clip = std::max(LongestRun(x, hi), LongestRun(x, lo));
    if (clip >= kMinClipRunSamples)
      r->cautions.push_back(
          {"clipped-channel", "channel " + name + " sits at its extreme value for " + std::to_string(clip) +
                                  " consecutive samples: the sensor or recorder was saturated; "
                                  "lower the gain or use a larger range."});
    Eigen::Index zeros = LongestRun(x, 0.0);
    if (zeros >= kMinDropoutRunSamples)
      r->cautions.push_back({"dropout", "channel " + name + " has a run of " + std::to_string(zeros) +
                                            " exact zeros: samples were probably lost."});
    const Eigen::Index nb = n / block;
    if (nb >= 2) {
      const double mean = x.mean();
      double vb = 0.0;
      for (Eigen::Index b = 0; b < nb; ++b) {
        double m = x.segment(b * block, block).mean() - mean;
        vb += m * m;
      }
      vb /= static_cast<double>(nb);
      if (vb > kDriftVarianceShare * var[c])
        r->cautions.push_back(
            {"drift", "channel " + name + ": " + Fmt(100 * vb / var[c], 2) +
                          " % of the variance lies below about " + Fmt(0.5 / kDriftBlock_s, 2) +
                          " Hz (drift or rigid motion); it is removed as a trend but may hide "
                          "low modes."});
    }
  }
}

}  // namespace taut::estimation
