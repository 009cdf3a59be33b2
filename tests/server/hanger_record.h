// Test helper of the service suites (test_service, test_replicas): the
// invented example hanger and model-generated ambient records of it, whose
// truth is known (modal superposition, model/ambient_synthesis.h).
#pragma once

#include <gtest/gtest.h>

#include <Eigen/Core>
#include <fstream>
#include <sstream>
#include <string>
#include <vector>

#include "model/ambient_synthesis.h"
#include "server/member_json.h"
#include "server/record_csv.h"

namespace taut::testing {

inline std::string ReadFile(const std::string& path) {
  std::ifstream in(path);
  std::stringstream ss;
  ss << in.rdbuf();
  return ss.str();
}

// The invented test member (examples/oskerton-footbridge-h2.json: a 7.4 m,
// 36 mm steel hanger with three lateral accelerometers).
struct Hanger {
  model::Member member;
  std::string text;
  Hanger() {
    const std::string path = std::string(TAUT_EXAMPLES_DIR) + "/oskerton-footbridge-h2.json";
    text = ReadFile(path);
    EXPECT_TRUE(server::LoadMemberFile(path, &member, server::MemberReadOptions{.require_id = true}).ok());
  }
};

// A model-generated ambient record of the hanger as CSV text.
inline std::string HangerCsv(const Hanger& h, double axial_force_n, const std::string& recorded_at,
                             double temperature_c, unsigned seed, double duration_s = 100.0) {
  model::ModalParameters truth;
  truth.axial_force_n = axial_force_n;
  truth.fixity_left = 0.35;
  truth.fixity_right = 0.6;
  model::AmbientSpec spec;
  spec.duration_s = duration_s;
  spec.sample_rate_hz = 128;
  spec.modes = 4;
  spec.seed = seed;
  spec.rms_m_s2 = 0.02;
  std::vector<std::string> channels;
  Eigen::MatrixXd a;
  EXPECT_TRUE(
      model::SynthesizeAmbient(h.member, model::Direction::kLateral, truth, spec, &channels, &a).ok());
  server::RecordCsvHeader header;
  header.recorded_at = recorded_at;
  header.temperature_c = temperature_c;
  return server::FormatRecordCsv(
      header, channels, spec.sample_rate_hz, a.rows(),
      [&](std::int64_t i, std::size_t c) { return a(i, static_cast<Eigen::Index>(c)); });
}

}  // namespace taut::testing
