// Drift checks of new estimates and the alerts they raise (docs/API.md
// "Alerts and webhooks"). Run by the job workers (worker.h) after each
// estimate, and over estimates left unchecked by an earlier failure.
#pragma once

#include <functional>
#include <string>

#include "storage/repository.h"

namespace taut::server {

// One log line (key=value pairs, no newline).
using LogLine = std::function<void(const std::string&)>;

// Runs the drift rules (estimation/drift.h) over the member's estimates and
// raises the alerts that fire at `estimate_id` (each at most once:
// RaiseAlertOnce; a rule with an alert still open or acknowledged for the
// member raises no other), then marks the estimate checked. A failure is
// logged and leaves the estimate unchecked, to be retried by the next pass.
// Returns true when at least one new alert was raised (webhooks are due).
bool CheckDriftAndRaiseAlerts(storage::Repository& repo, storage::Id organisation_id, storage::Id member_id,
                              storage::Id estimate_id, const LogLine& log);

}  // namespace taut::server
