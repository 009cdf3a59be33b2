// Test and bench helper: an ambient acceleration record (FORMATS.md section
// 2 CSV) of a member with known parameters (the truth is known).
//
// Modal superposition of the member model's lowest bending modes (fine
// mesh): each modal coordinate is a single-degree-of-freedom oscillator
//   q'' + 2 zeta omega q' + omega^2 q = u(t),
// u white noise held over each sample (zero-order hold), discretised
// exactly with the matrix exponential of [A B; 0 0] dt (C. Van Loan,
// Computing integrals involving the matrix exponential, IEEE Trans. Autom.
// Control 23, 1978), so the record's modes are exactly the model's. Each
// modal acceleration is scaled to unit RMS, multiplied by the mode shape at
// the sensors (max |.| = 1) and summed; white measurement noise of
// noise_share times the channel RMS is added.
#pragma once

#include <Eigen/Dense>
#include <cmath>
#include <cstdio>
#include <numbers>
#include <random>
#include <string>
#include <unsupported/Eigen/MatrixFunctions>
#include <vector>

#include "model/modal.h"

namespace taut::testing {

struct RecordSpec {
  double duration_s = 120.0;
  double sample_rate_hz = 256.0;
  int modes = 5;
  double damping_ratio = 0.01;
  double noise_share = 0.02;
  unsigned seed = 1;
  std::vector<std::string> channel_override;  // rename channels (bad-input tests)
};

// Writes the CSV; false when the model fails or the file cannot be written.
inline bool WriteSyntheticRecord(const std::string& path, const model::Member& member, model::Direction d,
                                 const model::ModalParameters& truth, const RecordSpec& spec) {
  model::ModalResult r;
  if (!model::ComputeModes(member, d, truth, spec.modes, &r, model::ModalOptions{160}).ok()) return false;
  const double dt = 1.0 / spec.sample_rate_hz;
  const long n = static_cast<long>(std::lround(spec.duration_s * spec.sample_rate_hz));
  const size_t channels = r.channels.size();
  Eigen::MatrixXd a = Eigen::MatrixXd::Zero(n, static_cast<Eigen::Index>(channels));
  std::mt19937_64 rng(spec.seed);
  std::normal_distribution<double> g(0.0, 1.0);
  for (const model::Mode& mode : r.modes) {
    const double w = 2.0 * std::numbers::pi * mode.frequency_hz, z = spec.damping_ratio;
    Eigen::Matrix3d aug = Eigen::Matrix3d::Zero();
    aug(0, 1) = 1.0;
    aug(1, 0) = -w * w;
    aug(1, 1) = -2.0 * z * w;
    aug(1, 2) = 1.0;
    const Eigen::Matrix3d e = (aug * dt).exp();
    Eigen::Vector2d x = Eigen::Vector2d::Zero();
    // Burn-in of 10 decay times so the zero start is forgotten.
    const long burn = static_cast<long>(10.0 / (z * w) / dt);
    Eigen::VectorXd acc(n);
    for (long k = -burn; k < n; ++k) {
      const double u = g(rng);
      if (k >= 0) acc[k] = -w * w * x[0] - 2.0 * z * w * x[1] + u;
      x = e.topLeftCorner<2, 2>() * x + e.topRightCorner<2, 1>() * u;
    }
    acc /= std::sqrt(acc.squaredNorm() / n);
    double amax = 0.0;
    for (double v : mode.shape_at_sensors) amax = std::max(amax, std::abs(v));
    for (size_t c = 0; c < channels; ++c) a.col(c) += acc * (mode.shape_at_sensors[c] / amax);
  }
  for (size_t c = 0; c < channels; ++c) {
    const double rms = std::sqrt(a.col(c).squaredNorm() / n);
    for (long k = 0; k < n; ++k) a(k, c) += spec.noise_share * rms * g(rng);
  }
  std::FILE* f = std::fopen(path.c_str(), "w");
  if (f == nullptr) return false;
  std::fprintf(f, "# recorded_at=2026-11-20T10:00:00Z\n# temperature_c=12.5\n# units=m/s2\ntime_s");
  for (size_t c = 0; c < channels; ++c) {
    const std::string& name = c < spec.channel_override.size() ? spec.channel_override[c] : r.channels[c];
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
