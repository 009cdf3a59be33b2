// Modal identification (estimation/modal_id.h, ssi_cov.h, fdd.h) against
// systems whose modal parameters are known exactly: a lumped 3-DOF system,
// the beam model of model/modal.h, and a free decay with a prescribed
// amplitude-dependent frequency. All sites, members and data are invented.
#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <iostream>

#include "estimation/fdd.h"
#include "estimation/modal_id.h"
#include "estimation/ssi_cov.h"
#include "model/modal.h"
#include "synthetic.h"

namespace taut::estimation {
namespace {

Record MakeRecord(const Eigen::MatrixXd& y, double fs, const std::vector<std::string>& names = {}) {
  Record r;
  for (Eigen::Index j = 0; j < y.cols(); ++j)
    r.channels.push_back(names.empty() ? "a" + std::to_string(j + 1) : names[static_cast<std::size_t>(j)]);
  r.samples = y;
  r.sample_rate_hz = fs;
  CheckRecordQuality(&r);
  return r;
}

// An invented 3-storey shear-frame-like chain: masses 2, 1.5, 1 kg, springs
// 4000, 3000, 2000 N/m, modal damping 1 %, 0.8 %, 1.2 %. Natural
// frequencies (from the generalised eigenproblem K phi = w^2 M phi):
// about 3.64, 8.37 and 11.86 Hz.
testing::LumpedSystem ThreeDof() {
  Eigen::MatrixXd M = Eigen::Vector3d(2.0, 1.5, 1.0).asDiagonal();
  const double k1 = 4000, k2 = 3000, k3 = 2000;
  Eigen::MatrixXd K(3, 3);
  K << k1 + k2, -k2, 0, -k2, k2 + k3, -k3, 0, -k3, k3;
  return testing::MakeClassicallyDamped(M, K, Eigen::Vector3d(0.01, 0.008, 0.012));
}

constexpr double kFs3Dof_hz = 100.0;

// Acceptance limits of issue 3 (frequencies 0.2 %, damping 20 %, MAC 0.99).
// They are met with margin by a 1600 s record: the random error of an
// SSI-COV frequency from a 400 s record of this system is about 0.1 %
// (measured over 30 replications in ThreeDofStdMatchesReplicationScatter),
// halving for 4x the length, so 0.2 % is more than 3 standard deviations;
// the damping error is about 11 % at 400 s, 6 % at 1600 s.
constexpr double kFrequencyTol = 0.002;
constexpr double kDampingTol = 0.20;
constexpr double kMinMac3Dof = 0.99;

TEST(ModalId, ThreeDofFrequenciesDampingShapes) {
  const auto sys = ThreeDof();
  const Eigen::MatrixXd y = testing::SimulateAmbient(sys, kFs3Dof_hz, 160000, 7);
  ModalIdentification id;
  ASSERT_TRUE(IdentifyModes(MakeRecord(y, kFs3Dof_hz), {}, &id).ok());
  ASSERT_EQ(id.modes.size(), 3u);
  for (int k = 0; k < 3; ++k) {
    const IdentifiedMode& m = id.modes[static_cast<std::size_t>(k)];
    std::cout << "3-DOF mode " << k + 1 << ": frequency error "
              << 100 * (m.frequency_hz / sys.frequency_hz[k] - 1) << " %, damping error "
              << 100 * (m.damping_ratio / sys.damping_ratio[k] - 1) << " %\n";
    EXPECT_NEAR(m.frequency_hz, sys.frequency_hz[k], kFrequencyTol * sys.frequency_hz[k]) << "mode " << k + 1;
    EXPECT_NEAR(m.damping_ratio, sys.damping_ratio[k], kDampingTol * sys.damping_ratio[k])
        << "mode " << k + 1;
    const Eigen::VectorXd shape = Eigen::Map<const Eigen::VectorXd>(m.shape.data(), 3);
    EXPECT_GT(Mac(shape, Eigen::VectorXd(sys.shapes.col(k))), kMinMac3Dof) << "mode " << k + 1;
    EXPECT_NEAR(shape.cwiseAbs().maxCoeff(), 1.0, 1e-12);
    ASSERT_TRUE(m.mac_fdd_ssi.has_value());
    EXPECT_GT(*m.mac_fdd_ssi, kMinMac3Dof);
    EXPECT_GT(m.frequency_std_hz, 0.0);
  }
  EXPECT_NE(id.uncertainty_method.find("segments"), std::string::npos) << id.uncertainty_method;
  EXPECT_EQ(id.channels, (std::vector<std::string>{"a1", "a2", "a3"}));
}

// The reported frequency (and damping) std against the scatter over 30 independent
// replications (fixed seeds). With s_r the reported std of replication r,
// S = sum_r (f_r - mean f)^2 / mean_r(s_r^2) is chi-square with 29 degrees
// of freedom when the reported std is right; the two-sided 99 % interval is
// [13.12, 52.34] (scipy.stats.chi2.ppf([0.005, 0.995], 29)). The segment
// std itself scatters (6 segments), which widens S a little; 99 % keeps the
// test from failing on chance while a std off by a factor 1.6 either way
// fails it.
TEST(ModalId, ThreeDofStdMatchesReplicationScatter) {
  const auto sys = ThreeDof();
  constexpr int kReps = 30;
  constexpr double kChi2Lo = 13.12, kChi2Hi = 52.34;
  Eigen::MatrixXd f(kReps, 3), sf(kReps, 3), z(kReps, 3), sz(kReps, 3);
  for (int rep = 0; rep < kReps; ++rep) {
    const Eigen::MatrixXd y = testing::SimulateAmbient(sys, kFs3Dof_hz, 40000, 100 + rep);
    ModalIdentification id;
    ASSERT_TRUE(IdentifyModes(MakeRecord(y, kFs3Dof_hz), {}, &id).ok());
    ASSERT_EQ(id.modes.size(), 3u) << "replication " << rep;
    for (int k = 0; k < 3; ++k) {
      f(rep, k) = id.modes[static_cast<std::size_t>(k)].frequency_hz;
      sf(rep, k) = id.modes[static_cast<std::size_t>(k)].frequency_std_hz;
      z(rep, k) = id.modes[static_cast<std::size_t>(k)].damping_ratio;
      sz(rep, k) = id.modes[static_cast<std::size_t>(k)].damping_std;
    }
  }
  for (int k = 0; k < 3; ++k) {
    const double ss = (f.col(k).array() - f.col(k).mean()).square().sum();
    const double chi2 = ss / sf.col(k).array().square().mean();
    const double chi2z =
        (z.col(k).array() - z.col(k).mean()).square().sum() / sz.col(k).array().square().mean();
    std::cout << "mode " << k + 1 << ": frequency chi2 " << chi2 << ", damping chi2 " << chi2z << ", f sd "
              << std::sqrt(ss / (kReps - 1)) / sys.frequency_hz[k] * 100 << " %\n";
    EXPECT_GT(chi2, kChi2Lo) << "mode " << k + 1 << ": reported std too large";
    EXPECT_LT(chi2, kChi2Hi) << "mode " << k + 1 << ": reported std too small";
    // The same check for the damping std.
    EXPECT_GT(chi2z, kChi2Lo) << "mode " << k + 1 << ": reported damping std too large";
    EXPECT_LT(chi2z, kChi2Hi) << "mode " << k + 1 << ": reported damping std too small";
    // And no bias beyond the random error of the mean of 30 (3 sigma).
    EXPECT_NEAR(f.col(k).mean(), sys.frequency_hz[k], 3.0 * std::sqrt(ss / (kReps - 1) / kReps))
        << "mode " << k + 1;
  }
}

// A forced sinusoid (machinery at 6.0 Hz, between modes 1 and 2) is a
// zero-damping line: it must not be reported as a mode, and a caution must
// say it was rejected.
TEST(ModalId, MachineryHarmonicRejected) {
  const auto sys = ThreeDof();
  Eigen::MatrixXd y = testing::SimulateAmbient(sys, kFs3Dof_hz, 40000, 11);
  const double rms = std::sqrt(y.squaredNorm() / y.size());
  for (Eigen::Index k = 0; k < y.rows(); ++k) {
    const double s = std::sin(2.0 * M_PI * 6.0 * k / kFs3Dof_hz);
    y.row(k) += Eigen::RowVector3d(0.8, -0.5, 0.3) * rms * s;
  }
  ModalIdentification id;
  ASSERT_TRUE(IdentifyModes(MakeRecord(y, kFs3Dof_hz), {}, &id).ok());
  for (const auto& m : id.modes) EXPECT_GT(std::abs(m.frequency_hz - 6.0), 0.06) << m.frequency_hz;
  EXPECT_EQ(id.modes.size(), 3u);
  bool caution = false;
  for (const auto& c : id.cautions) caution |= c.code == "narrow-line-rejected";
  EXPECT_TRUE(caution);
}

// Records from the beam model: an invented tie "quarry-lane-brace-4",
// 5.2 m, 30 mm round bar, elastic ends, three vertical sensors, 25 kN.
// Four modes of model::ModalModel are superposed, each driven by its own
// filtered noise (modal damping 0.5 %); identified frequencies must match
// the model to 0.2 % and shapes at the sensors to MAC 0.98 (issue 3).
TEST(ModalId, BeamModelModes) {
  model::Member m;
  m.id = "quarry-lane-brace-4";
  m.length_m = 5.2;
  m.section.shape = model::Section::Shape::kCircle;
  m.section.diameter_m = 0.03;
  m.elastic_modulus_pa = 2.1e11;
  m.density_kg_m3 = 7850;
  m.sensors = {{"v1", 1.1, 0.03, model::Direction::kVertical},
               {"v2", 2.3, 0.03, model::Direction::kVertical},
               {"v3", 3.9, 0.03, model::Direction::kVertical}};
  model::ModalParameters p;
  p.axial_force_n = 25000;
  model::ModalResult modes;
  ASSERT_TRUE(model::ComputeModes(m, model::Direction::kVertical, p, 4, &modes).ok());
  std::vector<double> f, zeta, drive;
  Eigen::MatrixXd shapes(3, 4);
  for (int r = 0; r < 4; ++r) {
    f.push_back(modes.modes[static_cast<std::size_t>(r)].frequency_hz);
    zeta.push_back(0.005);
    drive.push_back(1.0);
    for (int s = 0; s < 3; ++s)
      shapes(s, r) = modes.modes[static_cast<std::size_t>(r)].shape_at_sensors[static_cast<std::size_t>(s)];
  }
  const double fs = 256.0;
  // At least 300 s and 1200 periods of the fundamental (a 7.3 Hz mode gets
  // 300 s, as a field record would last).
  const double duration = std::max(300.0, 1200.0 / f[0]);
  const Eigen::MatrixXd y =
      testing::SimulateModal(f, zeta, shapes, drive, fs, static_cast<Eigen::Index>(duration * fs), 21);
  ModalIdentification id;
  ASSERT_TRUE(IdentifyModes(MakeRecord(y, fs, {"v1", "v2", "v3"}), {}, &id).ok());
  ASSERT_EQ(id.modes.size(), 4u);
  for (int r = 0; r < 4; ++r) {
    const IdentifiedMode& im = id.modes[static_cast<std::size_t>(r)];
    std::cout << "beam mode " << r + 1 << " (" << f[static_cast<std::size_t>(r)] << " Hz): frequency error "
              << 100 * (im.frequency_hz / f[static_cast<std::size_t>(r)] - 1) << " %, MAC "
              << Mac(Eigen::VectorXd(Eigen::Map<const Eigen::VectorXd>(im.shape.data(), 3)),
                     Eigen::VectorXd(shapes.col(r)))
              << "\n";
    EXPECT_NEAR(im.frequency_hz, f[static_cast<std::size_t>(r)],
                kFrequencyTol * f[static_cast<std::size_t>(r)])
        << "mode " << r + 1;
    EXPECT_GT(Mac(Eigen::VectorXd(Eigen::Map<const Eigen::VectorXd>(im.shape.data(), 3)),
                  Eigen::VectorXd(shapes.col(r))),
              0.98)
        << "mode " << r + 1;
  }
}

// Free decay with a prescribed hardening backbone: envelope A(t) = A0 e^{-s t}
// and instantaneous frequency f(A) = f0 (1 + c (A/A0)^2), the first-order
// Duffing backbone form (Nayfeh and Mook, Nonlinear Oscillations, 1979,
// sec. 4.1: omega = omega0 (1 + 3 alpha a^2 / (8 omega0^2))). The phase is
// integrated in closed form, phi(t) = 2 pi f0 (t + c (1 - e^{-2 s t}) / (2 s)),
// so the truth at every sample is exact.
TEST(ModalId, ImpactBackboneFollowsPrescribedHardening) {
  const double fs = 256.0, f0 = 12.0, zeta = 0.004, c = 0.03, a0 = 5.0;
  const double s = zeta * 2.0 * M_PI * f0;
  const double pre = 3.0, total = 40.0;
  const Eigen::Index n = static_cast<Eigen::Index>(total * fs);
  Eigen::MatrixXd y = Eigen::MatrixXd::Zero(n, 2);
  std::mt19937_64 rng(5);
  std::normal_distribution<double> g(0.0, 1.0);
  const double noise = 1e-3 * a0;
  for (Eigen::Index k = 0; k < n; ++k) {
    const double t = k / fs - pre;
    double a = 0.0, b = 0.0;
    if (t >= 0) {
      const double phase = 2.0 * M_PI * f0 * (t + c * (1.0 - std::exp(-2.0 * s * t)) / (2.0 * s));
      a = a0 * std::exp(-s * t) * std::cos(phase);
      // A second, linear mode at 31 Hz with 1 % damping on both channels.
      b = 0.4 * a0 * std::exp(-0.01 * 2 * M_PI * 31.0 * t) * std::cos(2 * M_PI * 31.0 * t);
    }
    y(k, 0) = a + 0.5 * b + noise * g(rng);
    y(k, 1) = 0.6 * a - b + noise * g(rng);
  }
  Record r = MakeRecord(y, fs);
  r.excitation = Excitation::kImpact;
  ModalIdentification id;
  ASSERT_TRUE(IdentifyModes(r, {}, &id).ok());
  ASSERT_TRUE(id.impact.has_value());
  const ImpactDecay& d = *id.impact;
  // The blow: the first peak of the decay, within one period of t = pre.
  EXPECT_NEAR(d.blow_time_s, pre, 1.0 / f0);
  EXPECT_EQ(d.channel, "a1");
  EXPECT_NEAR(d.mode_frequency_hz, f0, 0.04 * f0);  // between f0 and f0 (1 + c)
  ASSERT_GE(d.backbone.size(), 10u);
  // Tolerance: a bias bound of 0.1 % of f0 (averaging f over a 5-period
  // window while A falls by e^{-s T_w}, 16 %, shifts the window mean from
  // f(mean A) by about c var(A)/A0^2 < 3e-4 f0), plus 4 standard deviations
  // of the noise term. White noise of std sigma on the channel leaves
  // sigma_b = sigma sqrt(2 B / fs) in the band B = 0.3 f0 (plus the raised-
  // cosine edges, 1.3 B); the phase at each window end then scatters by
  // sigma_b / A rad, so the window frequency by sqrt(2) sigma_b / (2 pi A T_w).
  const double band = 1.3 * 0.3 * f0;
  const double sigma_b = noise * std::sqrt(2.0 * band / fs);
  const double t_w = kBackboneWindowCycles / f0;
  double worst = 0.0;
  for (const auto& p : d.backbone) {
    const double truth = f0 * (1.0 + c * std::pow(p.amplitude_m_s2 / a0, 2));
    worst = std::max(worst, std::abs(p.frequency_hz - truth) / f0);
    const double tol = 1e-3 * f0 + 4.0 * std::sqrt(2.0) * sigma_b / (2.0 * M_PI * p.amplitude_m_s2 * t_w);
    EXPECT_NEAR(p.frequency_hz, truth, tol) << "at amplitude " << p.amplitude_m_s2;
    EXPECT_NEAR(p.displacement_m, p.amplitude_m_s2 / std::pow(2 * M_PI * p.frequency_hz, 2), 1e-12);
  }
  // The sweep of the hardening mode is one mode (not split into close
  // clusters), cautioned; the 31 Hz mode is the second.
  ASSERT_EQ(id.modes.size(), 2u);
  EXPECT_NEAR(id.modes[1].frequency_hz, 31.0, 0.002 * 31.0);
  bool sweep = false;
  for (const auto& cau : id.cautions) sweep |= cau.code == "amplitude-dependent-frequency";
  EXPECT_TRUE(sweep);
  std::cout << d.backbone.size() << " backbone points, worst frequency error " << 100 * worst << " % of f0\n";
  EXPECT_GT(d.backbone.front().frequency_hz - d.backbone.back().frequency_hz, 0.5 * c * f0 * 0.5);
}

// One channel: the frequencies still come out (same 0.2 % limit as above,
// channel 3 of the 3-DOF system sees all three modes); no MAC between FDD
// and SSI shapes exists and the record carries the single-channel caution.
TEST(ModalId, SingleChannel) {
  const auto sys = ThreeDof();
  const Eigen::MatrixXd y = testing::SimulateAmbient(sys, kFs3Dof_hz, 160000, 8);
  ModalIdentification id;
  ASSERT_TRUE(IdentifyModes(MakeRecord(y.col(2), kFs3Dof_hz), {}, &id).ok());
  for (auto& m : id.modes)
    std::cout << m.frequency_hz << " " << m.damping_ratio << " " << m.frequency_std_hz << "\n";
  ASSERT_EQ(id.modes.size(), 3u);
  for (int k = 0; k < 3; ++k) {
    EXPECT_NEAR(id.modes[static_cast<std::size_t>(k)].frequency_hz, sys.frequency_hz[k],
                kFrequencyTol * sys.frequency_hz[k]);
    EXPECT_FALSE(id.modes[static_cast<std::size_t>(k)].mac_fdd_ssi.has_value());
    EXPECT_EQ(id.modes[static_cast<std::size_t>(k)].shape, std::vector<double>{1.0});
  }
  bool single = false;
  for (const auto& c : id.cautions) single |= c.code == "single-channel";
  EXPECT_TRUE(single);
}

// White noise has no modes: nothing stable must be reported (a result with
// the "no-mode" caution, not an error).
TEST(ModalId, WhiteNoiseHasNoMode) {
  std::mt19937_64 rng(17);
  std::normal_distribution<double> g(0.0, 1.0);
  Eigen::MatrixXd y(30000, 3);
  for (Eigen::Index k = 0; k < y.size(); ++k) y.data()[k] = g(rng);
  ModalIdentification id;
  ASSERT_TRUE(IdentifyModes(MakeRecord(y, kFs3Dof_hz), {}, &id).ok());
  EXPECT_TRUE(id.modes.empty()) << id.modes.size() << " modes, first at " << id.modes.front().frequency_hz;
  bool no_mode = false;
  for (const auto& c : id.cautions) no_mode |= c.code == "no-mode";
  EXPECT_TRUE(no_mode);
}

// A 60 s record holds 218 periods of the 3.64 Hz mode, fewer than
// kMinLowestModePeriods: the record-too-short caution.
TEST(ModalId, ShortRecordCautioned) {
  const Eigen::MatrixXd y = testing::SimulateAmbient(ThreeDof(), kFs3Dof_hz, 6000, 9);
  ModalIdentification id;
  ASSERT_TRUE(IdentifyModes(MakeRecord(y, kFs3Dof_hz), {}, &id).ok());
  bool caution = false;
  for (const auto& c : id.cautions) caution |= c.code == "record-too-short";
  EXPECT_TRUE(caution);
}

TEST(ModalId, BadOptionsAreErrorsNamingTheValue) {
  const Eigen::MatrixXd y = testing::SimulateAmbient(ThreeDof(), kFs3Dof_hz, 6000, 9);
  const Record r = MakeRecord(y, kFs3Dof_hz);
  ModalIdentification id;
  ModalIdOptions o;
  o.band_lo_hz = 20.0;
  o.band_hi_hz = 10.0;
  Status s = IdentifyModes(r, o, &id);
  EXPECT_FALSE(s.ok());
  EXPECT_NE(s.message.find("20:10"), std::string::npos) << s.message;
  o = {};
  o.band_lo_hz = 60.0;  // Nyquist 50 Hz
  o.band_hi_hz = 70.0;
  s = IdentifyModes(r, o, &id);
  EXPECT_FALSE(s.ok());
  EXPECT_NE(s.message.find("Nyquist"), std::string::npos) << s.message;
  o = {};
  o.max_modes = 0;
  s = IdentifyModes(r, o, &id);
  EXPECT_FALSE(s.ok());
  EXPECT_NE(s.message.find("max_modes = 0"), std::string::npos) << s.message;
  Record empty;
  EXPECT_FALSE(IdentifyModes(empty, {}, &id).ok());
  // A band above 80 % of Nyquist is lowered with a caution, not refused.
  o = {};
  o.band_hi_hz = 49.0;
  s = IdentifyModes(r, o, &id);
  ASSERT_TRUE(s.ok()) << s.message;
  bool caution = false;
  for (const auto& c : id.cautions) caution |= c.code == "rate-too-low";
  EXPECT_TRUE(caution);
}

}  // namespace
}  // namespace taut::estimation

namespace taut::estimation {
namespace {

// Issue 12, class 7: a short decay at a high rate (2510 samples at 1 kHz)
// was refused ("2510 samples are too few for 137 correlation lags") when
// the lowest frequency of interest asked for 69 block rows. The lag count
// now follows the record length (at most samples / kMinSamplesPerLag lags):
// the call succeeds, the lags fit the record, and the one mode of the
// record (15 Hz, 1 % damping, exact single-DOF simulation, synthetic.h) is
// found within 1 % (37 periods in the record; a bound, not a noise model).
TEST(SsiCov, LagCountFollowsRecordLength) {
  const double fs = 1000.0;
  Eigen::MatrixXd shapes(1, 1);
  shapes(0, 0) = 1.0;
  const Eigen::MatrixXd y = taut::testing::SimulateModal({15.0}, {0.01}, shapes, {1.0}, fs, 2510, 21);
  SsiOptions o;
  o.lowest_hz = 14.5;  // asks for ceil(1000 / 14.5) = 69 block rows, 137 lags
  o.hi_hz = 100.0;
  SsiResult r;
  const Status s = RunSsiCov(y, fs, o, &r);
  ASSERT_TRUE(s.ok()) << s.message;
  EXPECT_LE(kMinSamplesPerLag * 2 * r.block_rows, 2510);
  bool found = false;
  for (const auto& m : r.modes) found |= std::abs(m.frequency_hz / 15.0 - 1.0) < 0.01;
  EXPECT_TRUE(found) << r.modes.size() << " modes";
}

}  // namespace
}  // namespace taut::estimation
