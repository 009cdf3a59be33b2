#include "server/json_limits.h"

#include <string>
#include <vector>

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

// nlohmann's DOM builder behind a SAX handler that also keeps the JSON path
// of the value being read (for messages) and refuses nesting deeper than
// kMaxJsonDepth before the value is built.
class BoundedDomBuilder {
 public:
  using json = nlohmann::json;
  explicit BoundedDomBuilder(json* root) : dom_(*root, /*allow_exceptions=*/false) {}

  bool null() { return Value(dom_.null()); }
  bool boolean(bool v) { return Value(dom_.boolean(v)); }
  bool number_integer(json::number_integer_t v) { return Value(dom_.number_integer(v)); }
  bool number_unsigned(json::number_unsigned_t v) { return Value(dom_.number_unsigned(v)); }
  bool number_float(json::number_float_t v, const json::string_t& s) {
    return Value(dom_.number_float(v, s));
  }
  bool string(json::string_t& v) { return Value(dom_.string(v)); }
  bool binary(json::binary_t& v) { return Value(dom_.binary(v)); }
  bool start_object(std::size_t n) { return Open(false) && dom_.start_object(n); }
  bool key(json::string_t& k) {
    levels_.back().key = k;
    return dom_.key(k);
  }
  bool end_object() { return Close() && dom_.end_object(); }
  bool start_array(std::size_t n) { return Open(true) && dom_.start_array(n); }
  bool end_array() { return Close() && dom_.end_array(); }
  bool parse_error(std::size_t position, const std::string&, const nlohmann::detail::exception& e) {
    std::string what = e.what();
    if (auto p = what.find("] "); p != std::string::npos) what = what.substr(p + 2);
    if (auto p = what.find("syntax error"); p != std::string::npos) what = what.substr(p);
    error_position_ = position;
    error_ = Path() + ": not valid JSON (" + Excerpt(what, 200) + ")";
    return false;
  }

  const std::string& error() const { return error_; }
  std::size_t error_position() const { return error_position_; }

 private:
  struct Level {
    bool array;
    std::size_t index = 0;
    std::string key;
  };
  // "$", "$.sensors[2].position_m": where the next value goes.
  std::string Path() const {
    std::string p = "$";
    for (const Level& l : levels_) {
      p += l.array ? "[" + std::to_string(l.index) + "]" : "." + Excerpt(l.key, 64);
    }
    return p;
  }
  bool Value(bool ok) {
    if (!levels_.empty() && levels_.back().array) ++levels_.back().index;
    return ok;
  }
  bool Open(bool array) {
    if (levels_.size() >= static_cast<std::size_t>(kMaxJsonDepth)) {
      error_ = Path() + ": JSON nested deeper than " + std::to_string(kMaxJsonDepth) + " levels";
      return false;
    }
    levels_.push_back(Level{array, 0, {}});
    return true;
  }
  bool Close() {
    levels_.pop_back();
    return Value(true);
  }

  nlohmann::detail::json_sax_dom_parser<json> dom_;
  std::vector<Level> levels_;
  std::string error_;
  std::size_t error_position_ = std::string::npos;
};

}  // namespace

Status ParseJsonBounded(std::string_view text, nlohmann::json* out) {
  BoundedDomBuilder builder(out);
  if (nlohmann::json::sax_parse(text.begin(), text.end(), &builder)) return Status::Ok();
  std::string where;
  if (builder.error_position() != std::string::npos) {
    where = " (" + Where(text, builder.error_position() == 0 ? 0 : builder.error_position() - 1) + ")";
  }
  *out = nlohmann::json();
  return Status::InvalidArgument(builder.error() + where);
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
