// Reading and validating the member description (docs/FORMATS.md section 1).
//
// Every rule of the format is checked here, up front, and a failure is
// reported as one line naming the JSON path, the offending value and the
// rule, e.g.
//   $.sensors[1].position_m = 7.3: must lie strictly inside the span (0, 6.2) m
// Unknown keys are errors so that a typo is never silently ignored.
#pragma once

#include <nlohmann/json.hpp>
#include <string>

#include "model/member.h"
#include "model/status.h"

namespace taut::server {

struct MemberReadOptions {
  bool require_id = false;       // the API requires `id`; the CLI does not
  bool require_sensors = false;  // the API (monitoring) needs >= 1 sensor
  // The plausibility bounds below. Off only for descriptions already stored
  // (accepted under the rules of their day; they are not refused later).
  bool check_plausible = true;
};

// How the service reads a description it stored itself.
inline constexpr MemberReadOptions kStoredMember{.require_id = true, .check_plausible = false};

// Plausibility bounds of a member description (beyond the format's types).
// Structural materials: timber ~1e10 Pa, aluminium 7e10, steel 2.1e11,
// carbon fibre composites up to ~4e11 (values of common practice).
inline constexpr double kMinElasticModulus_pa = 1e9;
inline constexpr double kMaxElasticModulus_pa = 1e12;
inline constexpr double kMinDensity_kg_m3 = 100;
inline constexpr double kMaxDensity_kg_m3 = 25000;
inline constexpr double kMaxLength_m = 500;
// Largest section dimension over the length: the Euler-Bernoulli beam the
// model uses wants slender members (common practice: L/d >= 10; 1/4 only
// refuses the absurd).
inline constexpr double kMaxSectionShareOfLength = 0.25;
// At most one sensor per record channel (estimation::kMaxChannels).
inline constexpr int kMaxSensors = 64;
// Two sensors of one direction closer than this are at "one position".
inline constexpr double kMinSensorSpacing_m = 1e-3;

// Parses `text` (a JSON document, nesting bounded: json_limits.h) into
// `member`. On error returns kInvalidArgument with a message as above (JSON
// syntax errors name the line and column); `member` is then unspecified.
Status ParseMember(const std::string& text, model::Member* member, MemberReadOptions options = {});

// As ParseMember, from an already parsed JSON value.
Status MemberFromJson(const nlohmann::json& j, model::Member* member, MemberReadOptions options = {});

// Reads the file at `path`; errors are prefixed with the path.
Status LoadMemberFile(const std::string& path, model::Member* member, MemberReadOptions options = {});

// The docs/FORMATS.md section 1 document for `member` (round-trips through
// MemberFromJson).
nlohmann::json MemberToJson(const model::Member& member);

}  // namespace taut::server
