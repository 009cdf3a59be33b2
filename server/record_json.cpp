#include "server/record_json.h"

#include <algorithm>
#include <cmath>

#include "server/http_router.h"
#include "server/safe_text.h"

namespace taut::server {

using nlohmann::json;

// Every channel must be a sensor of the member, each at most once (422).
// `path(c)` names channel c in a message.
void CheckChannels(const std::vector<std::string>& channels, const model::Member& member,
                   const std::function<std::string(std::size_t)>& path) {
  for (std::size_t c = 0; c < channels.size(); ++c) {
    const std::string& s = channels[c];
    const bool sensor = std::any_of(member.sensors.begin(), member.sensors.end(),
                                    [&](const model::Sensor& x) { return x.channel == s; });
    if (!sensor) {
      Fail(422, "unprocessable",
           path(c) + " = \"" + Excerpt(s) + "\": not a sensor channel of member " + member.id);
    }
    if (std::find(channels.begin(), channels.begin() + static_cast<std::ptrdiff_t>(c), s) !=
        channels.begin() + static_cast<std::ptrdiff_t>(c)) {
      Fail(422, "unprocessable", path(c) + " = \"" + Excerpt(s) + "\": channel listed twice");
    }
  }
}

// Builds the record from a JSON body (docs/API.md), checking the same rules
// as the CSV reader (FORMATS.md section 2) with JSON paths in the messages.
estimation::Record RecordFromJson(const json& j, const model::Member& member) {
  static const std::vector<std::string> kKeys = {"recorded_at",    "temperature_c", "units",  "excitation",
                                                 "sample_rate_hz", "channels",      "samples"};
  for (const auto& [key, value] : j.items()) {
    if (std::find(kKeys.begin(), kKeys.end(), key) == kKeys.end()) {
      Fail(422, "unprocessable",
           "$." + key +
               ": unknown key (known: recorded_at, temperature_c, units, "
               "excitation, sample_rate_hz, channels, samples)");
    }
  }
  estimation::Record r;
  if (!j.contains("sample_rate_hz") || !j["sample_rate_hz"].is_number() ||
      !(j["sample_rate_hz"].get<double>() > 0) || !std::isfinite(j["sample_rate_hz"].get<double>())) {
    Fail(422, "unprocessable", "$.sample_rate_hz: required, a number > 0");
  }
  r.sample_rate_hz = j["sample_rate_hz"].get<double>();
  if (!j.contains("channels") || !j["channels"].is_array() || j["channels"].empty()) {
    Fail(422, "unprocessable", "$.channels: required, a non-empty array of channel names");
  }
  for (std::size_t c = 0; c < j["channels"].size(); ++c) {
    const json& name = j["channels"][c];
    if (!name.is_string())
      Fail(422, "unprocessable", "$.channels[" + std::to_string(c) + "]: must be a string");
    r.channels.push_back(name.get<std::string>());
  }
  CheckChannels(r.channels, member, [](std::size_t c) { return "$.channels[" + std::to_string(c) + "]"; });
  if (static_cast<int>(r.channels.size()) > estimation::kMaxChannels) {
    Fail(422, "unprocessable",
         "$.channels: more than " + std::to_string(estimation::kMaxChannels) + " channels");
  }
  if (!j.contains("samples") || !j["samples"].is_array()) {
    Fail(422, "unprocessable", "$.samples: required, an array of rows (one value per channel)");
  }
  const json& rows = j["samples"];
  const auto n = static_cast<std::int64_t>(rows.size()), nc = static_cast<std::int64_t>(r.channels.size());
  if (n * nc > estimation::kMaxCells) {
    Fail(422, "unprocessable", "$.samples: more than " + std::to_string(estimation::kMaxCells) + " cells");
  }
  r.samples.resize(n, nc);
  for (std::int64_t i = 0; i < n; ++i) {
    const json& row = rows[i];
    if (!row.is_array() || static_cast<std::int64_t>(row.size()) != nc) {
      Fail(422, "unprocessable",
           "$.samples[" + std::to_string(i) + "]: must hold " + std::to_string(nc) +
               " numbers (one per channel)");
    }
    for (std::int64_t c = 0; c < nc; ++c) {
      const json& v = row[c];
      if (!v.is_number() || !std::isfinite(v.get<double>())) {
        Fail(422, "unprocessable",
             "$.samples[" + std::to_string(i) + "][" + std::to_string(c) + "]: not a finite number");
      }
      r.samples(i, c) = v.get<double>();
    }
  }
  if (n < estimation::kMinSamples || n / r.sample_rate_hz < estimation::kMinRecordDuration_s) {
    Fail(422, "unprocessable",
         "$.samples: " + std::to_string(n) + " samples at " + std::to_string(r.sample_rate_hz) +
             " Hz; a record needs at least " + std::to_string(estimation::kMinSamples) + " samples and " +
             std::to_string(static_cast<int>(estimation::kMinRecordDuration_s)) + " s");
  }
  if (j.contains("recorded_at")) {
    if (!j["recorded_at"].is_string())
      Fail(422, "unprocessable", "$.recorded_at: must be an ISO 8601 string");
    r.recorded_at = j["recorded_at"].get<std::string>();
  }
  if (j.contains("temperature_c") && !j["temperature_c"].is_null()) {
    if (!j["temperature_c"].is_number()) Fail(422, "unprocessable", "$.temperature_c: must be a number");
    r.temperature_c = j["temperature_c"].get<double>();
  }
  if (j.contains("units")) {
    const std::string u = j["units"].is_string() ? j["units"].get<std::string>() : "";
    if (u != "m/s2" && u != "g") Fail(422, "unprocessable", "$.units: must be \"m/s2\" or \"g\"");
    r.units = u;
    if (u == "g") r.samples *= estimation::kStandardGravity_m_s2;
  }
  if (j.contains("excitation")) {
    const std::string e = j["excitation"].is_string() ? j["excitation"].get<std::string>() : "";
    if (!estimation::ParseExcitation(e, &r.excitation)) {
      Fail(422, "unprocessable", "$.excitation: must be \"ambient\" or \"impact\"");
    }
  }
  return r;
}

}  // namespace taut::server
