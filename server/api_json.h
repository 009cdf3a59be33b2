// JSON of the stored entities that more than one part of the service sends:
// the alert object (API responses and webhook bodies, docs/API.md) and the
// per-member drift settings (GET/PUT /v1/members/{id}/drift-settings).
#pragma once

#include <nlohmann/json.hpp>

#include "estimation/drift.h"
#include "model/status.h"
#include "storage/repository.h"

namespace taut::server {

// docs/API.md "alert": times as ISO 8601 UTC, evidence parsed back into
// JSON (kept as a string if it does not parse).
nlohmann::json AlertToJson(const storage::Alert& alert);

// Stored JSON text written by this service; text that does not parse (an
// older or hand-edited row) is returned as a JSON string, not lost.
nlohmann::json StoredJson(const std::string& text);

// Drift settings (estimation/drift.h) as the API shows and takes them:
//   {"baseline_count": 10, "baseline_from": null, "baseline_to": null,
//    "z_threshold": 3, "consecutive": 2, "cusum_k": 0.5, "cusum_h": 8,
//    "min_force_share_of_design": 0.5, "designed_for_tension": true,
//    "max_ei_loss_share": 0.2, "max_silence_hours": null}
// max_silence_hours: the stale-data rule (null = off).
// baseline_from / baseline_to are ISO 8601 UTC times (both or neither).
// The design force and nominal EI come from the member description, not
// from here.
nlohmann::json DriftSettingsToJson(const estimation::DriftSettings& s);

// Reads the keys given in `j` over `*settings` (keys absent keep their
// value). kInvalidArgument naming "$.key" for an unknown key, a wrong type
// or a value out of range (the ranges of estimation::DetectDrift).
Status DriftSettingsFromJson(const nlohmann::json& j, estimation::DriftSettings* settings);

}  // namespace taut::server
