// Reading a JSON document of taut's formats with errors that name the JSON
// path: the helpers the member reader (member_json.cpp) and the supplied
// modes reader (modes_json.cpp) share. A rule that fails throws JsonPathError
// ("$.sensors[1].position_m: = 7.3: must lie ..."); the reader's entry
// point catches it and returns a Status.
#pragma once

#include <initializer_list>
#include <nlohmann/json.hpp>
#include <string>

namespace taut::server {

struct JsonPathError {
  std::string message;
};

[[noreturn]] void FailAt(const std::string& path, const std::string& rule);

// `j` must be an object.
void RequireObject(const nlohmann::json& j, const std::string& path);

// Rejects keys of `j` outside `allowed` (a typo is never silently ignored).
void OnlyKeys(const nlohmann::json& j, const std::string& path, std::initializer_list<const char*> allowed);

// j[key], or an error "required key is missing".
const nlohmann::json& Required(const nlohmann::json& j, const std::string& path, const char* key);

// A finite number / a string, or an error naming the type found.
double NumberAt(const nlohmann::json& v, const std::string& path);
std::string StringAt(const nlohmann::json& v, const std::string& path);

// `x` as printed in error messages (shortest round-trip-ish form).
std::string FormatJsonNumber(double x);

}  // namespace taut::server
