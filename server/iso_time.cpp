#include "server/iso_time.h"

#include <chrono>
#include <cstdio>

namespace taut::server {

namespace {

// Days from 1970-01-01 to the civil date y-m-d of the proleptic Gregorian
// calendar (H. Hinnant, "chrono-Compatible Low-Level Date Algorithms",
// days_from_civil; the same algorithm as std::chrono::sys_days).
std::int64_t DaysFromCivil(std::int64_t y, unsigned m, unsigned d) {
  return std::chrono::sys_days(std::chrono::year_month_day(std::chrono::year(static_cast<int>(y)),
                                                           std::chrono::month(m), std::chrono::day(d)))
      .time_since_epoch()
      .count();
}

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

}  // namespace

bool ParseIsoUtc(std::string_view s, std::int64_t* unix_ms) {
  int y = 0, mo = 0, d = 0, h = 0, mi = 0, sec = 0;
  if (!Digits(s, 0, 4, &y) || s.size() < 10 || s[4] != '-' || !Digits(s, 5, 2, &mo) || s[7] != '-' ||
      !Digits(s, 8, 2, &d)) {
    return false;
  }
  const std::chrono::year_month_day ymd{std::chrono::year(y), std::chrono::month(static_cast<unsigned>(mo)),
                                        std::chrono::day(static_cast<unsigned>(d))};
  if (!ymd.ok()) return false;
  std::size_t pos = 10;
  std::int64_t ms = 0;
  if (pos < s.size() && (s[pos] == 'T' || s[pos] == ' ')) {
    if (!Digits(s, pos + 1, 2, &h) || pos + 3 >= s.size() || s[pos + 3] != ':' ||
        !Digits(s, pos + 4, 2, &mi) || pos + 6 >= s.size() || s[pos + 6] != ':' ||
        !Digits(s, pos + 7, 2, &sec)) {
      return false;
    }
    if (h > 23 || mi > 59 || sec > 59) return false;  // no leap second: UTC ms have none
    pos += 9;
    if (pos < s.size() && s[pos] == '.') {
      std::size_t n = 0;
      int scale = 100;
      ++pos;
      while (pos < s.size() && s[pos] >= '0' && s[pos] <= '9') {
        if (n < 3) ms += scale * (s[pos] - '0');
        scale /= 10;
        ++pos;
        ++n;
      }
      if (n == 0 || n > 9) return false;
    }
  }
  const std::string_view zone = s.substr(pos);
  if (!(zone.empty() || zone == "Z" || zone == "+00:00")) return false;
  const std::int64_t days = DaysFromCivil(y, static_cast<unsigned>(mo), static_cast<unsigned>(d));
  *unix_ms = ((days * 24 + h) * 60 + mi) * 60000LL + sec * 1000LL + ms;
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
