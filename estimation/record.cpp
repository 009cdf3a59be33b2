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

#include "server/iso_time.h"

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
// the general path). `mark` is the decimal mark ('.', or ',' in a
// decimal-comma dialect).
const char* FastDecimalPrefix(const char* p, const char* const end, double* v, char mark = '.') {
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
  if (p < end && *p == mark) {
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

// A well-formed data row on the fast path: `cells` fast-path decimals with
// the decimal mark `mark`, separated by single `delim` characters, nothing
// else (no blanks, no trailing separator). Anything else returns false and
// the row goes through the general path, which names what is wrong.
bool FastRow(std::string_view line, char delim, char mark, std::size_t cells, double* values) {
  const char* p = line.data();
  const char* const end = p + line.size();
  for (std::size_t c = 0; c < cells; ++c) {
    const char* q = FastDecimalPrefix(p, end, &values[c], mark);
    if (q == nullptr) return false;
    if (c + 1 < cells) {
      if (q == end || *q != delim) return false;
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

// A number written with a decimal comma ("0,0123"): the comma becomes a
// point and the text goes through ParseDouble. A cell with both marks
// ("1.234,5": a thousands separator) or two commas is not a number.
bool ParseNumber(std::string_view s, bool decimal_comma, double* v) {
  if (!decimal_comma) return ParseDouble(s, v);
  s = StripBlanks(s);
  const std::size_t comma = s.find(',');
  if (comma == std::string_view::npos) return ParseDouble(s, v);
  if (s.find(',', comma + 1) != std::string_view::npos || s.find('.') != std::string_view::npos) return false;
  char buf[64];
  if (s.size() >= sizeof buf) return false;
  std::memcpy(buf, s.data(), s.size());
  buf[comma] = '.';
  return ParseDouble(std::string_view(buf, s.size()), v);
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

constexpr char kDelimiters[] = {',', ';', '\t'};

std::string DelimiterName(char d) { return d == '\t' ? "tab" : std::string("'") + d + "'"; }

// Splits `line` at every `delim` into `cells` (views, blanks stripped).
void Split(std::string_view line, char delim, std::vector<std::string_view>* cells) {
  cells->clear();
  std::size_t start = 0;
  for (;;) {
    const std::size_t p = line.find(delim, start);
    cells->push_back(StripBlanks(line.substr(start, p == std::string_view::npos ? line.npos : p - start)));
    if (p == std::string_view::npos) return;
    start = p + 1;
  }
}

// Header names of a time column (docs/FORMATS.md section 2.1).
std::optional<TimeColumn> TimeColumnFromName(std::string_view name) {
  if (name == "time_s") return TimeColumn::kSeconds;
  if (name == "time_ms") return TimeColumn::kMilliseconds;
  for (const char* iso : {"time", "timestamp", "datetime", "date_time", "time_utc"})
    if (name == iso) return TimeColumn::kIso8601;
  return std::nullopt;
}

constexpr const char* kTimeCandidates =
    "time_s (seconds), time_ms (milliseconds), time / timestamp / datetime / date_time / time_utc "
    "(ISO 8601 date-times with Z or an offset), or no time column with a '# sample_rate_hz=' line";

bool IsIsoDateTime(std::string_view cell, server::IsoTime* t) {
  return server::ParseIsoTime(cell, t) && t->has_time;
}

// True when every cell of `line` split at `delim` is a number (a decimal
// comma allowed when `delim` is not ','), the first possibly an ISO 8601
// date-time. Sets *cells to the cell count.
bool LooksLikeData(std::string_view line, char delim, std::size_t* cells) {
  std::vector<std::string_view> c;
  Split(line, delim, &c);
  for (std::size_t i = 0; i < c.size(); ++i) {
    double v;
    server::IsoTime t;
    if (!ParseNumber(c[i], delim != ',', &v) && !(i == 0 && IsIsoDateTime(c[i], &t))) return false;
  }
  *cells = c.size();
  return true;
}

// Metadata of the `#` lines.
struct Metadata {
  std::unordered_set<std::string> seen;
  std::optional<std::string> units;
  std::optional<double> temperature_c;
  std::optional<Excitation> excitation;
  std::optional<double> sample_rate_hz;
  std::int64_t sample_rate_line = 0;
  std::string recorded_at;  // normalised UTC, "" = not given
};

}  // namespace

Status CheckRecordedAt(std::string_view text, const std::string& where, std::int64_t now_unix_ms,
                       std::string* utc) {
  if (now_unix_ms == 0) now_unix_ms = server::NowUnixMs();
  server::IsoTime t;
  if (!server::ParseIsoTime(text, &t) || !t.has_time || !t.has_zone)
    return Status::InvalidArgument(where + ": recorded_at = \"" + Excerpt(text) +
                                   "\" is not an ISO 8601 date-time with a zone "
                                   "(YYYY-MM-DDTHH:MM:SSZ or YYYY-MM-DDTHH:MM:SS+hh:mm)");
  std::int64_t min_ms = 0;
  server::ParseIsoUtc(std::to_string(kMinRecordedAtYear) + "-01-01T00:00:00Z", &min_ms);
  if (t.unix_ms < min_ms)
    return Status::InvalidArgument(where + ": recorded_at = \"" + Excerpt(text) + "\" lies before " +
                                   std::to_string(kMinRecordedAtYear) + ": check the logger's clock");
  if (t.unix_ms > now_unix_ms + kRecordedAtFutureMargin_ms)
    return Status::InvalidArgument(where + ": recorded_at = \"" + Excerpt(text) + "\" lies " +
                                   Fmt(static_cast<double>(t.unix_ms - now_unix_ms) / 3.6e6, 3) +
                                   " h after now (" + server::FormatIsoUtc(now_unix_ms) + ", at most " +
                                   std::to_string(kRecordedAtFutureMargin_ms / 60000) +
                                   " min of clock skew allowed): check the logger's clock and time zone");
  *utc = server::FormatIsoUtc(t.unix_ms);
  return Status::Ok();
}

namespace {

Status ParseMetadata(std::string_view line, std::int64_t ln, std::int64_t now_unix_ms, Metadata* meta) {
  std::string_view body = StripBlanks(line.substr(1));
  std::size_t eq = body.find('=');
  if (eq == std::string_view::npos)
    return Status::InvalidArgument(Where(ln) + ": metadata line \"" + Excerpt(line) +
                                   "\" is not of the form # key=value");
  std::string key(StripBlanks(body.substr(0, eq)));
  std::string value(StripBlanks(body.substr(eq + 1)));
  if (!meta->seen.insert(key).second)
    return Status::InvalidArgument(Where(ln) + ": metadata key \"" + Excerpt(key) + "\" given twice");
  if (key == "recorded_at") return CheckRecordedAt(value, Where(ln), now_unix_ms, &meta->recorded_at);
  if (key == "temperature_c") {
    double t;
    if (!ParseDouble(value, &t) || !std::isfinite(t) || t < kMinTemperature_c || t > kMaxTemperature_c)
      return Status::InvalidArgument(Where(ln) + ": temperature_c = \"" + Excerpt(value) +
                                     "\" must be a number in [" + Fmt(kMinTemperature_c) + ", " +
                                     Fmt(kMaxTemperature_c) + "] C");
    meta->temperature_c = t;
  } else if (key == "units") {
    if (!KnownUnits(value))
      return Status::InvalidArgument(Where(ln) + ": units = \"" + Excerpt(value) +
                                     "\" must be \"m/s2\" or \"g\" (or mg, V, mV)");
    meta->units = value;
  } else if (key == "excitation") {
    Excitation e;
    if (!ParseExcitation(value, &e))
      return Status::InvalidArgument(Where(ln) + ": excitation = \"" + Excerpt(value) +
                                     "\" must be \"ambient\" or \"impact\"");
    meta->excitation = e;
  } else if (key == "sample_rate_hz") {
    double f;
    if (!ParseDouble(value, &f) || !std::isfinite(f) || f <= 0.0 || f > 1e6)
      return Status::InvalidArgument(Where(ln) + ": sample_rate_hz = \"" + Excerpt(value) +
                                     "\" must be a number in (0, 1e6] Hz");
    meta->sample_rate_hz = f;
    meta->sample_rate_line = ln;
  } else {
    return Status::InvalidArgument(
        Where(ln) + ": unknown metadata key \"" + Excerpt(key) +
        "\" (known: recorded_at, temperature_c, units, excitation, sample_rate_hz)");
  }
  return Status::Ok();
}

// True when `line`, split at the profile's delimiter (or the first of
// ',' ';' tab that fits), holds every column the profile names.
bool ProfileHeader(std::string_view line, const ImportProfile& profile, char* delim) {
  std::vector<std::string_view> cells;
  for (char d : kDelimiters) {
    if (profile.delimiter && *profile.delimiter != d) continue;
    Split(line, d, &cells);
    auto has = [&](const std::string& name) {
      return std::find(cells.begin(), cells.end(), name) != cells.end();
    };
    if (!profile.time_column.empty() && !has(profile.time_column)) continue;
    if (std::all_of(profile.channels.begin(), profile.channels.end(),
                    [&](const ImportProfile::Channel& c) { return has(c.column); })) {
      *delim = d;
      return true;
    }
  }
  return false;
}

// One column of the file as the reader uses it.
struct ChannelColumn {
  std::size_t column = 0;  // 0-based in the file
  double scale = 1.0, offset = 0.0;
};

}  // namespace

const char* ToString(Excitation e) { return e == Excitation::kImpact ? "impact" : "ambient"; }

const char* ToString(TimeColumn t) {
  switch (t) {
    case TimeColumn::kSeconds:
      return "seconds";
    case TimeColumn::kMilliseconds:
      return "milliseconds";
    case TimeColumn::kIso8601:
      return "iso8601";
    case TimeColumn::kNone:
      return "none";
  }
  return "seconds";
}

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

bool KnownUnits(const std::string& u) {
  return u == "m/s2" || u == "g" || u == "mg" || u == "V" || u == "mV";
}

Status ParseRecordCsv(std::istream& in, const RecordReadOptions& options, Record* record) {
  *record = Record{};
  const ImportProfile* profile = options.profile;
  const std::int64_t now_ms = options.now_unix_ms != 0 ? options.now_unix_ms : server::NowUnixMs();
  LineReader reader(in);
  std::string_view line;
  Metadata meta;
  auto line_too_long = [&] {
    return Status::InvalidArgument(Where(reader.line_number() + 1) + ": line longer than " +
                                   std::to_string(kMaxLineBytes) + " bytes");
  };

  // 0. Lines an import profile skips.
  if (profile != nullptr) {
    for (int k = 0; k < profile->skip_lines; ++k) {
      if (!reader.Next(&line)) {
        if (reader.too_long()) return line_too_long();
        return Status::InvalidArgument("the file ends within the profile's skip_lines = " +
                                       std::to_string(profile->skip_lines));
      }
    }
  }

  // 1. Metadata, logger text and the header. Without a profile, the header
  // is the first line whose first cell names a time column; logger text
  // above it is skipped. A file without a time column (sample_rate_hz) has
  // its header on the line just above the first data row.
  std::vector<std::pair<std::int64_t, std::string>> text_lines;  // logger text above the header
  std::string header;
  std::int64_t header_line = 0;
  char delim = ',';
  std::optional<TimeColumn> header_time;
  std::string first_row;  // a data row read while looking for the header
  std::int64_t first_row_line = 0;
  bool have_header = false;
  std::vector<std::string_view> cells;
  while (reader.Next(&line)) {
    const std::int64_t ln = reader.line_number();
    if (!line.empty() && line.front() == '#') {
      if (Status s = ParseMetadata(line, ln, now_ms, &meta); !s.ok()) return s;
      continue;
    }
    if (StripBlanks(line).empty()) continue;
    if (profile != nullptr && (!profile->time_column.empty() || !profile->channels.empty())) {
      // The header is the first line that holds the columns the profile
      // names; lines above it are logger text.
      if (ProfileHeader(line, *profile, &delim)) {
        header = line;
        header_line = ln;
        have_header = true;
        break;
      }
      text_lines.emplace_back(ln, std::string(line));
      if (text_lines.size() > static_cast<std::size_t>(kMaxFreeTextLines)) {
        std::string wanted;
        if (!profile->time_column.empty()) wanted = "time column \"" + Excerpt(profile->time_column) + "\"";
        for (const auto& c : profile->channels)
          wanted += (wanted.empty() ? "\"" : ", \"") + Excerpt(c.column) + "\"";
        return Status::InvalidArgument(Where(ln) + ": more than " + std::to_string(kMaxFreeTextLines) +
                                       " lines without a header holding the profile's columns (" + wanted +
                                       ")");
      }
      continue;
    }
    {
      const std::size_t p = line.find_first_of(",;\t");
      if (auto kind = TimeColumnFromName(StripBlanks(line.substr(0, p)))) {
        header_time = kind;
        delim = p == std::string_view::npos ? ',' : line[p];
        header = line;
        header_line = ln;
        have_header = true;
        break;
      }
    }
    std::vector<std::pair<char, std::size_t>> as_data;  // (delimiter, cells) under which `line` is data
    for (char d : kDelimiters) {
      std::size_t n;
      // A lone number is a data row only in a file without a time column
      // (one channel); elsewhere it is logger text (a serial number).
      if (LooksLikeData(line, d, &n) &&
          (n > 1 || meta.sample_rate_hz || (profile && profile->sample_rate_hz)))
        as_data.emplace_back(d, n);
    }
    if (as_data.empty()) {
      text_lines.emplace_back(ln, std::string(line));
      if (text_lines.size() > static_cast<std::size_t>(kMaxFreeTextLines))
        return Status::InvalidArgument(
            Where(ln) + ": more than " + std::to_string(kMaxFreeTextLines) +
            " lines of text above the header; expected a header line whose first column is " +
            kTimeCandidates);
      continue;
    }
    // A data row: its header is the line above, which has no time column.
    if (text_lines.empty())
      return Status::InvalidArgument(Where(ln) +
                                     ": a data row where the header line was expected (a header " +
                                     "starts with " + kTimeCandidates + ")");
    const auto& [hl, htext] = text_lines.back();
    if (!meta.sample_rate_hz && !(profile != nullptr && profile->sample_rate_hz)) {
      const std::size_t p = htext.find_first_of(",;\t");
      return Status::InvalidArgument(Where(hl) + ", column 1: header cell \"" +
                                     Excerpt(StripBlanks(std::string_view(htext).substr(0, p))) +
                                     "\" is not a time column (line " + std::to_string(ln) +
                                     " is the first data row); expected " + kTimeCandidates);
    }
    std::vector<char> fits;
    for (const auto& [d, n] : as_data) {
      Split(htext, d, &cells);
      if (cells.size() == n) fits.push_back(d);
    }
    if (fits.empty()) {
      Split(htext, as_data.front().first, &cells);
      return Status::InvalidArgument(Where(ln) + ": " + std::to_string(as_data.front().second) +
                                     " cells, but the header above it (line " + std::to_string(hl) +
                                     ") has " + std::to_string(cells.size()));
    }
    // A cell of one separator cannot hold another (it would not be a
    // number), so at most one separator reads the row as numbers in more
    // than one cell: the first fit is the only reading.
    delim = fits.front();
    header = htext;
    header_line = hl;
    text_lines.pop_back();
    first_row = line;
    first_row_line = ln;
    have_header = true;
    break;
  }
  if (reader.too_long()) return line_too_long();
  if (!have_header)
    return Status::InvalidArgument(std::string("no header line (time_s,<channels>) found") +
                                   (text_lines.empty() ? "" : "; the text lines above have no data row"));

  // 2. The columns: which is the time, which feed which channel.
  Split(header, delim, &cells);
  const std::vector<std::string> names(cells.begin(), cells.end());
  const std::size_t ncols = names.size();
  TimeColumn kind = TimeColumn::kNone;
  std::ptrdiff_t time_index = -1;
  std::optional<double> rate = meta.sample_rate_hz;
  if (profile != nullptr) {
    if (profile->sample_rate_hz) rate = profile->sample_rate_hz;
    if (profile->time != TimeColumn::kNone && !(profile->time == std::nullopt && rate)) {
      time_index = 0;
      if (!profile->time_column.empty()) {
        auto it = std::find(names.begin(), names.end(), profile->time_column);
        if (it == names.end())
          return Status::InvalidArgument(Where(header_line) + ": the profile's time_column \"" +
                                         Excerpt(profile->time_column) + "\" is not in the header");
        time_index = it - names.begin();
      }
      auto by_name = TimeColumnFromName(names[static_cast<std::size_t>(time_index)]);
      kind = profile->time.value_or(by_name.value_or(TimeColumn::kIso8601));
      if (kind == TimeColumn::kNone) time_index = -1;
    }
  } else if (header_time) {
    kind = *header_time;
    time_index = 0;
  }
  if (time_index >= 0 && rate)
    return Status::InvalidArgument(Where(meta.sample_rate_line) +
                                   ": sample_rate_hz is given and the header (line " +
                                   std::to_string(header_line) + ") has a time column: keep one of them");
  if (time_index < 0 && !rate)
    return Status::InvalidArgument(Where(header_line) +
                                   ": no time column and no sample rate: add a '# sample_rate_hz=' line");
  record->time_column = kind;

  std::vector<ChannelColumn> plan;
  std::unordered_set<std::string> seen_channels;
  auto add_channel = [&](std::size_t col, const std::string& name, double scale, double offset) -> Status {
    const std::string where = Where(header_line) + ", column " + std::to_string(col + 1);
    if (!ValidChannelName(name))
      return Status::InvalidArgument(where + ": channel name \"" + Excerpt(name) +
                                     "\" must match [A-Za-z0-9_]{1,32}");
    if (!seen_channels.insert(name).second)
      return Status::InvalidArgument(where + ": channel \"" + name + "\" appears twice");
    if (options.member != nullptr) {
      const auto& s = options.member->sensors;
      if (std::none_of(s.begin(), s.end(), [&](const model::Sensor& x) { return x.channel == name; }))
        return Status::InvalidArgument(where + ": channel \"" + name + "\" is not a sensor of member \"" +
                                       options.member->id + "\"");
    }
    if (!std::isfinite(scale) || scale == 0.0 || !std::isfinite(offset))
      return Status::InvalidArgument(where +
                                     ": the profile's scale must be finite and non-zero, offset finite");
    record->channels.push_back(name);
    plan.push_back({col, scale, offset});
    return Status::Ok();
  };
  if (profile != nullptr && !profile->channels.empty()) {
    for (const auto& c : profile->channels) {
      auto it = std::find(names.begin(), names.end(), c.column);
      if (it == names.end())
        return Status::InvalidArgument(Where(header_line) + ": the profile's column \"" + Excerpt(c.column) +
                                       "\" is not in the header");
      if (it - names.begin() == time_index)
        return Status::InvalidArgument(Where(header_line) + ": the profile maps the time column \"" +
                                       Excerpt(c.column) + "\" to a channel");
      if (Status s = add_channel(static_cast<std::size_t>(it - names.begin()), c.channel, c.scale, c.offset);
          !s.ok())
        return s;
    }
  } else {
    for (std::size_t col = 0; col < ncols; ++col) {
      if (static_cast<std::ptrdiff_t>(col) == time_index) continue;
      if (Status s = add_channel(col, names[col], 1.0, 0.0); !s.ok()) return s;
    }
  }
  if (record->channels.empty())
    return Status::InvalidArgument(Where(header_line) +
                                   ": header has no channel after time_s (at least 1 needed)");
  if (record->channels.size() > static_cast<std::size_t>(kMaxChannels))
    return Status::InvalidArgument(Where(header_line) + ": " + std::to_string(record->channels.size()) +
                                   " channels, at most " + std::to_string(kMaxChannels) + " allowed");

  // Decimal comma: allowed where the separator is not a comma.
  bool decimal_comma = delim != ',';
  if (profile != nullptr && profile->decimal_mark) {
    if (*profile->decimal_mark == ',' && delim == ',')
      return Status::InvalidArgument("the profile's decimal_mark ',' needs a delimiter other than ','");
    decimal_comma = *profile->decimal_mark == ',';
  }

  // 3. Data rows, row-major into `data`; times [s from the first row] kept
  // for the spacing check.
  const std::size_t nch = record->channels.size();
  const std::int64_t max_cells = std::min(options.max_cells, kMaxCells);
  const std::int64_t max_rows = max_cells / static_cast<std::int64_t>(nch);
  const bool identity_plan =
      time_index == 0 && ncols == nch + 1 &&
      std::all_of(plan.begin(), plan.end(), [&, i = std::size_t{1}](const auto& c) mutable {
        return c.column == i++ && c.scale == 1.0 && c.offset == 0.0;
      });
  std::vector<double> data;
  std::vector<double> times;
  std::int64_t rows = 0;
  std::int64_t first_iso_ms = 0, first_iso_sub_ns = 0;
  bool iso_without_zone = false;
  std::vector<std::int64_t> blank_lines;  // pending blank lines (allowed at end of file only)
  std::vector<double> row(ncols);         // one row's cells on the fast path
  std::vector<std::string_view> rc;       // a row's cells on the general path
  const double time_scale = kind == TimeColumn::kMilliseconds ? 1e-3 : 1.0;
  auto column_name = [&](std::size_t col) { return names[col].empty() ? std::string("?") : names[col]; };
  // The fast path: a row of fast-path decimals with increasing time (the
  // canonical file, and the delimiter and decimal-comma dialects); false
  // sends the row to read_row, which reads it or names what is wrong.
  const bool fast_path = kind != TimeColumn::kIso8601;
  const char mark = decimal_comma ? ',' : '.';
  auto fast_row = [&](std::string_view text) {
    // A decimal-comma dialect may also write points (accepted): the comma
    // first, then the point.
    if (!FastRow(text, delim, mark, ncols, row.data()) &&
        !(decimal_comma && FastRow(text, delim, '.', ncols, row.data())))
      return false;
    if (time_index >= 0) {
      const double t = row[static_cast<std::size_t>(time_index)] * time_scale;
      if (!times.empty() && !(t > times.back())) return false;
      times.push_back(t);
    }
    if (identity_plan) {
      data.insert(data.end(), row.begin() + 1, row.end());
    } else {
      for (const auto& c : plan) data.push_back(row[c.column] * c.scale + c.offset);
    }
    ++rows;
    return true;
  };
  auto read_row = [&](std::string_view text, std::int64_t ln) -> Status {
    Split(text, delim, &rc);
    if (rc.size() < ncols)
      return Status::InvalidArgument(Where(ln) + ": " + std::to_string(rc.size()) + " cells, expected " +
                                     std::to_string(ncols) + " (as the header on line " +
                                     std::to_string(header_line) + ")");
    if (rc.size() > ncols)
      return Status::InvalidArgument(Where(ln) + ": more than " + std::to_string(ncols) +
                                     " cells (the header on line " + std::to_string(header_line) + " has " +
                                     std::to_string(ncols) + ")");
    if (time_index >= 0) {
      const auto ti = static_cast<std::size_t>(time_index);
      const std::string_view cell = rc[ti];
      const std::string where = Where(ln, ti + 1, column_name(ti));
      if (cell.empty()) return Status::InvalidArgument(where + ": empty cell");
      double t;
      server::IsoTime iso;
      if (kind == TimeColumn::kIso8601) {
        if (!IsIsoDateTime(cell, &iso)) {
          double v;
          if (ParseNumber(cell, decimal_comma, &v))
            return Status::InvalidArgument(
                where + ": \"" + Excerpt(cell) +
                "\" is a number, not an ISO 8601 date-time: seconds or milliseconds? "
                "Candidates: name the column time_s or time_ms, or write " +
                "date-times (2026-11-20T10:00:00.000Z)");
          return Status::InvalidArgument(
              where + ": \"" + Excerpt(cell) +
              "\" is not an ISO 8601 date-time (2026-11-20T10:00:00.000Z or +hh:mm)");
        }
        if (!iso.has_zone) {
          if (profile == nullptr || !profile->utc_offset_minutes)
            return Status::InvalidArgument(
                where + ": \"" + Excerpt(cell) +
                "\" has no zone (Z or +hh:mm), so the instant is unknown: write the "
                "zone or give \"time_zone\" in an import profile");
          iso.unix_ms -= std::int64_t{*profile->utc_offset_minutes} * 60000;
          iso_without_zone = true;
        }
        if (rows == 0) {
          first_iso_ms = iso.unix_ms;
          first_iso_sub_ns = iso.sub_ms_ns;
        }
        // Seconds from the first row; exact to the nanosecond for any
        // record shorter than a century.
        t = static_cast<double>(iso.unix_ms - first_iso_ms) * 1e-3 +
            static_cast<double>(iso.sub_ms_ns - first_iso_sub_ns) * 1e-9;
      } else {
        double v;
        if (!ParseNumber(cell, decimal_comma, &v))
          return Status::InvalidArgument(where + ": cell \"" + Excerpt(cell) + "\" is not a number");
        if (!std::isfinite(v))
          return Status::InvalidArgument(where + ": cell \"" + Excerpt(cell) + "\" is not a finite number");
        t = v * time_scale;
      }
      if (!times.empty() && !(t > times.back()))
        return Status::InvalidArgument(where + ": time " + Excerpt(cell) + " does not increase (previous " +
                                       Fmt(times.back() / time_scale, 9) + ")");
      times.push_back(t);
    }
    for (const auto& c : plan) {
      const std::string_view cell = rc[c.column];
      if (cell.empty())
        return Status::InvalidArgument(Where(ln, c.column + 1, column_name(c.column)) + ": empty cell");
      double v;
      if (!ParseNumber(cell, decimal_comma, &v))
        return Status::InvalidArgument(
            Where(ln, c.column + 1, column_name(c.column)) + ": cell \"" + Excerpt(cell) +
            "\" is not a number" +
            (decimal_comma ? "" : (delim == ',' ? "" : " (decimal mark '.' expected)")));
      if (!std::isfinite(v))
        return Status::InvalidArgument(Where(ln, c.column + 1, column_name(c.column)) + ": cell \"" +
                                       Excerpt(cell) + "\" is not a finite number");
      data.push_back(v * c.scale + c.offset);
    }
    ++rows;
    return Status::Ok();
  };
  const std::int64_t first_data_line = first_row_line != 0 ? first_row_line : header_line + 1;
  if (first_row_line != 0) {
    if (rows >= max_rows)
      return Status::InvalidArgument(Where(first_row_line) + ": more than " + std::to_string(max_cells) +
                                     " data cells (samples x channels)");
    if (!(fast_path && fast_row(first_row)))
      if (Status s = read_row(first_row, first_row_line); !s.ok()) return s;
  }
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
    if (rows >= max_rows)
      return Status::InvalidArgument(Where(ln) + ": more than " + std::to_string(max_cells) +
                                     " data cells (samples x channels)");
    if (fast_path && fast_row(line)) continue;
    if (Status s = read_row(line, ln); !s.ok()) return s;
  }
  if (reader.too_long()) return line_too_long();
  if (in.bad()) return Status::InvalidArgument("read error after " + Where(reader.line_number()));

  // 4. Sampling: uniform within the jitter tolerance.
  const std::int64_t n = rows;
  if (n < kMinSamples)
    return Status::InvalidArgument(std::to_string(n) + " samples after the header (line " +
                                   std::to_string(header_line) + "), at least " +
                                   std::to_string(kMinSamples) + " needed");
  const double step =
      time_index >= 0 ? (times.back() - times.front()) / static_cast<double>(n - 1) : 1.0 / *rate;
  const double duration = step * static_cast<double>(n);
  if (duration < kMinRecordDuration_s)
    return Status::InvalidArgument("record lasts " + Fmt(duration) + " s (" + std::to_string(n) +
                                   " samples), at least " + Fmt(kMinRecordDuration_s) + " s needed");
  // Each time stamp may be off the uniform grid by the jitter J =
  // max(0.5 ms, 1 % of the step) (rounding to 1 ms; record.h), so a spacing
  // may depart from the step by up to 2 J, and a stamp from the line
  // through the first and last (each off by up to J) by up to 2 J too.
  // Beyond that the sampling is not uniform: a lost or doubled sample (a
  // spacing off by a whole step) or a rate that changes within the record
  // (stamps drifting off the line).
  double max_jitter = 0.0;  // half the largest spacing deviation: the stamps' jitter
  if (time_index >= 0) {
    const double jitter = std::max(kTimeJitterFloor_s, kMaxStepDeviation * step);
    const auto tc = static_cast<std::size_t>(time_index);
    auto rule = [&] {
      return "max(0.5 ms, " + Fmt(100 * kMaxStepDeviation) + " % of the step) = " + Fmt(jitter * 1e3, 3) +
             " ms of jitter per time stamp (sampling must be uniform)";
    };
    for (std::int64_t k = 1; k < n; ++k) {
      const double dt = times[k] - times[k - 1];
      const double dev = std::abs(dt - step);
      if (dev > 2 * jitter)
        return Status::InvalidArgument(Where(first_data_line + k, tc + 1, column_name(tc)) + ": spacing " +
                                       Fmt(dt, 6) + " s departs from the record's step " + Fmt(step, 6) +
                                       " s by more than twice " + rule());
      const double off = std::abs(times[k] - times.front() - static_cast<double>(k) * step);
      if (off > 2 * jitter)
        return Status::InvalidArgument(
            Where(first_data_line + k, tc + 1, column_name(tc)) + ": time stamp lies " + Fmt(off * 1e3, 3) +
            " ms off the uniform grid of the record's step " + Fmt(step, 6) +
            " s: the sampling rate changes within the record; allowed: twice " + rule());
      max_jitter = std::max(max_jitter, dev / 2);
    }
  }

  // 5. Units, calibration and overrides.
  std::string units = options.units.value_or(
      profile != nullptr && profile->units ? *profile->units : meta.units.value_or("m/s2"));
  if (!KnownUnits(units))
    return Status::InvalidArgument("units override \"" + Excerpt(units) +
                                   "\" must be \"m/s2\" or \"g\" (or mg, V, mV)");
  record->units = units;
  if (options.temperature_c) {
    double t = *options.temperature_c;
    if (!std::isfinite(t) || t < kMinTemperature_c || t > kMaxTemperature_c)
      return Status::InvalidArgument("temperature override " + Fmt(t) + " C outside [" +
                                     Fmt(kMinTemperature_c) + ", " + Fmt(kMaxTemperature_c) + "] C");
    record->temperature_c = t;
  } else {
    record->temperature_c = meta.temperature_c;
  }
  record->excitation = options.excitation.value_or(meta.excitation.value_or(Excitation::kAmbient));

  record->sample_rate_hz = 1.0 / step;
  record->start_time_s = time_index >= 0 && kind != TimeColumn::kIso8601 ? times.front() : 0.0;
  std::vector<double>().swap(times);
  record->samples = Eigen::Map<const Eigen::Matrix<double, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor>>(
      data.data(), static_cast<Eigen::Index>(n), static_cast<Eigen::Index>(nch));
  std::vector<double>().swap(data);

  // Per channel: units to m/s^2 (sensitivity for V and mV), then polarity.
  std::vector<std::string> calibration;
  for (std::size_t c = 0; c < nch; ++c) {
    const model::Sensor* sensor = nullptr;
    if (options.member != nullptr)
      for (const auto& s : options.member->sensors)
        if (s.channel == record->channels[c]) sensor = &s;
    double factor = 1.0;
    if (units == "g") {
      factor = kStandardGravity_m_s2;
    } else if (units == "mg") {
      factor = kStandardGravity_m_s2 / 1000.0;
    } else if (units == "V" || units == "mV") {
      if (sensor == nullptr || !sensor->sensitivity_mv_per_g)
        return Status::InvalidArgument(
            "units " + units + ": channel " + record->channels[c] +
            " needs the sensitivity_mv_per_g of its sensor entry in the member description" +
            (options.member == nullptr ? " (read the record against its member)" : ""));
      // a [m/s^2] = v [mV] / S [mV/g] x g0.
      factor = (units == "V" ? 1000.0 : 1.0) * kStandardGravity_m_s2 / *sensor->sensitivity_mv_per_g;
      std::string what = record->channels[c] + " " + Fmt(*sensor->sensitivity_mv_per_g, 6) + " mV/g";
      if (!sensor->serial.empty()) what += " (serial " + sensor->serial + ")";
      if (!sensor->calibrated_on.empty()) what += " calibrated on " + sensor->calibrated_on;
      calibration.push_back(what);
    }
    if (sensor != nullptr && sensor->polarity < 0) {
      factor = -factor;
      calibration.push_back(record->channels[c] + " polarity -1");
    }
    if (factor != 1.0) record->samples.col(static_cast<Eigen::Index>(c)) *= factor;
  }

  // Samples are stored as binary32: refuse what would not fit (one
  // vectorised pass; cells are finite and conversions finite, so only an
  // overflow to a huge value or infinity can break the bound).
  if (!(record->samples.cwiseAbs().maxCoeff() <= kMaxSampleMagnitude_m_s2)) {
    for (std::size_t c = 0; c < nch; ++c) {
      const auto col = record->samples.col(static_cast<Eigen::Index>(c));
      for (Eigen::Index i = 0; i < col.size(); ++i) {
        if (std::abs(col[i]) <= kMaxSampleMagnitude_m_s2) continue;
        return Status::InvalidArgument(
            Where(first_data_line + i, plan[c].column + 1, column_name(plan[c].column)) + ": the sample is " +
            Fmt(col[i], 4) + " m/s^2, beyond the largest storable sample (binary32, " +
            Fmt(kMaxSampleMagnitude_m_s2, 3) + " m/s^2)");
      }
    }
  }

  // 6. recorded_at: the override, else the metadata, else the first ISO 8601
  // time stamp.
  if (options.recorded_at) {
    if (Status s =
            CheckRecordedAt(*options.recorded_at, "recorded_at override", now_ms, &record->recorded_at);
        !s.ok())
      return s;
  } else if (!meta.recorded_at.empty()) {
    record->recorded_at = meta.recorded_at;
  } else if (kind == TimeColumn::kIso8601) {
    if (Status s =
            CheckRecordedAt(server::FormatIsoUtc(first_iso_ms),
                            Where(first_data_line) + " (first time stamp)", now_ms, &record->recorded_at);
        !s.ok())
      return s;
  }

  // 7. What was detected and applied, in words.
  if (!text_lines.empty())
    record->notes.push_back(std::to_string(text_lines.size()) +
                            " line(s) of logger text above the header skipped (" +
                            (text_lines.size() == 1 ? Where(text_lines.front().first)
                                                    : "lines " + std::to_string(text_lines.front().first) +
                                                          "-" + std::to_string(text_lines.back().first)) +
                            ")");
  if (delim != ',' || decimal_comma)
    record->notes.push_back("separator " + DelimiterName(delim) +
                            (decimal_comma ? ", decimal comma accepted" : ", decimal point"));
  if (kind == TimeColumn::kMilliseconds) record->notes.push_back("time column in milliseconds (time_ms)");
  if (kind == TimeColumn::kIso8601)
    record->notes.push_back(std::string("time column of ISO 8601 date-times") +
                            (iso_without_zone ? " without a zone, offset from the import profile" : ""));
  if (kind == TimeColumn::kNone)
    record->notes.push_back("no time column: sample rate " + Fmt(*rate, 9) + " Hz given");
  if (units != "m/s2") record->notes.push_back("units " + units + " converted to m/s^2");
  if (!calibration.empty()) {
    std::string list;
    for (const auto& c : calibration) list += (list.empty() ? "" : "; ") + c;
    record->notes.push_back("calibration applied: " + list);
  }
  if (max_jitter > kMaxStepDeviation * step) {
    record->cautions.push_back(
        {"time-jitter", "time stamps depart from the mean step " + Fmt(step * 1e3, 6) + " ms by up to " +
                            Fmt(max_jitter * 1e3, 3) +
                            " ms (more than 1 % of a step; accepted up to 0.5 ms, " +
                            "the rounding of time stamps to 1 ms): the samples are taken as uniform at " +
                            Fmt(record->sample_rate_hz, 7) + " Hz."});
  } else if (max_jitter > 1e-3 * step) {
    record->notes.push_back("time stamps jitter by up to " + Fmt(max_jitter * 1e3, 3) +
                            " ms around the mean step (within 1 % of a step); samples taken as uniform at " +
                            Fmt(record->sample_rate_hz, 7) + " Hz");
  }

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
