#include "server/iso_time.h"

#include <chrono>
#include <cstdio>

namespace taut::server {

namespace {

bool Digits(std::string_view s, std::size_t pos, std::size_t n, int* value) {
  if (pos + n > s.size()) return false;
  int v = 0;
  for (std::size_t i = pos; i < pos + n; ++i) {
    if (s[i] < '0' || s[i] > '9') return false;
    v = 10 * v + (s[i] - '0');
  }
  *value = v;
  return true;
}

// The zone designator at s[pos..]: "" (none), "Z", "+HH:MM", "+HHMM", "+HH"
// (or '-'). Offsets above 18 h are refused (RFC 3339 allows less; 18 h is
// the java.time bound and beyond any real zone, UTC+14 being the largest).
bool ParseZone(std::string_view z, IsoTime* t) {
  if (z.empty()) return true;
  if (z == "Z") {
    t->has_zone = true;
    return true;
  }
  if (z[0] != '+' && z[0] != '-') return false;
  int hh = 0, mm = 0;
  if (!Digits(z, 1, 2, &hh)) return false;
  if (z.size() == 6 && z[3] == ':') {
    if (!Digits(z, 4, 2, &mm)) return false;
  } else if (z.size() == 5) {
    if (!Digits(z, 3, 2, &mm)) return false;
  } else if (z.size() != 3) {
    return false;
  }
  if (mm > 59 || hh * 60 + mm > 18 * 60) return false;
  t->has_zone = true;
  t->offset_minutes = (z[0] == '-' ? -1 : 1) * (hh * 60 + mm);
  return true;
}

}  // namespace

bool ParseIsoTime(std::string_view s, IsoTime* out) {
  IsoTime t;
  int y = 0, mo = 0, d = 0, h = 0, mi = 0, sec = 0;
  if (s.size() < 10 || !Digits(s, 0, 4, &y) || s[4] != '-' || !Digits(s, 5, 2, &mo) || s[7] != '-' ||
      !Digits(s, 8, 2, &d) || y < 1) {
    return false;
  }
  const std::chrono::year_month_day ymd{std::chrono::year(y), std::chrono::month(static_cast<unsigned>(mo)),
                                        std::chrono::day(static_cast<unsigned>(d))};
  if (!ymd.ok()) return false;
  std::size_t pos = 10;
  std::int64_t ns = 0;  // fraction of the second
  if (pos < s.size() && (s[pos] == 'T' || s[pos] == ' ')) {
    if (!Digits(s, pos + 1, 2, &h) || pos + 3 >= s.size() || s[pos + 3] != ':' ||
        !Digits(s, pos + 4, 2, &mi) || pos + 6 >= s.size() || s[pos + 6] != ':' ||
        !Digits(s, pos + 7, 2, &sec)) {
      return false;
    }
    if (h > 23 || mi > 59 || sec > 59) return false;  // no leap second: UTC ms have none
    t.has_time = true;
    pos += 9;
    if (pos < s.size() && s[pos] == '.') {
      std::size_t n = 0;
      std::int64_t scale = 100'000'000;
      ++pos;
      while (pos < s.size() && s[pos] >= '0' && s[pos] <= '9') {
        ns += scale * (s[pos] - '0');
        scale /= 10;
        ++pos;
        ++n;
      }
      if (n == 0 || n > 9) return false;
    }
  }
  if (!ParseZone(s.substr(pos), &t)) return false;
  if (t.has_zone && !t.has_time) return false;  // "2026-11-20Z" is not ISO 8601
  const std::int64_t days = std::chrono::sys_days(ymd).time_since_epoch().count();
  const std::int64_t seconds = ((days * 24 + h) * 60 + mi - t.offset_minutes) * 60 + sec;
  t.unix_ms = seconds * 1000 + ns / 1'000'000;
  t.sub_ms_ns = static_cast<std::int32_t>(ns % 1'000'000);
  *out = t;
  return true;
}

bool ParseIsoUtc(std::string_view text, std::int64_t* unix_ms) {
  IsoTime t;
  if (!ParseIsoTime(text, &t)) return false;
  *unix_ms = t.unix_ms;
  return true;
}

std::string FormatIsoUtc(std::int64_t unix_ms) {
  using namespace std::chrono;
  std::int64_t days = unix_ms / 86'400'000;
  std::int64_t rem = unix_ms % 86'400'000;
  if (rem < 0) {
    rem += 86'400'000;
    --days;
  }
  const year_month_day ymd{sys_days{std::chrono::days{days}}};
  const int h = static_cast<int>(rem / 3'600'000), mi = static_cast<int>(rem / 60'000 % 60),
            sec = static_cast<int>(rem / 1000 % 60), ms = static_cast<int>(rem % 1000);
  char buf[40];
  if (ms == 0) {
    std::snprintf(buf, sizeof buf, "%04d-%02u-%02uT%02d:%02d:%02dZ", static_cast<int>(ymd.year()),
                  static_cast<unsigned>(ymd.month()), static_cast<unsigned>(ymd.day()), h, mi, sec);
  } else {
    std::snprintf(buf, sizeof buf, "%04d-%02u-%02uT%02d:%02d:%02d.%03dZ", static_cast<int>(ymd.year()),
                  static_cast<unsigned>(ymd.month()), static_cast<unsigned>(ymd.day()), h, mi, sec, ms);
  }
  return buf;
}

std::int64_t NowUnixMs() {
  return std::chrono::duration_cast<std::chrono::milliseconds>(
             std::chrono::system_clock::now().time_since_epoch())
      .count();
}

}  // namespace taut::server
