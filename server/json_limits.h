// Parsing JSON from outside the process (request bodies, member files) with
// bounded nesting.
//
// nlohmann::json parses iteratively, but a value nested 100,000 levels deep
// is destroyed and printed (dump) recursively: one such body of 200 kB
// overflowed the stack. No document of taut's formats nests deeper than a
// few levels, so anything deeper than kMaxJsonDepth is refused before the
// parser builds it.
#pragma once

#include <nlohmann/json.hpp>
#include <string_view>

#include "model/status.h"

namespace taut::server {

// Arrays and objects inside each other, counting the outermost as 1.
inline constexpr int kMaxJsonDepth = 64;

// Parses `text` into *out. kInvalidArgument naming the line and column for a
// syntax error ("line 3, column 7: not valid JSON (...)") and for nesting
// deeper than kMaxJsonDepth.
Status ParseJsonBounded(std::string_view text, nlohmann::json* out);

// A short description of a JSON value for an error message: numbers,
// booleans and null as written, strings cut to 40 characters, arrays and
// objects by their size (never printed whole).
std::string ShowJson(const nlohmann::json& v);

}  // namespace taut::server
