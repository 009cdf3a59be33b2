// libFuzzer: the JSON record reader of uploads (server/record_json.h) on
// any bytes, against the example tie's sensors. Rule violations are
// ApiError (422); anything else escaping, a crash or a hang is a bug.
#include <cstddef>
#include <cstdint>
#include <cstdlib>
#include <string>

#include "server/http_router.h"
#include "server/json_limits.h"
#include "server/member_json.h"
#include "server/record_json.h"

namespace {

const taut::model::Member& Tie() {
  static const taut::model::Member member = [] {
    taut::model::Member m;
    const std::string text = R"({"id": "tie", "length_m": 5.8,
      "section": {"shape": "circle", "diameter_m": 0.028},
      "material": {"elastic_modulus_pa": 1.9e11, "density_kg_m3": 7800},
      "sensors": [{"channel": "v1", "position_m": 1.45}, {"channel": "v2", "position_m": 2.9}]})";
    if (!taut::server::ParseMember(text, &m).ok()) std::abort();
    return m;
  }();
  return member;
}

}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string text(reinterpret_cast<const char*>(data), size);
  // The streaming reader the upload route uses.
  try {
    const taut::estimation::Record r = taut::server::ParseRecordJson(text, Tie());
    if (r.samples.cols() != static_cast<Eigen::Index>(r.channels.size())) std::abort();
  } catch (const taut::server::ApiError& e) {
    if ((e.status != 422 && e.status != 400) || e.message.size() > 4096) std::abort();
  }
  // The DOM reader on the same input.
  nlohmann::json j;
  if (!taut::server::ParseJsonBounded(text, &j).ok() || !j.is_object()) return 0;
  try {
    const taut::estimation::Record r = taut::server::RecordFromJson(j, Tie());
    if (r.samples.cols() != static_cast<Eigen::Index>(r.channels.size())) std::abort();
  } catch (const taut::server::ApiError& e) {
    if (e.status != 422 || e.message.size() > 4096) std::abort();
  }
  return 0;
}
