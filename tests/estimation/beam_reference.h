// Test helper: records from the independent reference simulator
// tests/estimation/beam_reference.py (see its docstring), run through
// /usr/bin/python3; the caller fails (never skips) when it is missing.
// Needs TAUT_BEAM_REFERENCE (the script's path) defined by CMake.
#pragma once

#include <gtest/gtest.h>

#include <cmath>
#include <cstdio>
#include <numbers>
#include <sstream>
#include <string>
#include <vector>

#include "model/member.h"

namespace taut::estimation::testing {

inline constexpr double kPi = std::numbers::pi;
inline constexpr const char* kPython = "/usr/bin/python3";

struct Family {
  std::string name;
  double length_m = 20.0;
  double diameter_m = 0.04;
  double modulus_pa = 2.1e11;
  double density = 7850.0;
  double force_n = 20000.0;
  double fixity_left = 0.3, fixity_right = 0.6;
  double ei_factor = 1.0;  // true EI / nominal EI
  double fs = 128.0;
  double duration_s = 300.0;
  std::string gains = "{}";  // mode_gain_db of the simulator
  int seed = 3;
  std::vector<double> sensor_share = {0.2, 0.45, 0.7};
  std::string fault;  // "fault" object of the simulator, "" = none
  // More members of the simulator's parameter object (e.g. the cross-axis
  // keys "cross_axis_deg", "ei_other_nm2", "k_other", or "impact"), "" = none.
  std::string extra_json;
};

inline double Ei(const Family& f) {
  return f.modulus_pa * kPi * std::pow(f.diameter_m, 4) / 64.0 * f.ei_factor;
}
inline double Mass(const Family& f) { return f.density * kPi * f.diameter_m * f.diameter_m / 4.0; }
inline double Spring(const Family& f, double r) { return 3.0 * Ei(f) * r / (f.length_m * (1.0 - r)); }

// The member as the engineer declares it (nominal EI from E and the
// section; true EI = ei_factor x nominal), sensed in the lateral plane (no
// sag coupling, which the reference simulator does not model).
inline model::Member DeclaredMember(const Family& f) {
  model::Member m;
  m.id = "invented-" + f.name;
  m.length_m = f.length_m;
  m.section.shape = model::Section::Shape::kCircle;
  m.section.diameter_m = f.diameter_m;
  m.elastic_modulus_pa = f.modulus_pa;
  m.density_kg_m3 = f.density;
  m.left.kind = model::RotationEnd::Kind::kElastic;
  m.right.kind = model::RotationEnd::Kind::kElastic;
  m.axial.kind = model::AxialEnds::Kind::kFixed;
  for (size_t i = 0; i < f.sensor_share.size(); ++i) {
    m.sensors.push_back(
        {"h" + std::to_string(i + 1), f.sensor_share[i] * f.length_m, 0.0, model::Direction::kLateral});
  }
  return m;
}

inline std::string Num(double v) {
  char b[64];
  std::snprintf(b, sizeof b, "%.17g", v);
  return b;
}

inline std::string Params(const Family& f) {
  std::ostringstream os;
  os << "{\"length_m\":" << Num(f.length_m) << ",\"mass_per_length_kg_m\":" << Num(Mass(f))
     << ",\"ei_nm2\":" << Num(Ei(f)) << ",\"axial_force_n\":" << Num(f.force_n)
     << ",\"k_left\":" << Num(Spring(f, f.fixity_left)) << ",\"k_right\":" << Num(Spring(f, f.fixity_right))
     << ",\"fs\":" << Num(f.fs) << ",\"duration_s\":" << Num(f.duration_s) << ",\"modes\":16"
     << ",\"mode_gain_db\":" << f.gains << ",\"seed\":" << f.seed;
  if (!f.fault.empty()) os << ",\"fault\":" << f.fault;
  if (!f.extra_json.empty()) os << "," << f.extra_json;
  os << ",\"sensor_x_m\":[";
  for (size_t i = 0; i < f.sensor_share.size(); ++i)
    os << (i ? "," : "") << Num(f.sensor_share[i] * f.length_m);
  os << "],\"channels\":[";
  for (size_t i = 0; i < f.sensor_share.size(); ++i) os << (i ? "," : "") << "\"h" << i + 1 << "\"";
  os << "]}";
  return os.str();
}

// Runs the simulator; fails the test (does not skip) when python3, numpy or
// scipy is missing.
inline std::string RunReference(const std::vector<std::string>& args) {
  std::string cmd = std::string(kPython) + " " + TAUT_BEAM_REFERENCE;
  for (const auto& a : args) cmd += " '" + a + "'";
  FILE* p = popen(cmd.c_str(), "r");
  if (p == nullptr) {
    ADD_FAILURE() << "cannot run " << cmd;
    return "";
  }
  std::string out;
  char buf[4096];
  while (size_t n = std::fread(buf, 1, sizeof buf, p)) out.append(buf, n);
  const int rc = pclose(p);
  EXPECT_EQ(rc, 0) << "the reference simulator failed (is " << kPython
                   << " with numpy and scipy installed?): " << cmd;
  return out;
}

inline std::vector<double> ParseFrequencies(const std::string& json) {
  std::vector<double> f;
  const size_t a = json.find('['), b = json.find(']');
  if (a == std::string::npos || b == std::string::npos) return f;
  std::stringstream ss(json.substr(a + 1, b - a - 1));
  std::string item;
  while (std::getline(ss, item, ',')) f.push_back(std::stod(item));
  return f;
}

}  // namespace taut::estimation::testing
