#include "server/modes_json.h"

#include <algorithm>
#include <cmath>
#include <fstream>
#include <sstream>

#include "server/json_limits.h"
#include "server/json_path.h"
#include "server/safe_text.h"

namespace taut::server {

namespace {

using nlohmann::json;

void ReadModes(const json& j, const model::Member& member, estimation::SuppliedModes* out) {
  RequireObject(j, "$");
  OnlyKeys(j, "$", {"source", "plane", "modes"});
  *out = estimation::SuppliedModes{};
  if (auto it = j.find("source"); it != j.end()) {
    out->source = StringAt(*it, "$.source");
    if (out->source.size() > kMaxSuppliedSourceChars) {
      FailAt("$.source", "at most " + std::to_string(kMaxSuppliedSourceChars) + " characters");
    }
  }
  if (auto it = j.find("plane"); it != j.end()) {
    const std::string p = StringAt(*it, "$.plane");
    if (p == "vertical") {
      out->plane = model::Direction::kVertical;
    } else if (p == "lateral") {
      out->plane = model::Direction::kLateral;
    } else {
      FailAt("$.plane", "unknown plane \"" + Excerpt(p) + "\" (use vertical or lateral)");
    }
  }
  const json& modes = Required(j, "$", "modes");
  if (!modes.is_array() || modes.empty() || modes.size() > static_cast<std::size_t>(kMaxSuppliedModes)) {
    FailAt("$.modes", "must be an array of 1 to " + std::to_string(kMaxSuppliedModes) + " modes, got " +
                          ShowJson(modes));
  }
  for (std::size_t i = 0; i < modes.size(); ++i) {
    const std::string path = "$.modes[" + std::to_string(i) + "]";
    const json& m = modes[i];
    RequireObject(m, path);
    OnlyKeys(m, path, {"frequency_hz", "frequency_std_hz", "damping_ratio", "shape"});
    estimation::IdentifiedMode mode;
    mode.frequency_hz = NumberAt(Required(m, path, "frequency_hz"), path + ".frequency_hz");
    if (!(mode.frequency_hz > 0.0)) {
      FailAt(path + ".frequency_hz", "= " + FormatJsonNumber(mode.frequency_hz) + ": must be > 0");
    }
    mode.frequency_std_hz = NumberAt(Required(m, path, "frequency_std_hz"), path + ".frequency_std_hz");
    if (!(mode.frequency_std_hz > 0.0)) {
      FailAt(path + ".frequency_std_hz",
             "= " + FormatJsonNumber(mode.frequency_std_hz) + ": must be > 0 (one standard deviation)");
    }
    if (auto it = m.find("damping_ratio"); it != m.end()) {
      mode.damping_ratio = NumberAt(*it, path + ".damping_ratio");
      if (!(mode.damping_ratio >= 0.0 && mode.damping_ratio < 1.0)) {
        FailAt(path + ".damping_ratio", "= " + FormatJsonNumber(mode.damping_ratio) + ": must be in [0, 1)");
      }
    }
    // Shapes: every mode names the same channels, or none does.
    const auto shape = m.find("shape");
    if (i > 0 && (shape != m.end()) != !out->channels.empty()) {
      FailAt(path + ".shape", out->channels.empty()
                                  ? "$.modes[0] has no shape: give shapes for every mode or none"
                                  : "required key is missing (every mode gives a shape when one does)");
    }
    if (shape != m.end()) {
      RequireObject(*shape, path + ".shape");
      if (shape->empty()) FailAt(path + ".shape", "must name at least one channel");
      std::vector<std::string> channels;
      bool nonzero = false;
      for (auto it = shape->begin(); it != shape->end(); ++it) {
        const std::string at = path + ".shape." + Excerpt(it.key(), 64);
        const bool sensor = std::any_of(member.sensors.begin(), member.sensors.end(),
                                        [&](const model::Sensor& s) { return s.channel == it.key(); });
        if (!sensor) FailAt(at, "is not a sensor channel of the member");
        channels.push_back(it.key());
        mode.shape.push_back(NumberAt(*it, at));
        nonzero = nonzero || mode.shape.back() != 0.0;
      }
      if (!nonzero) FailAt(path + ".shape", "every value is 0: no shape");
      if (i == 0) {
        out->channels = channels;
      } else if (channels != out->channels) {
        FailAt(path + ".shape", "must name the same channels as $.modes[0].shape");
      }
    }
    out->modes.push_back(mode);
  }
}

}  // namespace

Status SuppliedModesFromJson(const json& j, const model::Member& member, estimation::SuppliedModes* out) {
  try {
    ReadModes(j, member, out);
  } catch (const JsonPathError& e) {
    return Status::InvalidArgument(e.message);
  }
  return Status::Ok();
}

Status ParseSuppliedModes(const std::string& text, const model::Member& member,
                          estimation::SuppliedModes* out) {
  json j;
  if (Status s = ParseJsonBounded(text, &j); !s.ok()) return s;
  return SuppliedModesFromJson(j, member, out);
}

Status LoadSuppliedModesFile(const std::string& path, const model::Member& member,
                             estimation::SuppliedModes* out) {
  std::ifstream in(path, std::ios::binary);
  if (!in) return Status::InvalidArgument(path + ": cannot open modes file");
  std::ostringstream buf;
  buf << in.rdbuf();
  Status s = ParseSuppliedModes(buf.str(), member, out);
  if (!s.ok()) s.message = path + ": " + s.message;
  return s;
}

}  // namespace taut::server
