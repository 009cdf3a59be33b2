// Test and bench helper: an ambient acceleration record (docs/FORMATS.md section
// 2 CSV) of a member with known parameters (the truth is known), from the
// modal superposition of model/ambient_synthesis.h.
#pragma once

#include <Eigen/Core>
#include <cstdio>
#include <string>
#include <vector>

#include "model/ambient_synthesis.h"

namespace taut::testing {

// The record of model/ambient_synthesis.h (same fields and defaults), and
// channel renames for bad-input tests.
struct RecordSpec : model::AmbientSpec {
  std::vector<std::string> channel_override;
};

// Writes the CSV; false when the model fails or the file cannot be written.
inline bool WriteSyntheticRecord(const std::string& path, const model::Member& member, model::Direction d,
                                 const model::ModalParameters& truth, const RecordSpec& spec) {
  std::vector<std::string> names;
  Eigen::MatrixXd a;
  if (!model::SynthesizeAmbient(member, d, truth, spec, &names, &a).ok()) return false;
  const double dt = 1.0 / spec.sample_rate_hz;
  const long n = a.rows();
  const size_t channels = names.size();
  std::FILE* f = std::fopen(path.c_str(), "w");
  if (f == nullptr) return false;
  std::fprintf(f, "# recorded_at=2026-11-20T10:00:00Z\n# temperature_c=12.5\n# units=m/s2\ntime_s");
  for (size_t c = 0; c < channels; ++c) {
    const std::string& name = c < spec.channel_override.size() ? spec.channel_override[c] : names[c];
    std::fprintf(f, ",%s", name.c_str());
  }
  std::fprintf(f, "\n");
  for (long k = 0; k < n; ++k) {
    std::fprintf(f, "%.9f", k * dt);
    for (size_t c = 0; c < channels; ++c) std::fprintf(f, ",%.7g", a(k, c));
    std::fprintf(f, "\n");
  }
  return std::fclose(f) == 0;
}

}  // namespace taut::testing
