#include "server/json_limits.h"

#include <string>

#include "server/safe_text.h"

namespace taut::server {

namespace {

// 1-based line and column of byte offset `at` of `text`.
std::string Where(std::string_view text, std::size_t at) {
  std::size_t line = 1, col = 1;
  for (std::size_t i = 0; i < at && i < text.size(); ++i) {
    if (text[i] == '\n') {
      ++line;
      col = 1;
    } else {
      ++col;
    }
  }
  return "line " + std::to_string(line) + ", column " + std::to_string(col);
}

}  // namespace

Status ParseJsonBounded(std::string_view text, nlohmann::json* out) {
  // One pass over the bytes: brackets outside strings open and close
  // levels (a string's escapes are skipped, so "\"[" opens nothing).
  // Malformed text is left to the parser's own message below.
  int depth = 0;
  bool in_string = false;
  for (std::size_t i = 0; i < text.size(); ++i) {
    const char c = text[i];
    if (in_string) {
      if (c == '\\') {
        ++i;
      } else if (c == '"') {
        in_string = false;
      }
    } else if (c == '"') {
      in_string = true;
    } else if (c == '[' || c == '{') {
      if (++depth > kMaxJsonDepth) {
        return Status::InvalidArgument(Where(text, i) + ": JSON nested deeper than " +
                                       std::to_string(kMaxJsonDepth) + " levels");
      }
    } else if (c == ']' || c == '}') {
      --depth;
    }
  }
  try {
    *out = nlohmann::json::parse(text);
  } catch (const nlohmann::json::parse_error& e) {
    std::string what = e.what();
    if (auto p = what.find("syntax error"); p != std::string::npos) what = what.substr(p);
    return Status::InvalidArgument(Where(text, e.byte == 0 ? 0 : e.byte - 1) + ": not valid JSON (" +
                                   Excerpt(what, 200) + ")");
  } catch (const nlohmann::json::exception& e) {  // e.g. 406: a number like 1e400 overflows a double
    std::string what = e.what();
    if (auto p = what.find("] "); p != std::string::npos) what = what.substr(p + 2);
    return Status::InvalidArgument("not valid JSON (" + Excerpt(what, 200) + ")");
  }
  return Status::Ok();
}

std::string ShowJson(const nlohmann::json& v) {
  if (v.is_array()) return "an array of " + std::to_string(v.size()) + " items";
  if (v.is_object()) return "an object with " + std::to_string(v.size()) + " keys";
  if (v.is_string()) {
    const auto& s = v.get_ref<const std::string&>();
    return "\"" + Excerpt(s, 40) + "\"";
  }
  return v.dump();
}

}  // namespace taut::server
