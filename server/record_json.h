// The JSON form of a record upload (docs/API.md "Records and jobs"):
//   {"recorded_at", "temperature_c"?, "units"?, "excitation"?,
//    "sample_rate_hz", "channels": [...], "samples": [[row...], ...]}
// checked with the same rules as the CSV reader (FORMATS.md section 2),
// every message naming the JSON path. Internal to server/; throws ApiError
// (http_router.h) with 422.
#pragma once

#include <cstddef>
#include <functional>
#include <nlohmann/json.hpp>
#include <string>
#include <string_view>
#include <vector>

#include "estimation/record.h"
#include "model/member.h"

namespace taut::server {

// Every channel must be a sensor of the member, each at most once (422);
// `path(c)` names channel c in a message.
void CheckChannels(const std::vector<std::string>& channels, const model::Member& member,
                   const std::function<std::string(std::size_t)>& path);

// The record of a parsed JSON body; samples converted to m/s^2.
estimation::Record RecordFromJson(const nlohmann::json& j, const model::Member& member);

// The same from the body text, streaming the samples into the record
// without a JSON node per value (peak memory about the body plus two copies
// of the samples as doubles). Malformed JSON 400, rule violations 422.
estimation::Record ParseRecordJson(std::string_view body, const model::Member& member);

}  // namespace taut::server
