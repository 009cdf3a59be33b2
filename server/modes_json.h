// Reading the supplied-modes document (docs/FORMATS.md section 4): modes an
// engineer already has, for `taut identify --modes` and
// POST /v1/members/{id}/modes. Errors name the JSON path, the value and the
// rule, as the member reader's do; unknown keys are errors.
#pragma once

#include <nlohmann/json.hpp>
#include <string>

#include "estimation/supplied_modes.h"
#include "model/member.h"
#include "model/status.h"

namespace taut::server {

// At most this many modes in one document (no member yields more paired
// bending modes than a record's band holds; bounds the work of one request).
inline constexpr int kMaxSuppliedModes = 32;
// At most this many characters of `source`.
inline constexpr std::size_t kMaxSuppliedSourceChars = 200;

// Reads `j` against `member` (shape channels must be its sensors) into
// `out`. kInvalidArgument naming the path on error.
Status SuppliedModesFromJson(const nlohmann::json& j, const model::Member& member,
                             estimation::SuppliedModes* out);

// As above from text (nesting bounded: json_limits.h; syntax errors name
// line and column).
Status ParseSuppliedModes(const std::string& text, const model::Member& member,
                          estimation::SuppliedModes* out);

// Reads the file at `path`; errors are prefixed with the path.
Status LoadSuppliedModesFile(const std::string& path, const model::Member& member,
                             estimation::SuppliedModes* out);

}  // namespace taut::server
