// Text from clients made safe to log and to echo (internal to server/).
#pragma once

#include <cstddef>
#include <string>
#include <string_view>

namespace taut::server {

// `text` with every byte outside printable ASCII 0x21..0x7e, and the
// backslash and double quote, written as \xNN: a logged path or address can
// neither start a new log line nor forge key=value pairs. At most max_bytes
// of the input are kept ("..." marks a cut).
std::string EscapeForLog(std::string_view text, std::size_t max_bytes = 512);

// A client's value as an error message may quote it: control characters
// escaped as above (spaces kept), at most max_bytes of it, then
// "... (N bytes)" when longer.
std::string Excerpt(std::string_view text, std::size_t max_bytes = 80);

}  // namespace taut::server
