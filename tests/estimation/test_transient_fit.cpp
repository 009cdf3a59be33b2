// The time-domain fit of the quasi-static-axial model (estimation/
// transient_fit.h) against records whose truth is known: a large-amplitude
// free decay simulated with the FULL u-w von Karman form (model/
// von_karman_full.h, axial inertia included, fine mesh, small step), and a
// small-amplitude decay simulated with the quasi-static form itself at
// known parameters (elastic ends).
#include <gtest/gtest.h>

#include <chrono>
#include <cmath>
#include <cstdio>
#include <numbers>
#include <random>

#include "estimation/transient_fit.h"
#include "model/transient.h"
#include "model/von_karman_full.h"

namespace taut::estimation {
namespace {

using model::Direction;
using model::Member;
constexpr double kPi = std::numbers::pi;

// An invented 6 m round steel tie-rod (30 mm, E = 200 GPa, 7850 kg/m^3),
// pinned at both ends, axially immovable ends, two massless sensors: one at
// mid-span (a node of every antisymmetric mode) and one at 0.3 L.
Member Rod() {
  Member m;
  m.id = "invented-tie-r7";
  m.length_m = 6.0;
  m.section.shape = model::Section::Shape::kCircle;
  m.section.diameter_m = 0.030;
  m.elastic_modulus_pa = 2.0e11;
  m.density_kg_m3 = 7850.0;
  m.left.kind = model::RotationEnd::Kind::kPinned;
  m.right.kind = model::RotationEnd::Kind::kPinned;
  m.axial.kind = model::AxialEnds::Kind::kFixed;
  m.sensors = {{"mid", 3.0, 0.0, Direction::kVertical}, {"third", 1.8, 0.0, Direction::kVertical}};
  return m;
}

// Mean period [s] from upward zero crossings (linear interpolation).
double ZeroCrossingPeriod(const Eigen::VectorXd& x, double dt) {
  std::vector<double> t;
  for (Eigen::Index i = 1; i < x.size(); ++i) {
    if (x[i - 1] < 0 && x[i] >= 0) t.push_back((i - 1 + x[i - 1] / (x[i - 1] - x[i])) * dt);
  }
  return t.size() < 2 ? 0.0 : (t.back() - t.front()) / (t.size() - 1);
}

// The test. Truth: N = 10 kN, w(x, 0) = a1 sin(pi x/L) +
// a2 sin(2 pi x/L) with a1 = 2 r_g (a/r = 2), a2 = 0.3 r_g, at rest, with
// the quasi-static axial displacement u(x) = int_0^x (c - w'^2/2) (c the
// mean of w'^2/2) so that no axial wave is started; no damping, no gravity
// (the full form carries none). Full form: 16 elements (twice the fit
// mesh), step 4e-4 s (midpoint period error (w h)^2/12 < 6e-5 for mode 2
// at its raised frequency; Hairer, Lubich and Wanner 2006, sec. I.1; the
// fit integrates with 6 substeps of 6.7e-4 s). Accelerations at the sensors by central
// differences of the velocity (error O(h^2), < 1e-4 relative), 2 s at
// 250 Hz, white noise of 1 % of the channel RMS (seed fixed).
// Linear estimate: the mid-span channel sees mode 1 only; its zero-crossing
// frequency put into the pinned-pinned closed form
//   N = 4 m L^2 f^2 - pi^2 EI / L^2
// (Timoshenko, Young and Weaver, Vibration Problems in Engineering, 1974,
// sec. 5.12) reads the amplitude-raised frequency as tension. Expected
// bias: for the Duffing oscillator the frequency rises by about 3/8 of the
// relative stiffness increase at peak amplitude (Nayfeh and Mook, Nonlinear
// Oscillations, 1979, eq. 2.3.19), here EA a^2 k^2 / 4 = 2.2 kN at peak, so
// about 16 % of N: the issue asks for > 3 %. The fit must give N within 1 %
// (the tolerance).
TEST(TransientFit, LargeAmplitudeFullFormDecayIsFittedWhereTheLinearReadingIsBiased) {
  const Member m = Rod();
  const double L = m.length_m, k = kPi / L;
  const double r_g = m.section.diameter_m / 4.0;
  const double a1 = 2.0 * r_g, a2 = 0.3 * r_g;
  const double n_true = 10000.0;
  model::ModalParameters p;
  p.axial_force_n = n_true;
  p.gravity_m_s2 = 0.0;
  const model::FullVonKarman full(m, Direction::kVertical, p, 16);
  ASSERT_TRUE(full.status().ok()) << full.status().message;
  auto w0 = [&](double x) { return a1 * std::sin(k * x) + a2 * std::sin(2 * k * x); };
  auto dw0 = [&](double x) { return a1 * k * std::cos(k * x) + 2 * a2 * k * std::cos(2 * k * x); };
  // u(x) = int_0^x (c - w'^2 / 2) ds; the cross term integrates to zero over
  // the span, so c = k^2 (a1^2 + 4 a2^2) / 4; closed form of the integral.
  auto u0 = [&](double x) {
    return -0.5 * (a1 * a1 * k * std::sin(2 * k * x) / 4.0 +
                   2.0 * a1 * a2 * k * (std::sin(k * x) + std::sin(3 * k * x) / 3.0) +
                   4.0 * a2 * a2 * k * std::sin(4 * k * x) / 8.0);
  };
  Eigen::VectorXd q = full.Interpolate(w0, dw0, u0);
  Eigen::VectorXd v = Eigen::VectorXd::Zero(full.Dofs());
  const double fs = 250.0, h = 4e-4, duration = 2.0;
  const int per_sample = static_cast<int>(std::lround(1.0 / (fs * h)));
  const int samples = static_cast<int>(duration * fs) + 1;
  const std::vector<double> xs = {3.0, 1.8};
  Eigen::MatrixXd acc(samples, 2);
  std::vector<Eigen::VectorXd> vhist;  // sensor velocities at every step
  auto vel = [&](const Eigen::VectorXd& vv) {
    Eigen::VectorXd r(2);
    for (int c = 0; c < 2; ++c) r[c] = full.W(vv, xs[c]);
    return r;
  };
  vhist.push_back(vel(v));
  const auto t_truth = std::chrono::steady_clock::now();
  const int steps = (samples - 1) * per_sample + 1;
  for (int i = 0; i < steps; ++i) {
    ASSERT_TRUE(full.Step(h, i * h, {}, &q, &v).ok()) << "step " << i;
    vhist.push_back(vel(v));
  }
  for (int j = 0; j < samples; ++j) {
    const int i = j * per_sample;
    const Eigen::VectorXd a = i == 0 ? Eigen::VectorXd((-3 * vhist[0] + 4 * vhist[1] - vhist[2]) / (2 * h))
                                     : Eigen::VectorXd((vhist[i + 1] - vhist[i - 1]) / (2 * h));
    acc.row(j) = a.transpose();
  }
  const double truth_s = std::chrono::duration<double>(std::chrono::steady_clock::now() - t_truth).count();
  std::mt19937_64 rng(20261202);
  std::normal_distribution<double> g(0.0, 1.0);
  for (int c = 0; c < 2; ++c) {
    const double rms = std::sqrt(acc.col(c).squaredNorm() / samples);
    for (int j = 0; j < samples; ++j) acc(j, c) += 0.01 * rms * g(rng);
  }

  // Linear estimate from the measured (amplitude-raised) frequency.
  const double mass = m.MassPerLength_kg_m();
  const double ei = m.NominalBendingStiffness_nm2(Direction::kVertical);
  const double period = ZeroCrossingPeriod(acc.col(0), 1.0 / fs);
  ASSERT_GT(period, 0.0);
  const double f_meas = 1.0 / period;
  const double n_linear = 4.0 * mass * L * L * f_meas * f_meas - kPi * kPi * ei / (L * L);

  // Time-domain fit, started from the linear reading (as the pipeline does).
  TransientFitStart start;
  start.axial_force_n = n_linear;
  start.bending_stiffness_nm2 = ei;
  TransientFitOptions opt;
  opt.modes = 2;
  opt.target_elements = 8;
  opt.gravity_m_s2 = 0.0;
  TransientFitResult r;
  const auto t_fit = std::chrono::steady_clock::now();
  const Status st = FitTransient(m, Direction::kVertical, acc, fs, start, opt, &r);
  const double fit_s = std::chrono::duration<double>(std::chrono::steady_clock::now() - t_fit).count();
  std::printf("full-form truth simulation %.2f s, fit %.2f s\n", truth_s, fit_s);
  ASSERT_TRUE(st.ok()) << st.message;
  std::printf(
      "truth N = %.1f N; linear reading N = %.1f N (bias %+.2f %%, f = %.4f Hz); transient fit N = %.1f N "
      "(error %+.3f %%, std %.1f N, 95 %% [%.1f, %.1f]); EI = %.1f N m^2 (nominal %.1f); zeta = %.2e; "
      "runs %d, iterations %d, residual/signal RMS %.4f\n",
      n_true, n_linear, 100 * (n_linear / n_true - 1), f_meas, r.axial_force_n.value,
      100 * (r.axial_force_n.value / n_true - 1), r.axial_force_n.std, r.axial_force_n.lower95,
      r.axial_force_n.upper95, r.bending_stiffness_nm2.value, ei, r.damping_ratio, r.model_runs, r.iterations,
      r.residual_rms_m_s2 / r.signal_rms_m_s2);
  // EI: the truth is the nominal value; 1 %, the tolerance for N.
  EXPECT_NEAR(r.bending_stiffness_nm2.value / ei, 1.0, 0.01);
  EXPECT_GT(std::abs(n_linear / n_true - 1.0), 0.03);      // the issue: linear biased by > 3 %
  EXPECT_NEAR(r.axial_force_n.value / n_true, 1.0, 0.01);  // the issue: within 1 %
  // Modal amplitudes: the truth's a1, a2 (up to the sign of the shapes) to
  // 2 %: engineering tolerance for 1 % noise and the coarse fit mesh.
  ASSERT_EQ(r.modal_displacement_m.size(), 2u);
  EXPECT_NEAR(std::abs(r.modal_displacement_m[0]) / a1, 1.0, 0.02);
  EXPECT_NEAR(std::abs(r.modal_displacement_m[1]) / a2, 1.0, 0.05);
  // At 1 % white noise the residual is the noise (plus model-form error of
  // the quasi-static assumption, below 0.5 % in frequency): residual RMS
  // within [0.5 %, 5 %] of the signal RMS.
  EXPECT_LT(r.residual_rms_m_s2, 0.05 * r.signal_rms_m_s2);
  // The large-amplitude caution and the standing notice.
  bool large = false;
  for (const auto& c : r.cautions) large |= c.code == "large-amplitude";
  EXPECT_TRUE(large);
  EXPECT_EQ(r.notice, StandingNotice());
  EXPECT_GT(r.axial_force_n.std, 0.0);
  EXPECT_LT(r.axial_force_n.lower95, r.axial_force_n.value);
  EXPECT_GT(r.axial_force_n.upper95, r.axial_force_n.value);
}

// Elastic ends: a record made by the quasi-static model itself at known
// parameters (N = 15 kN, EI = nominal, fixities 0.3 / 0.7, Rayleigh damping
// 1 %, self-weight sag, three modes, a1 = r_g), 1 % white noise, fitted on
// the same mesh, so the only error is the noise. Checks: every unknown
// within 3.5 of its reported standard deviations of the truth (a normal
// estimate leaves that band with probability 5e-4; Seber and Wild 1989,
// sec. 2.1, for the asymptotic normality), N within 1 % (the issue), the
// residual at the noise level (RMS ratio 1 % +- 0.1 %). The fit integrates
// with 400 steps per period (time-step bias (w h)^2/12 < 2e-5 in frequency)
// so that its discretisation error stays below the noise-driven scatter
// being checked; at the default 100 the mode-3 bias (about 1e-4) is of the
// order of 2 standard deviations of EI.
TEST(TransientFit, ElasticEndsFromQuasiStaticTruthWithinTheirIntervals) {
  Member m = Rod();
  m.left.kind = model::RotationEnd::Kind::kElastic;
  m.right.kind = model::RotationEnd::Kind::kElastic;
  m.sensors = {{"a1", 1.3, 0.0, Direction::kVertical},
               {"a2", 2.9, 0.0, Direction::kVertical},
               {"a3", 4.4, 0.0, Direction::kVertical}};
  const double ei = m.NominalBendingStiffness_nm2(Direction::kVertical);
  const double r_g = m.section.diameter_m / 4.0;
  model::ModalParameters p;
  p.axial_force_n = 15000.0;
  p.fixity_left = 0.3;
  p.fixity_right = 0.7;
  model::TransientOptions o;
  o.target_elements = 10;
  o.output_rate_hz = 250.0;
  o.duration_s = 2.0;
  o.substeps = 40;  // step 1e-4 s: midpoint period error < 1e-5 for mode 3 (Hairer et al. 2006)
  o.damping_ratio = 0.01;
  const model::TransientModel truth(m, Direction::kVertical, p, o);
  ASSERT_TRUE(truth.status().ok()) << truth.status().message;
  model::TransientLoads loads;
  loads.initial_displacement = truth.ModeShape(1, r_g) + truth.ModeShape(2, 0.3 * r_g);
  loads.initial_velocity = truth.ModeShape(3, 0.05);
  model::TransientResult rec;
  ASSERT_TRUE(truth.Run(loads, &rec).ok());
  Eigen::MatrixXd acc = rec.acceleration_m_s2;
  std::mt19937_64 rng(77);
  std::normal_distribution<double> g(0.0, 1.0);
  for (int c = 0; c < acc.cols(); ++c) {
    const double rms = std::sqrt(acc.col(c).squaredNorm() / acc.rows());
    for (int j = 0; j < acc.rows(); ++j) acc(j, c) += 0.01 * rms * g(rng);
  }
  TransientFitStart start;
  start.axial_force_n = 1.08 * p.axial_force_n;
  start.bending_stiffness_nm2 = 0.9 * ei;
  TransientFitOptions opt;
  opt.modes = 3;
  opt.target_elements = 10;
  opt.steps_per_period = 400;
  TransientFitResult r;
  const Status st = FitTransient(m, Direction::kVertical, acc, o.output_rate_hz, start, opt, &r);
  ASSERT_TRUE(st.ok()) << st.message;
  ASSERT_TRUE(r.fixity_left.has_value());
  ASSERT_TRUE(r.fixity_right.has_value());
  std::printf(
      "N = %.1f +- %.1f N (truth 15000), EI = %.1f +- %.1f (truth %.1f), r_l = %.4f +- %.4f (0.3), r_r = "
      "%.4f "
      "+- %.4f (0.7), zeta = %.5f (0.01), runs %d, residual/signal %.4f\n",
      r.axial_force_n.value, r.axial_force_n.std, r.bending_stiffness_nm2.value, r.bending_stiffness_nm2.std,
      ei, r.fixity_left->value, r.fixity_left->std, r.fixity_right->value, r.fixity_right->std,
      r.damping_ratio, r.model_runs, r.residual_rms_m_s2 / r.signal_rms_m_s2);
  constexpr double kBand = 3.5;
  EXPECT_NEAR(r.axial_force_n.value, p.axial_force_n, kBand * r.axial_force_n.std);
  EXPECT_NEAR(r.bending_stiffness_nm2.value, ei, kBand * r.bending_stiffness_nm2.std);
  EXPECT_NEAR(r.fixity_left->value, 0.3, kBand * r.fixity_left->std);
  EXPECT_NEAR(r.fixity_right->value, 0.7, kBand * r.fixity_right->std);
  EXPECT_NEAR(r.axial_force_n.value / p.axial_force_n, 1.0, 0.01);
  EXPECT_NEAR(r.residual_rms_m_s2 / r.signal_rms_m_s2, 0.01, 0.001);
  EXPECT_TRUE(r.converged);
}

// Bad input is an error, never a crash.
TEST(TransientFit, RejectsBadInput) {
  const Member m = Rod();
  TransientFitStart start;
  start.axial_force_n = 10000.0;
  TransientFitOptions opt;
  TransientFitResult r;
  Eigen::MatrixXd one_col = Eigen::MatrixXd::Zero(500, 1);
  EXPECT_EQ(FitTransient(m, Direction::kVertical, one_col, 250.0, start, opt, &r).code,
            Status::Code::kInvalidArgument);
  Eigen::MatrixXd a = Eigen::MatrixXd::Zero(500, 2);
  a(7, 1) = std::nan("");
  EXPECT_EQ(FitTransient(m, Direction::kVertical, a, 250.0, start, opt, &r).code,
            Status::Code::kInvalidArgument);
  a(7, 1) = 0.0;
  EXPECT_EQ(FitTransient(m, Direction::kVertical, a, 0.0, start, opt, &r).code,
            Status::Code::kInvalidArgument);
  Eigen::MatrixXd short_window = Eigen::MatrixXd::Zero(5, 2);
  EXPECT_EQ(FitTransient(m, Direction::kVertical, short_window, 250.0, start, opt, &r).code,
            Status::Code::kInvalidArgument);
  opt.modes = 4;
  EXPECT_EQ(FitTransient(m, Direction::kVertical, a, 250.0, start, opt, &r).code,
            Status::Code::kInvalidArgument);
}

}  // namespace
}  // namespace taut::estimation
