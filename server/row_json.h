// JSON of the stored rows as the v1 API sends them (docs/API.md): times as
// ISO 8601 UTC, absent optional numbers as null. Internal to server/.
#pragma once

#include <nlohmann/json.hpp>

#include "storage/repository.h"

namespace taut::server {

nlohmann::json StructureJson(const storage::Structure& s);
nlohmann::json MemberJson(const storage::Member& m);
nlohmann::json EstimateJson(const storage::Estimate& e);
// One point of GET /v1/members/{id}/force/history.
nlohmann::json HistoryPointJson(const storage::Estimate& e);
nlohmann::json JobJson(const storage::Job& job);
nlohmann::json RecordJson(const storage::Record& r);

}  // namespace taut::server
