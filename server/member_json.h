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
  bool require_id = false;  // the API requires `id`; the CLI does not
};

// Parses `text` (a JSON document) into `member`. On error returns
// kInvalidArgument with a message as above (JSON syntax errors name the
// line and column); `member` is then unspecified.
Status ParseMember(const std::string& text, model::Member* member, MemberReadOptions options = {});

// As ParseMember, from an already parsed JSON value.
Status MemberFromJson(const nlohmann::json& j, model::Member* member, MemberReadOptions options = {});

// Reads the file at `path`; errors are prefixed with the path.
Status LoadMemberFile(const std::string& path, model::Member* member, MemberReadOptions options = {});

// The docs/FORMATS.md section 1 document for `member` (round-trips through
// MemberFromJson).
nlohmann::json MemberToJson(const model::Member& member);

}  // namespace taut::server
