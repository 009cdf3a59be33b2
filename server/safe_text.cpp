#include "server/safe_text.h"

namespace taut::server {

namespace {

std::string Escape(std::string_view text, std::size_t max_bytes, bool keep_space) {
  static constexpr char kHex[] = "0123456789abcdef";
  std::string out;
  const std::size_t n = std::min(text.size(), max_bytes);
  out.reserve(n + 16);
  for (std::size_t i = 0; i < n; ++i) {
    const auto c = static_cast<unsigned char>(text[i]);
    if ((c > 0x20 && c < 0x7f && c != '\\' && c != '"') || (keep_space && c == ' ')) {
      out += static_cast<char>(c);
    } else {
      out += "\\x";
      out += kHex[c >> 4];
      out += kHex[c & 15];
    }
  }
  return out;
}

}  // namespace

std::string EscapeForLog(std::string_view text, std::size_t max_bytes) {
  std::string out = Escape(text, max_bytes, false);
  if (text.size() > max_bytes) out += "...";
  return out;
}

std::string Excerpt(std::string_view text, std::size_t max_bytes) {
  std::string out = Escape(text, max_bytes, true);
  if (text.size() > max_bytes) out += "... (" + std::to_string(text.size()) + " bytes)";
  return out;
}

}  // namespace taut::server
