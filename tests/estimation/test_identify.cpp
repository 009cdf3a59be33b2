// Model updating: N, EI and end fixities from identified modes.
//
// Truth: synthetic modes from the forward model with known parameters on a
// much finer mesh (synthetic_modes.h), or from published closed forms:
//  [B] pinned-pinned beam with tension (docs/DESIGN.md; Blevins, Formulas for
//      Natural Frequency and Mode Shape, 1979):
//      f_n = (n / 2L) sqrt(N/m) sqrt(1 + n^2 pi^2 EI / (N L^2)),
//      solved for N from f_1: N = 4 m L^2 f_1^2 - pi^2 EI / L^2;
//  [M] the taut string (Mersenne's law): f_n = (n / 2L) sqrt(N/m);
//  [T] Euler load of a pinned bar pi^2 EI / L^2 (Timoshenko and Gere,
//      Theory of Elastic Stability, 1961).
// Statistical statements use the 95 % level of the intervals under test.
// The members and sites are invented.
#include <gtest/gtest.h>

#include <cmath>
#include <numbers>
#include <random>

#include "estimation/identify.h"
#include "synthetic_modes.h"

namespace taut::estimation {
namespace {

using model::Direction;
using model::RotationEnd;
constexpr double kPi = std::numbers::pi;

model::Member Bar(double length, double diameter, Direction d, std::vector<double> sensor_share,
                  RotationEnd::Kind left = RotationEnd::Kind::kElastic,
                  RotationEnd::Kind right = RotationEnd::Kind::kElastic) {
  return testing::SteelBar(length, diameter, d, sensor_share, left, right);
}

bool HasCaution(const Estimate& e, const std::string& code) {
  for (const auto& c : e.cautions) {
    if (c.code == code) return true;
  }
  return false;
}

std::string Codes(const Estimate& e) {
  std::string s;
  for (const auto& c : e.cautions) s += c.code + " ";
  return s;
}

struct RoundTripCase {
  std::string name;
  model::Member member;
  Direction plane;
  model::ModalParameters truth;
  double ei_truth_share;  // true EI / nominal EI
};

// Round trip: noise-free synthetic modes (stated std 0.1 % of f) are
// identified with N within 1 % of the truth and inside the 95 % interval
// (issue 4). Noise-free data put the optimum at the truth up to mesh error
// and the EI prior's pull (EI truth off nominal in some cases), so 1 % is a
// bias bound, not a noise bound.
class RoundTrip : public ::testing::TestWithParam<int> {};

std::vector<RoundTripCase> Cases() {
  std::vector<RoundTripCase> cases;
  {
    // Long heavily tensioned bar: 12 m, 40 mm, 400 kN, tension dominates.
    RoundTripCase c{"long-tensioned",
                    Bar(12.0, 0.040, Direction::kVertical, {0.21, 0.47, 0.73}),
                    Direction::kVertical,
                    {},
                    1.0};
    c.truth.axial_force_n = 400e3;
    c.truth.fixity_left = 0.6;
    c.truth.fixity_right = 0.4;
    cases.push_back(c);
  }
  {
    // Short bar where bending dominates: 2.5 m, 40 mm, 20 kN ~ 0.5 pi^2 EI/L^2.
    RoundTripCase c{"short-bending",
                    Bar(2.5, 0.040, Direction::kLateral, {0.2, 0.45, 0.7}),
                    Direction::kLateral,
                    {},
                    0.92};
    c.truth.axial_force_n = 20e3;
    c.truth.fixity_left = 0.3;
    c.truth.fixity_right = 0.7;
    cases.push_back(c);
  }
  {
    // One end declared pinned, the other elastic and nearly clamped.
    RoundTripCase c{"pinned-nearly-clamped",
                    Bar(6.0, 0.030, Direction::kLateral, {0.2, 0.45, 0.7}, RotationEnd::Kind::kPinned),
                    Direction::kLateral,
                    {},
                    1.0};
    c.truth.axial_force_n = 30e3;
    c.truth.fixity_right = 0.97;
    cases.push_back(c);
  }
  {
    // Horizontal tie sensed vertically with immovable ends: sag coupling
    // stiffens the symmetric modes (Irvine and Caughey 1974).
    RoundTripCase c{"sag-coupled-vertical",
                    Bar(8.0, 0.030, Direction::kVertical, {0.2, 0.45, 0.7}),
                    Direction::kVertical,
                    {},
                    1.05};
    c.truth.axial_force_n = 15e3;
    c.truth.fixity_left = 0.5;
    c.truth.fixity_right = 0.5;
    cases.push_back(c);
  }
  {
    // Compressed strut at 40 % of its critical load (set below from [T]-type
    // buckling analysis of the model with the true fixities).
    RoundTripCase c{"compressed-strut",
                    Bar(3.0, 0.050, Direction::kLateral, {0.2, 0.45, 0.7}),
                    Direction::kLateral,
                    {},
                    1.0};
    c.truth.fixity_left = 0.5;
    c.truth.fixity_right = 0.5;
    cases.push_back(c);
  }
  for (auto& c : cases) {
    c.truth.bending_stiffness_nm2 = c.ei_truth_share * c.member.NominalBendingStiffness_nm2(c.plane);
    if (c.name == "compressed-strut") {
      model::ModalModel mm(c.member, c.plane, model::ModalOptions{testing::kTruthElements});
      double n_cr = 0.0;
      EXPECT_TRUE(mm.CriticalCompression(c.truth, &n_cr).ok());
      c.truth.axial_force_n = -0.4 * n_cr;
    }
  }
  return cases;
}

TEST_P(RoundTrip, ForceWithinOnePercentAndInsideInterval) {
  const RoundTripCase c = Cases()[GetParam()];
  SCOPED_TRACE(c.name);
  ModalIdentification id;
  testing::SyntheticOptions so;
  ASSERT_TRUE(testing::MakeModes(c.member, c.plane, c.truth, so, nullptr, &id));
  Estimate e;
  Status s = IdentifyFromModes(c.member, id, {}, &e);
  ASSERT_TRUE(s.ok()) << s.message;
  const double n_true = c.truth.axial_force_n;
  EXPECT_NEAR(e.axial_force_n.value / n_true, 1.0, 0.01) << Codes(e);
  EXPECT_LE(e.axial_force_n.ci95_low, n_true);
  EXPECT_GE(e.axial_force_n.ci95_high, n_true);
  EXPECT_GT(e.axial_force_n.ci95_high, e.axial_force_n.ci95_low);
  EXPECT_EQ(e.fit.forward_model_calls > 0, true);
  for (const auto& m : e.modes) EXPECT_TRUE(m.paired) << m.measured.frequency_hz;
  EXPECT_FALSE(e.notice.empty());
  if (c.name == "compressed-strut") {
    EXPECT_TRUE(HasCaution(e, "compression")) << Codes(e);
  }
  if (c.name == "pinned-nearly-clamped") {
    EXPECT_TRUE(e.fixity_left.fixed);
    EXPECT_EQ(e.fixity_left.value, 0.0);
  }
  std::printf(
      "[ %s ] N %.6g (truth %.6g, error %.3f %%) ci95 [%.6g, %.6g] (%s), EI %.5g (truth %.5g), r %.3f/%.3f, "
      "chi2_red %.3g, starts %d at best %d, calls %ld, %.1f ms, cautions: %s\n",
      c.name.c_str(), e.axial_force_n.value, n_true, 100 * (e.axial_force_n.value / n_true - 1),
      e.axial_force_n.ci95_low, e.axial_force_n.ci95_high, e.fit.axial_force_interval.c_str(),
      e.bending_stiffness_nm2.value, *c.truth.bending_stiffness_nm2, e.fixity_left.value,
      e.fixity_right.value, e.fit.reduced_chi2, e.fit.starts, e.fit.starts_at_best, e.fit.forward_model_calls,
      1e3 * e.fit.seconds, Codes(e).c_str());
}

INSTANTIATE_TEST_SUITE_P(Families, RoundTrip, ::testing::Range(0, 5));

// Axial support stiffness (issue 4, Unknowns: "optionally the axial
// support stiffness when the record has vertical channels and sag coupling
// matters"). Invented horizontal 8 m, 30 mm tie at 15 kN sensed vertically,
// elastic ends 0.5 / 0.5, whose supports are declared as a spring of
// series ratio rho = k_ax / (EA/L) = 0.8 while the truth is 0.4 (softer
// supports than the engineer assumed). Noise-free synthetic modes (five,
// stated std 0.1 %) from the model at the truth. Checks: the sag coupling
// moves mode 1 by more than its std (so rho is an unknown); N within 1 % of
// the truth and inside its interval (the round-trip tolerance); the
// true rho inside its 95 % interval; with rho held at the declared value
// the same data give a force off by more than 5 % and a poor fit (reduced
// chi-square far above kPoorFitReducedChi2): the reason to estimate it.
TEST(Identify, DeclaredAxialSupportSpringIsEstimatedWhereSagCouplingMatters) {
  model::Member m = Bar(8.0, 0.030, Direction::kVertical, {0.2, 0.45, 0.7});
  const double ea_over_l = m.AxialRigidity_n() / m.length_m;
  auto spring = [&](double rho) { return ea_over_l * rho / (1.0 - rho); };  // 1/k_ax = L/EA + 1/k_s
  m.axial.kind = model::AxialEnds::Kind::kSpring;
  m.axial.stiffness_n_per_m = spring(0.8);
  model::ModalParameters truth;
  truth.axial_force_n = 15e3;
  truth.fixity_left = 0.5;
  truth.fixity_right = 0.5;
  truth.axial_support_stiffness_n_per_m = spring(0.4);
  ModalIdentification id;
  testing::SyntheticOptions so;
  so.modes = 5;
  ASSERT_TRUE(testing::MakeModes(m, Direction::kVertical, truth, so, nullptr, &id));
  Estimate e;
  ASSERT_TRUE(IdentifyFromModes(m, id, {}, &e).ok());
  std::printf(
      "[ axial support ] sag shift %.4f Hz (std %.4f Hz); N %.6g [%.6g, %.6g] (truth 15000, %+.3f %%); rho "
      "%.3f "
      "[%.3f, %.3f] (truth 0.4, declared 0.8), k_s %.4g N/m; calls %ld; cautions %s\n",
      e.axial_support_sag_shift_hz, 1e-3 * id.modes[0].frequency_hz, e.axial_force_n.value,
      e.axial_force_n.ci95_low, e.axial_force_n.ci95_high, 100 * (e.axial_force_n.value / 15e3 - 1),
      e.axial_support_ratio.value, e.axial_support_ratio.ci95_low, e.axial_support_ratio.ci95_high,
      e.axial_support_stiffness_n_per_m, e.fit.forward_model_calls, Codes(e).c_str());
  EXPECT_GT(e.axial_support_sag_shift_hz, 1e-3 * id.modes[0].frequency_hz);
  EXPECT_FALSE(e.axial_support_ratio.fixed);
  EXPECT_NEAR(e.axial_force_n.value / 15e3, 1.0, 0.01);
  EXPECT_LE(e.axial_force_n.ci95_low, 15e3);
  EXPECT_GE(e.axial_force_n.ci95_high, 15e3);
  EXPECT_LE(e.axial_support_ratio.ci95_low, 0.4);
  EXPECT_GE(e.axial_support_ratio.ci95_high, 0.4);

  IdentifyOptions held;
  held.estimate_axial_support = false;
  Estimate h;
  ASSERT_TRUE(IdentifyFromModes(m, id, held, &h).ok());
  std::printf("[ axial support held ] N %.6g [%.6g, %.6g], reduced chi2 %.3g\n", h.axial_force_n.value,
              h.axial_force_n.ci95_low, h.axial_force_n.ci95_high, h.fit.reduced_chi2);
  EXPECT_TRUE(h.axial_support_ratio.fixed);
  EXPECT_GT(std::abs(h.axial_force_n.value / 15e3 - 1.0), 0.05);
  EXPECT_TRUE(HasCaution(h, "poor-fit")) << Codes(h);
}

TEST(Identify, CoverageOfForceIntervalOverNoisyReplications) {
  // 120 replications of one tie (6 m, 30 mm, 30 kN, fixities 0.4 / 0.6,
  // three vertical sensors, four modes): frequencies drawn with std 0.2 % of
  // f and shapes with std 0.03, exactly the stds the estimator is told; the
  // nominal E of each replication is drawn log-normally with 15 % around the
  // true one, so the EI prior is itself a noisy measurement as the
  // estimator assumes. A calibrated 95 % interval covers the truth in 95 %
  // of replications; the binomial 99 % range for 120 trials is about
  // 89.6 % - 99.2 %, and the issue asks for 90 % - 99 %.
  constexpr int kReplications = 120;
  std::mt19937 rng(20261202);
  std::normal_distribution<double> unit(0.0, 1.0);
  model::Member truth_member = Bar(6.0, 0.030, Direction::kVertical, {0.2, 0.45, 0.7});
  model::ModalParameters truth;
  truth.axial_force_n = 30e3;
  truth.fixity_left = 0.4;
  truth.fixity_right = 0.6;
  testing::SyntheticOptions so;
  so.relative_frequency_std = 2e-3;
  so.shape_std = 0.03;
  so.add_frequency_noise = true;
  IdentifyOptions io;
  io.shape_std = 0.03;
  // The EI interval (issue 12: Wald alone was 2-3 times too narrow across
  // repeated records) is held to the same range.
  const double ei_true = truth_member.NominalBendingStiffness_nm2(Direction::kVertical);
  int covered = 0, ei_covered = 0, ok = 0, ei_profile = 0;
  double max_abs_err = 0.0;
  for (int k = 0; k < kReplications; ++k) {
    ModalIdentification id;
    ASSERT_TRUE(testing::MakeModes(truth_member, Direction::kVertical, truth, so, &rng, &id));
    model::Member m = truth_member;
    m.elastic_modulus_pa *= std::exp(0.15 * unit(rng));
    Estimate e;
    if (!IdentifyFromModes(m, id, io, &e).ok()) continue;
    ++ok;
    covered +=
        (e.axial_force_n.ci95_low <= truth.axial_force_n && truth.axial_force_n <= e.axial_force_n.ci95_high);
    ei_covered +=
        (e.bending_stiffness_nm2.ci95_low <= ei_true && ei_true <= e.bending_stiffness_nm2.ci95_high);
    ei_profile += e.fit.bending_stiffness_interval == "profile";
    max_abs_err = std::max(max_abs_err, std::abs(e.axial_force_n.value / truth.axial_force_n - 1));
  }
  std::printf(
      "[ coverage ] %d of %d replications identified, N interval covers truth in %d (%.1f %%), EI interval "
      "in %d (%.1f %%; profile wider in %d), largest error %.2f %%\n",
      ok, kReplications, covered, 100.0 * covered / kReplications, ei_covered,
      100.0 * ei_covered / kReplications, ei_profile, 100 * max_abs_err);
  EXPECT_EQ(ok, kReplications);
  EXPECT_GE(covered, static_cast<int>(std::ceil(0.90 * kReplications)));
  EXPECT_LE(covered, static_cast<int>(std::floor(0.99 * kReplications)));
  EXPECT_GE(ei_covered, static_cast<int>(std::ceil(0.90 * kReplications)));
  EXPECT_LE(ei_covered, static_cast<int>(std::floor(0.99 * kReplications)));
}

TEST(Identify, PinnedEndsMatchClosedFormFromFundamental) {
  // [B]: pinned ends declared, lateral plane (no sag), massless sensors,
  // one measured fundamental from the closed form; the estimate must equal
  // N = 4 m L^2 f_1^2 - pi^2 EI / L^2 with the nominal EI to 0.1 % (issue
  // 4). With a single frequency, the EI prior residual vanishes at the
  // nominal, so the estimate is the closed-form inversion plus the FE
  // discretisation error, which the mesh check keeps below 0.1 std = 1e-5 f.
  model::Member m = Bar(6.2, 0.032, Direction::kLateral, {0.25, 0.5, 0.75}, RotationEnd::Kind::kPinned,
                        RotationEnd::Kind::kPinned);
  for (auto& s : m.sensors) s.mass_kg = 0.0;
  m.axial.kind = model::AxialEnds::Kind::kFree;
  const double mass = m.MassPerLength_kg_m(), ei = m.NominalBendingStiffness_nm2(Direction::kLateral),
               L = 6.2;
  for (double n_true : {5e3, 40e3, 250e3}) {
    const double f1 =
        1.0 / (2 * L) * std::sqrt(n_true / mass) * std::sqrt(1 + kPi * kPi * ei / (n_true * L * L));
    ModalIdentification id;
    id.channels = {"s1", "s2", "s3"};
    IdentifiedMode mode;
    mode.frequency_hz = f1;
    mode.frequency_std_hz = 1e-4 * f1;
    mode.shape = {std::sin(kPi * 0.25) / 1.0, 1.0, std::sin(kPi * 0.75)};
    id.modes = {mode};
    Estimate e;
    Status s = IdentifyFromModes(m, id, {}, &e);
    ASSERT_TRUE(s.ok()) << s.message;
    const double n_closed = 4 * mass * L * L * f1 * f1 - kPi * kPi * ei / (L * L);
    EXPECT_NEAR(e.axial_force_n.value / n_closed, 1.0, 1e-3) << n_true;
    EXPECT_TRUE(e.fixity_left.fixed && e.fixity_right.fixed);
    EXPECT_TRUE(HasCaution(e, "single-mode"));
    std::printf("[ closed form ] N true %.6g, closed form %.8g, estimate %.8g (rel. diff %.2e)\n", n_true,
                n_closed, e.axial_force_n.value, e.axial_force_n.value / n_closed - 1);
  }
}

TEST(Identify, PinnedEndsFourClosedFormModes) {
  // [B] frequencies of orders 1-4 for N = 30 kN and a true EI 10 % below
  // nominal: four modes determine N and EI; N within 0.1 % of the truth
  // (the mesh check keeps FE error < 1e-5 f, the prior's pull on EI is
  // small against four modes with 0.01 % std).
  model::Member m = Bar(6.2, 0.032, Direction::kLateral, {0.2, 0.45, 0.7}, RotationEnd::Kind::kPinned,
                        RotationEnd::Kind::kPinned);
  for (auto& s : m.sensors) s.mass_kg = 0.0;
  const double mass = m.MassPerLength_kg_m(), L = 6.2;
  const double ei = 0.9 * m.NominalBendingStiffness_nm2(Direction::kLateral), n_true = 30e3;
  ModalIdentification id;
  id.channels = {"s1", "s2", "s3"};
  for (int n = 1; n <= 4; ++n) {
    IdentifiedMode mode;
    mode.frequency_hz =
        n / (2 * L) * std::sqrt(n_true / mass) * std::sqrt(1 + n * n * kPi * kPi * ei / (n_true * L * L));
    mode.frequency_std_hz = 1e-4 * mode.frequency_hz;
    for (const auto& sensor : m.sensors) mode.shape.push_back(std::sin(n * kPi * sensor.position_m / L));
    double amax = 0.0;
    for (double v : mode.shape) amax = std::max(amax, std::abs(v));
    for (double& v : mode.shape) v /= amax;
    id.modes.push_back(mode);
  }
  Estimate e;
  Status s = IdentifyFromModes(m, id, {}, &e);
  ASSERT_TRUE(s.ok()) << s.message;
  EXPECT_NEAR(e.axial_force_n.value / n_true, 1.0, 1e-3);
  EXPECT_NEAR(e.bending_stiffness_nm2.value / ei, 1.0, 1e-2);
  for (const auto& em : e.modes) {
    ASSERT_TRUE(em.paired);
    EXPECT_NEAR(em.mac, 1.0, 1e-6);  // FE shapes equal sin(n pi x/L) [B]
  }
}

TEST(Identify, VanishingBendingStiffnessTendsToMersenne) {
  // [M]: string frequencies f_n = n/(2L) sqrt(N/m), n = 1..3, identified with
  // a member whose nominal EI gives eps = pi^2 EI / (N L^2) = 1e-2, 1e-4,
  // 1e-6. At nominal EI the beam model's f_n^2 exceeds the string's by the
  // share n^2 eps ([B]), so a fit of N alone to modes 1..3 with equal
  // relative stds lands at N_M (1 - mean(n^2) eps), mean(n^2) = 14/3; a
  // free EI can only reduce this. The relative difference must stay below
  // (14/3) eps * 1.05 + 1e-5 (1e-5: the mesh check's 0.1 std of 1e-4 f,
  // doubled for f^2), which falls towards zero with eps. (Where the string
  // data contradict the nominal EI by more than three prior stds the prior
  // is relaxed, issue 12 class 2, and the estimate moves closer to N_M, so
  // the difference need not fall monotonically between the eps values.)
  const double L = 5.0, n_true = 20e3, area = 7.0e-4;
  for (double eps : {1e-2, 1e-4, 1e-6}) {
    model::Member m = Bar(L, 0.03, Direction::kLateral, {0.2, 0.45, 0.7}, RotationEnd::Kind::kPinned,
                          RotationEnd::Kind::kPinned);
    for (auto& s : m.sensors) s.mass_kg = 0.0;
    m.section.shape = model::Section::Shape::kGeneral;
    m.section.area_m2 = area;
    m.section.second_moment_m4 = eps * n_true * L * L / (kPi * kPi * m.elastic_modulus_pa);
    const double mass = m.MassPerLength_kg_m();
    ModalIdentification id;
    id.channels = {"s1", "s2", "s3"};
    for (int n = 1; n <= 3; ++n) {
      IdentifiedMode mode;
      mode.frequency_hz = n / (2 * L) * std::sqrt(n_true / mass);
      mode.frequency_std_hz = 1e-4 * mode.frequency_hz;
      for (const auto& sensor : m.sensors) mode.shape.push_back(std::sin(n * kPi * sensor.position_m / L));
      double amax = 0.0;
      for (double v : mode.shape) amax = std::max(amax, std::abs(v));
      for (double& v : mode.shape) v /= amax;
      id.modes.push_back(mode);
    }
    Estimate e;
    Status s = IdentifyFromModes(m, id, {}, &e);
    ASSERT_TRUE(s.ok()) << s.message;
    const double f1 = id.modes[0].frequency_hz;
    const double n_mersenne = 4 * mass * L * L * f1 * f1;
    const double diff = std::abs(e.axial_force_n.value / n_mersenne - 1);
    std::printf("[ mersenne ] eps %.0e: estimate / Mersenne - 1 = %.2e\n", eps,
                e.axial_force_n.value / n_mersenne - 1);
    EXPECT_LT(diff, 14.0 / 3.0 * eps * 1.05 + 1e-5);
  }
}

TEST(Identify, SingleModeSingleSensorGivesWideHonestInterval) {
  // One lateral sensor, one mode, two elastic ends: N, EI and both
  // fixities trade off. The interval must be at least as wide as the
  // trade-off at nominal EI: from the force that explains f_1 with both
  // ends clamped to the one with both pinned (the closed form [B]). The
  // clamped bound is found by bisection on the forward model (fine mesh).
  model::Member m = Bar(6.0, 0.030, Direction::kLateral, {0.37});
  model::ModalParameters truth;
  truth.axial_force_n = 30e3;
  truth.fixity_left = 0.5;
  truth.fixity_right = 0.5;
  ModalIdentification id;
  testing::SyntheticOptions so;
  so.modes = 1;
  ASSERT_TRUE(testing::MakeModes(m, Direction::kLateral, truth, so, nullptr, &id));
  const double f1 = id.modes[0].frequency_hz;
  Estimate e;
  Status s = IdentifyFromModes(m, id, {}, &e);
  ASSERT_TRUE(s.ok()) << s.message;
  EXPECT_TRUE(HasCaution(e, "single-mode")) << Codes(e);
  EXPECT_TRUE(HasCaution(e, "single-sensor")) << Codes(e);
  EXPECT_TRUE(HasCaution(e, "not-identifiable")) << Codes(e);
  EXPECT_TRUE(HasCaution(e, "wide-interval")) << Codes(e);

  const double mass = m.MassPerLength_kg_m() + 0.03 / 6.0;  // sensor mass smeared: a small correction
  const double ei = m.NominalBendingStiffness_nm2(Direction::kLateral);
  const double n_pinned = 4 * mass * 36.0 * f1 * f1 - kPi * kPi * ei / 36.0;
  model::ModalModel mm(m, Direction::kLateral, model::ModalOptions{80});
  double lo = 0.0, hi = n_pinned;
  for (int it = 0; it < 60; ++it) {
    model::ModalParameters p;
    p.axial_force_n = 0.5 * (lo + hi);
    p.fixity_left = p.fixity_right = 1.0;
    model::ModalResult r;
    ASSERT_TRUE(mm.Solve(p, 1, &r).ok());
    (r.modes[0].frequency_hz > f1 ? hi : lo) = p.axial_force_n;
  }
  const double n_clamped = 0.5 * (lo + hi);
  std::printf("[ single mode ] trade-off at nominal EI [%.6g, %.6g] N, reported ci95 [%.6g, %.6g] N\n",
              n_clamped, n_pinned, e.axial_force_n.ci95_low, e.axial_force_n.ci95_high);
  // 1 % slack on the pinned end for the smeared sensor mass in n_pinned.
  EXPECT_LE(e.axial_force_n.ci95_low, n_clamped);
  EXPECT_GE(e.axial_force_n.ci95_high, 0.99 * n_pinned);
  EXPECT_FALSE(e.fixity_left.identifiable);
  EXPECT_EQ(e.fixity_left.ci95_low, 0.0);
  EXPECT_EQ(e.fixity_left.ci95_high, 1.0);
}

TEST(Identify, SpuriousModeIsReportedNotForced) {
  model::Member m = Bar(6.0, 0.030, Direction::kLateral, {0.2, 0.45, 0.7});
  model::ModalParameters truth;
  truth.axial_force_n = 30e3;
  truth.fixity_left = 0.4;
  truth.fixity_right = 0.6;
  ModalIdentification id;
  ASSERT_TRUE(testing::MakeModes(m, Direction::kLateral, truth, {}, nullptr, &id));
  IdentifiedMode spurious = id.modes[0];
  spurious.frequency_hz = 1.5 * id.modes[0].frequency_hz;  // between orders 1 and 2
  spurious.frequency_std_hz = 1e-3 * spurious.frequency_hz;
  id.modes.insert(id.modes.begin() + 1, spurious);
  Estimate e;
  Status s = IdentifyFromModes(m, id, {}, &e);
  ASSERT_TRUE(s.ok()) << s.message;
  ASSERT_EQ(e.modes.size(), 5u);
  EXPECT_FALSE(e.modes[1].paired);
  EXPECT_TRUE(HasCaution(e, "unpaired-mode")) << Codes(e);
  EXPECT_NEAR(e.axial_force_n.value / truth.axial_force_n, 1.0, 0.01);  // issue 4: 1 %
}

TEST(Identify, BadInputsGiveClearErrors) {
  model::Member m = Bar(6.0, 0.030, Direction::kVertical, {0.2, 0.45, 0.7});
  model::ModalParameters truth;
  truth.axial_force_n = 30e3;
  ModalIdentification good;
  ASSERT_TRUE(testing::MakeModes(m, Direction::kVertical, truth, {}, nullptr, &good));
  Estimate e;
  {
    ModalIdentification id = good;
    id.channels[1] = "x9";
    Status s = IdentifyFromModes(m, id, {}, &e);
    EXPECT_EQ(s.code, Status::Code::kInvalidArgument);
    EXPECT_NE(s.message.find("'x9'"), std::string::npos) << s.message;
    EXPECT_NE(s.message.find("s1, s2, s3"), std::string::npos) << s.message;
  }
  {
    ModalIdentification id = good;
    id.modes.clear();
    Status s = IdentifyFromModes(m, id, {}, &e);
    EXPECT_EQ(s.code, Status::Code::kInvalidArgument);
    EXPECT_NE(s.message.find("no mode was identified"), std::string::npos) << s.message;
  }
  {
    ModalIdentification id = good;
    id.modes[2].shape.pop_back();
    Status s = IdentifyFromModes(m, id, {}, &e);
    EXPECT_EQ(s.code, Status::Code::kInvalidArgument);
    EXPECT_NE(s.message.find("mode 3: shape has 2 entries for 3 channels"), std::string::npos) << s.message;
  }
  {
    ModalIdentification id = good;
    id.modes[0].frequency_hz = std::nan("");
    Status s = IdentifyFromModes(m, id, {}, &e);
    EXPECT_EQ(s.code, Status::Code::kInvalidArgument);
    EXPECT_NE(s.message.find("frequency_hz"), std::string::npos) << s.message;
  }
  {
    model::Member bad = m;
    bad.sensors[2].position_m = 7.0;  // outside the 6 m span
    Status s = IdentifyFromModes(bad, good, {}, &e);
    EXPECT_EQ(s.code, Status::Code::kInvalidArgument);
    EXPECT_NE(s.message.find("7"), std::string::npos) << s.message;
  }
}

}  // namespace
}  // namespace taut::estimation

namespace taut::estimation {
namespace {

TEST(Identify, HardeningBackboneRaisesLargeAmplitudeCaution) {
  // docs/DESIGN.md: large amplitude biases the linear model (Duffing hardening,
  // Nayfeh and Mook 1979). A free-decay backbone whose frequency falls by
  // 2 % as the amplitude decays must raise "large-amplitude"; one that moves
  // by 0.1 % (below kLargeAmplitudeFrequencyShift = 0.5 %) must not.
  model::Member m = Bar(6.0, 0.030, model::Direction::kLateral, {0.2, 0.45, 0.7});
  model::ModalParameters truth;
  truth.axial_force_n = 30e3;
  ModalIdentification id;
  ASSERT_TRUE(testing::MakeModes(m, model::Direction::kLateral, truth, {}, nullptr, &id));
  const double f1 = id.modes[0].frequency_hz;
  for (double shift : {0.02, 0.001}) {
    ImpactDecay decay;
    decay.mode_frequency_hz = f1;
    for (int k = 0; k < 5; ++k) {
      BackbonePoint p;
      p.time_s = k;
      p.amplitude_m_s2 = 10.0 / (1 + k);
      p.frequency_hz = f1 * (1.0 + shift * (4 - k) / 4.0);
      decay.backbone.push_back(p);
    }
    id.impact = decay;
    Estimate e;
    ASSERT_TRUE(IdentifyFromModes(m, id, {}, &e).ok());
    EXPECT_EQ(HasCaution(e, "large-amplitude"), shift > kLargeAmplitudeFrequencyShift) << shift;
  }
}

}  // namespace
}  // namespace taut::estimation
