#include "model/ambient_synthesis.h"

#include <Eigen/Dense>
#include <cmath>
#include <numbers>
#include <random>
#include <unsupported/Eigen/MatrixFunctions>

#include "model/modal.h"

namespace taut::model {

Status SynthesizeAmbient(const Member& member, Direction direction, const ModalParameters& params,
                         const AmbientSpec& spec, std::vector<std::string>* channels,
                         Eigen::MatrixXd* accelerations_m_s2) {
  if (!(spec.duration_s > 0) || !(spec.sample_rate_hz > 0) || spec.modes < 1 ||
      !(spec.damping_ratio > 0 && spec.damping_ratio < 1) || !(spec.noise_share >= 0) ||
      !(spec.rms_m_s2 > 0) || spec.elements < 2) {
    return Status::InvalidArgument(
        "ambient record spec: duration, rate, RMS > 0, modes >= 1, damping in (0, 1), noise >= 0, "
        "elements >= 2");
  }
  if (member.SensorCount(direction) == 0) {
    return Status::InvalidArgument("member " + member.id + " has no sensor in the " + ToString(direction) +
                                   " plane");
  }
  ModalResult r;
  if (Status s = ComputeModes(member, direction, params, spec.modes, &r, ModalOptions{spec.elements});
      !s.ok()) {
    return s;
  }
  const double dt = 1.0 / spec.sample_rate_hz;
  const long n = std::lround(spec.duration_s * spec.sample_rate_hz);
  const auto nc = static_cast<Eigen::Index>(r.channels.size());
  Eigen::MatrixXd a = Eigen::MatrixXd::Zero(n, nc);
  std::mt19937_64 rng(spec.seed);
  std::normal_distribution<double> g(0.0, 1.0);
  for (const Mode& mode : r.modes) {
    if (mode.frequency_hz >= 0.5 * spec.sample_rate_hz) continue;  // would alias
    const double w = 2.0 * std::numbers::pi * mode.frequency_hz, z = spec.damping_ratio;
    // Augmented state [q, q', u]: x' = A x + B u with u constant over a step.
    Eigen::Matrix3d aug = Eigen::Matrix3d::Zero();
    aug(0, 1) = 1.0;
    aug(1, 0) = -w * w;
    aug(1, 2) = 1.0;
    aug(1, 1) = -2.0 * z * w;
    const Eigen::Matrix3d e = (aug * dt).exp();
    Eigen::Vector2d x = Eigen::Vector2d::Zero();
    // Burn-in of 10 decay times (1 / (zeta omega)) so the zero start is forgotten.
    const long burn = static_cast<long>(10.0 / (z * w) / dt);
    Eigen::VectorXd acc(n);
    for (long k = -burn; k < n; ++k) {
      const double u = g(rng);
      if (k >= 0) acc[k] = -w * w * x[0] - 2.0 * z * w * x[1] + u;
      x = e.topLeftCorner<2, 2>() * x + e.topRightCorner<2, 1>() * u;
    }
    acc /= std::sqrt(acc.squaredNorm() / static_cast<double>(n));
    double amax = 0.0;
    for (double v : mode.shape_at_sensors) amax = std::max(amax, std::abs(v));
    for (Eigen::Index c = 0; c < nc; ++c) {
      a.col(c) += spec.rms_m_s2 * acc * (mode.shape_at_sensors[static_cast<size_t>(c)] / amax);
    }
  }
  for (Eigen::Index c = 0; c < nc; ++c) {
    const double rms = std::sqrt(a.col(c).squaredNorm() / static_cast<double>(n));
    for (long k = 0; k < n; ++k) a(k, c) += spec.noise_share * rms * g(rng);
  }
  *channels = r.channels;
  *accelerations_m_s2 = std::move(a);
  return Status::Ok();
}

}  // namespace taut::model
