// The parts of the alert rules that need more than a member's estimates:
// the drift baseline restarted by a logbook entry, and the stale-data rule
// judged against the clock (estimation/drift.h items 6 and 7).
#pragma once

#include <cstdint>
#include <functional>
#include <string>

#include "estimation/drift.h"
#include "model/status.h"
#include "storage/repository.h"

namespace taut::server {

// Sets settings->baseline_start_s from the member's newest logbook entry
// marked new_baseline (none: unchanged). Errors are storage errors.
storage::StorageStatus ApplyLogbookBaseline(storage::Repository& repo, storage::Id organisation_id,
                                            storage::Id member_id, estimation::DriftSettings* settings);

// How often the workers look for members without a usable record.
inline constexpr std::int64_t kStaleCheckPeriod_ms = 60'000;

// Runs the stale-data rule over every member whose drift settings set
// max_silence_hours: raises "stale-data" once per silence (keyed by the
// newest usable estimate, RaiseAlertOnce) unless one is still open or
// acknowledged. Returns the number of alerts raised; `log` gets one line
// per alert or error (may be empty).
int CheckStaleData(storage::Repository& repo, std::int64_t now_unix_ms,
                   const std::function<void(const std::string&)>& log);

// Calls CheckStaleData at most every kStaleCheckPeriod_ms (the first call
// at once). For one thread.
class StaleDataWatch {
 public:
  int Tick(storage::Repository& repo, std::int64_t now_unix_ms,
           const std::function<void(const std::string&)>& log) {
    if (now_unix_ms < next_unix_ms_) return 0;
    next_unix_ms_ = now_unix_ms + kStaleCheckPeriod_ms;
    return CheckStaleData(repo, now_unix_ms, log);
  }

 private:
  std::int64_t next_unix_ms_ = 0;
};

}  // namespace taut::server
