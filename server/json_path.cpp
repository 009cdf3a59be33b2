#include "server/json_path.h"

#include <cmath>
#include <sstream>

#include "server/json_limits.h"
#include "server/safe_text.h"

namespace taut::server {

void FailAt(const std::string& path, const std::string& rule) { throw JsonPathError{path + ": " + rule}; }

void RequireObject(const nlohmann::json& j, const std::string& path) {
  if (!j.is_object()) FailAt(path, "must be a JSON object, got " + ShowJson(j));
}

void OnlyKeys(const nlohmann::json& j, const std::string& path, std::initializer_list<const char*> allowed) {
  for (auto it = j.begin(); it != j.end(); ++it) {
    bool ok = false;
    for (const char* a : allowed) ok = ok || it.key() == a;
    if (!ok) {
      std::string list;
      for (const char* a : allowed) list += std::string(list.empty() ? "" : ", ") + a;
      FailAt(path + "." + Excerpt(it.key(), 64), "unknown key (allowed here: " + list + ")");
    }
  }
}

const nlohmann::json& Required(const nlohmann::json& j, const std::string& path, const char* key) {
  auto it = j.find(key);
  if (it == j.end()) FailAt(path + "." + key, "required key is missing");
  return *it;
}

double NumberAt(const nlohmann::json& v, const std::string& path) {
  if (!v.is_number()) FailAt(path, "must be a number, got " + ShowJson(v));
  const double x = v.get<double>();
  if (!std::isfinite(x)) FailAt(path, "must be finite");
  return x;
}

std::string StringAt(const nlohmann::json& v, const std::string& path) {
  if (!v.is_string()) FailAt(path, "must be a string, got " + ShowJson(v));
  return v.get<std::string>();
}

std::string FormatJsonNumber(double x) {
  std::ostringstream os;
  os << x;
  return os.str();
}

}  // namespace taut::server
