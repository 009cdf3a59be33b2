// The API form of a member logbook entry (docs/API.md "Member logbook").
#pragma once

#include <nlohmann/json.hpp>

#include "storage/logbook.h"

namespace taut::server {

// {"id", "member_id", "kind", "note", "author", "occurred_at",
//  "new_baseline", "created_at"}; times ISO 8601 UTC.
nlohmann::json LogEntryJson(const storage::LogEntry& entry);

}  // namespace taut::server
