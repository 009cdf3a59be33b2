// Synthetic acceleration records with known modal parameters (invented
// systems, fixed seeds) for the identification tests.
//
// Exact discretisation: for x' = Ac x + Bc u with u held constant over each
// step dt (zero-order hold), x_{k+1} = Ad x_k + Bd u_k with
//   exp([Ac Bc; 0 0] dt) = [Ad Bd; 0 I]
// (C. Van Loan, Computing integrals involving the matrix exponential, IEEE
// Trans. Autom. Control 23, 1978). The discrete poles are exactly
// exp(lambda dt), so the identified continuous poles can be compared with
// the continuous truth without discretisation error.
#pragma once

#include <Eigen/Dense>
#include <random>
#include <unsupported/Eigen/MatrixFunctions>
#include <vector>

namespace taut::testing {

struct LumpedSystem {
  Eigen::MatrixXd M, K, C;        // n x n
  Eigen::VectorXd frequency_hz;   // undamped natural frequencies, ascending
  Eigen::VectorXd damping_ratio;  // modal damping ratios
  Eigen::MatrixXd shapes;         // columns: mass-normalised mode shapes
};

// A classically damped system: C = M Phi diag(2 zeta_r omega_r) Phi^T M,
// with Phi^T M Phi = I, so that mode r has exactly the damping ratio
// zeta_r (Clough and Penzien, Dynamics of Structures, 1993, sec. 12-5).
inline LumpedSystem MakeClassicallyDamped(const Eigen::MatrixXd& M, const Eigen::MatrixXd& K,
                                          const Eigen::VectorXd& zeta) {
  LumpedSystem s;
  s.M = M;
  s.K = K;
  Eigen::GeneralizedSelfAdjointEigenSolver<Eigen::MatrixXd> ges(K, M);
  const Eigen::VectorXd w = ges.eigenvalues().cwiseSqrt();
  s.shapes = ges.eigenvectors();  // Phi^T M Phi = I
  s.frequency_hz = w / (2.0 * M_PI);
  s.damping_ratio = zeta;
  const Eigen::VectorXd c = 2.0 * zeta.cwiseProduct(w);
  s.C = M * s.shapes * c.asDiagonal() * s.shapes.transpose() * M;
  return s;
}

// Accelerations (rows = samples, cols = DOFs) under independent white-noise
// forces of std `force_std` at every DOF, plus white measurement noise of
// std noise_share x the channel's RMS. A burn-in of 20 / (zeta_min omega_min)
// seconds lets the transient of the zero start die out.
inline Eigen::MatrixXd SimulateAmbient(const LumpedSystem& s, double fs, Eigen::Index n, unsigned seed,
                                       double force_std = 1.0, double noise_share = 0.05) {
  const Eigen::Index d = s.M.rows();
  const Eigen::MatrixXd Minv = s.M.inverse();
  Eigen::MatrixXd aug = Eigen::MatrixXd::Zero(3 * d, 3 * d);
  aug.block(0, d, d, d).setIdentity();
  aug.block(d, 0, d, d) = -Minv * s.K;
  aug.block(d, d, d, d) = -Minv * s.C;
  aug.block(d, 2 * d, d, d) = Minv;
  const Eigen::MatrixXd E = (aug / fs).exp();
  const Eigen::MatrixXd Ad = E.topLeftCorner(2 * d, 2 * d);
  const Eigen::MatrixXd Bd = E.block(0, 2 * d, 2 * d, d);
  Eigen::MatrixXd Cy(d, 2 * d);
  Cy << -Minv * s.K, -Minv * s.C;
  std::mt19937_64 rng(seed);
  std::normal_distribution<double> g(0.0, 1.0);
  const double tau = 1.0 / (s.damping_ratio.minCoeff() * 2.0 * M_PI * s.frequency_hz.minCoeff());
  const Eigen::Index burn = static_cast<Eigen::Index>(20.0 * tau * fs);
  Eigen::VectorXd x = Eigen::VectorXd::Zero(2 * d), u(d);
  Eigen::MatrixXd y(n, d);
  for (Eigen::Index k = -burn; k < n; ++k) {
    for (Eigen::Index j = 0; j < d; ++j) u[j] = force_std * g(rng);
    if (k >= 0) y.row(k) = (Cy * x + Minv * u).transpose();
    x = Ad * x + Bd * u;
  }
  for (Eigen::Index j = 0; j < d; ++j) {
    const double rms = std::sqrt(y.col(j).squaredNorm() / n);
    for (Eigen::Index k = 0; k < n; ++k) y(k, j) += noise_share * rms * g(rng);
  }
  return y;
}

// Modal superposition: accelerations at the sensors a(t) = sum_r phi_r q_r''(t),
// each modal coordinate a single-DOF oscillator (f_r, zeta_r) driven by its
// own white noise of std drive[r], simulated exactly as above; plus white
// measurement noise of std noise_share x the channel RMS.
inline Eigen::MatrixXd SimulateModal(const std::vector<double>& f_hz, const std::vector<double>& zeta,
                                     const Eigen::MatrixXd& shapes,  // sensors x modes
                                     const std::vector<double>& drive, double fs, Eigen::Index n,
                                     unsigned seed, double noise_share = 0.02) {
  const Eigen::Index nm = shapes.cols();
  std::mt19937_64 rng(seed);
  std::normal_distribution<double> g(0.0, 1.0);
  Eigen::MatrixXd qdd(n, nm);
  for (Eigen::Index r = 0; r < nm; ++r) {
    const double w = 2.0 * M_PI * f_hz[r];
    Eigen::Matrix3d aug = Eigen::Matrix3d::Zero();
    aug(0, 1) = 1.0;
    aug(1, 0) = -w * w;
    aug(1, 1) = -2.0 * zeta[r] * w;
    aug(1, 2) = 1.0;
    const Eigen::Matrix3d E = (aug / fs).exp();
    const Eigen::Matrix2d Ad = E.topLeftCorner<2, 2>();
    const Eigen::Vector2d Bd = E.block<2, 1>(0, 2);
    const Eigen::Index burn = static_cast<Eigen::Index>(20.0 / (zeta[r] * w) * fs);
    Eigen::Vector2d x = Eigen::Vector2d::Zero();
    for (Eigen::Index k = -burn; k < n; ++k) {
      const double u = drive[r] * g(rng);
      if (k >= 0) qdd(k, r) = -w * w * x[0] - 2.0 * zeta[r] * w * x[1] + u;
      x = Ad * x + Bd * u;
    }
  }
  Eigen::MatrixXd y = qdd * shapes.transpose();
  for (Eigen::Index j = 0; j < y.cols(); ++j) {
    const double rms = std::sqrt(y.col(j).squaredNorm() / n);
    for (Eigen::Index k = 0; k < n; ++k) y(k, j) += noise_share * rms * g(rng);
  }
  return y;
}

}  // namespace taut::testing
