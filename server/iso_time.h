// ISO 8601 date-times: the ONE parser of the project. The API (query
// parameters, JSON fields), the record format (docs/FORMATS.md section 2:
// `recorded_at=2026-11-20T10:00:00Z` and ISO 8601 time columns) and the
// import profiles all go through ParseIsoTime. Storage keeps milliseconds
// since 1970-01-01T00:00:00Z (storage/repository.h).
//
// This file is a leaf library (taut_iso_time, the C++ standard library
// only), so estimation/ can read time columns without depending on server/.
// The calendar is std::chrono's (C++20 <chrono> calendar types, the
// standardised form of H. Hinnant's date library): year_month_day::ok()
// decides whether a date exists (2026-02-30 does not; 2024-02-29 does).
// Fixed UTC offsets need no time zone database; named zones ("Europe/...")
// are not read (GCC 12 has no std::chrono::tzdb).
#pragma once

#include <cstdint>
#include <string>
#include <string_view>

namespace taut::server {

struct IsoTime {
  std::int64_t unix_ms = 0;    // the instant, floor to the millisecond, UTC
  std::int32_t sub_ms_ns = 0;  // nanoseconds beyond unix_ms, 0..999999
  bool has_time = false;       // a time of day was given (else midnight)
  bool has_zone = false;       // "Z" or an offset was given (else read as UTC)
  int offset_minutes = 0;      // the offset given (east of UTC > 0)

  // Nanoseconds since the epoch; within int64 for 1678..2262 only.
  std::int64_t unix_ns() const { return unix_ms * 1'000'000 + sub_ms_ns; }
};

// Accepts "YYYY-MM-DD", optionally followed by "T" or one space and
// "HH:MM:SS" with an optional fraction (".f" to 9 digits) and an optional
// zone: "Z", "+HH:MM", "-HH:MM", "+HHMM" or "+HH" (offsets up to 18 h, ISO
// 8601-1:2019 and RFC 3339). Years 0001..9999. No leap second (":60"), no
// "24:00:00", no impossible dates. false on anything else.
bool ParseIsoTime(std::string_view text, IsoTime* time);

// ParseIsoTime to milliseconds since the epoch (UTC; an offset is applied,
// a missing zone is read as UTC).
bool ParseIsoUtc(std::string_view text, std::int64_t* unix_ms);

// "2026-11-20T10:00:00Z", or "2026-11-20T10:00:00.250Z" when the time has
// milliseconds.
std::string FormatIsoUtc(std::int64_t unix_ms);

// Milliseconds since the epoch, now (system clock).
std::int64_t NowUnixMs();

}  // namespace taut::server
