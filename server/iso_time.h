// ISO 8601 UTC times of the API and the record format (docs/FORMATS.md section 2:
// `recorded_at=2026-11-20T10:00:00Z`) <-> milliseconds since
// 1970-01-01T00:00:00Z, the storage convention (storage/repository.h).
#pragma once

#include <cstdint>
#include <string>
#include <string_view>

namespace taut::server {

// Accepts "YYYY-MM-DD", "YYYY-MM-DDTHH:MM:SS", an optional fraction of a
// second (".f" to ".fffffffff", kept to the millisecond) and an optional
// "Z" or "+00:00" (UTC only: other offsets are refused, so that every stored
// time means one instant without a time zone database). false on anything
// else, including impossible dates (2026-02-30).
bool ParseIsoUtc(std::string_view text, std::int64_t* unix_ms);

// "2026-11-20T10:00:00Z", or "2026-11-20T10:00:00.250Z" when the time has
// milliseconds.
std::string FormatIsoUtc(std::int64_t unix_ms);

// Milliseconds since the epoch, now (system clock).
std::int64_t NowUnixMs();

}  // namespace taut::server
