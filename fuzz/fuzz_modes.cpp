// libFuzzer: the supplied-modes reader (server/modes_json.h, the body of
// POST /v1/members/{id}/modes) on any bytes, against a fixed member. It must
// return a Status, never crash, hang or overflow the stack, and its messages
// stay short.
#include <cstddef>
#include <cstdint>
#include <cstdlib>
#include <string>

#include "server/modes_json.h"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  static const taut::model::Member member = [] {
    taut::model::Member m;
    m.id = "fuzz-tie";
    m.length_m = 6.0;
    m.section.diameter_m = 0.03;
    m.elastic_modulus_pa = 2.0e11;
    m.density_kg_m3 = 7850;
    m.sensors = {{"v1", 1.5, 0.0, taut::model::Direction::kVertical},
                 {"v2", 3.0, 0.0, taut::model::Direction::kVertical}};
    return m;
  }();
  const std::string text(reinterpret_cast<const char*>(data), size);
  taut::estimation::SuppliedModes out;
  const taut::Status s = taut::server::ParseSuppliedModes(text, member, &out);
  if (!s.ok() && s.message.size() > 4096) std::abort();
  if (s.ok()) {
    // What the reader accepts is what the estimation may rely on.
    for (const auto& m : out.modes) {
      if (!(m.frequency_hz > 0.0) || !(m.frequency_std_hz > 0.0) || m.shape.size() != out.channels.size())
        std::abort();
    }
  }
  return 0;
}
