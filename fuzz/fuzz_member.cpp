// libFuzzer: the member description reader (server/member_json.h) on any
// bytes. It must return a Status, never crash, hang or overflow the stack
// (a 100,000-level nesting once did), and its messages stay short.
#include <cstddef>
#include <cstdint>
#include <cstdlib>
#include <string>

#include "server/member_json.h"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string text(reinterpret_cast<const char*>(data), size);
  taut::model::Member member;
  for (bool api : {false, true}) {
    taut::server::MemberReadOptions o;
    o.require_id = api;
    o.require_sensors = api;
    const taut::Status s = taut::server::ParseMember(text, &member, o);
    // Every echoed value is bounded (80-byte excerpts, 64-byte keys).
    if (!s.ok() && s.message.size() > 4096) std::abort();
  }
  return 0;
}
