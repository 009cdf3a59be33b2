// The simplified formulas shown beside taut's estimate
// (estimation/simplified_formulas.h), checked against the closed forms they
// come from:
//  - R. D. Blevins, Formulas for Natural Frequency and Mode Shape (1979),
//    the pinned-pinned beam with axial tension (docs/DESIGN.md):
//      f_n = (n / 2L) sqrt(N/m) sqrt(1 + n^2 pi^2 EI / (N L^2)),
//    from which the regression must return N and EI exactly (its model is
//    this formula), and the string formula N (1 + gamma_1);
//  - H. M. Irvine, T. K. Caughey, The linear theory of free vibrations of a
//    suspended cable, Proc. R. Soc. Lond. A 341 (1974): the first symmetric
//    in-plane mode solves tan(w/2) = w/2 - (4 / lambda^2)(w/2)^3, solved
//    here by bisection, against which the small-lambda^2 share is checked.
#include <gtest/gtest.h>

#include <cmath>

#include "estimation/simplified_formulas.h"

namespace taut::estimation {
namespace {

constexpr double kPi = 3.14159265358979323846;

// An invented tie: 6.0 m, 30 mm round bar, steel, pinned ends, no sensor mass.
model::Member Tie(double length_m, double diameter_m) {
  model::Member m;
  m.id = "test-tie";
  m.length_m = length_m;
  m.section.shape = model::Section::Shape::kCircle;
  m.section.diameter_m = diameter_m;
  m.elastic_modulus_pa = 2.0e11;
  m.density_kg_m3 = 7850.0;
  m.left.kind = model::RotationEnd::Kind::kPinned;
  m.right.kind = model::RotationEnd::Kind::kPinned;
  m.axial.kind = model::AxialEnds::Kind::kFree;
  return m;
}

double PinnedFrequency_hz(const model::Member& member, int n, double N, double EI) {
  const double L = member.length_m, m = member.density_kg_m3 * member.section.Area();
  return n / (2.0 * L) * std::sqrt(N / m) * std::sqrt(1.0 + n * n * kPi * kPi * EI / (N * L * L));
}

TEST(SimplifiedFormulas, PinnedBeamFrequenciesGiveBackTheirForceAndStiffness) {
  const model::Member tie = Tie(6.0, 0.030);
  const double N = 30000.0, EI = tie.NominalBendingStiffness_nm2(model::Direction::kVertical);
  std::vector<std::pair<int, double>> modes;
  for (int n = 1; n <= 5; ++n) modes.push_back({n, PinnedFrequency_hz(tie, n, N, EI)});
  const SimplifiedComparison c =
      CompareWithSimplifiedFormulas(tie, model::Direction::kVertical, modes, N, EI, 0.0, 0.0);
  ASSERT_TRUE(c.pinned_beam_force_n && c.pinned_beam_bending_stiffness_nm2 && c.taut_string_force_n);
  EXPECT_EQ(c.modes_used, 5);
  // Exact in the regression's own model: only rounding (1e-9 relative).
  EXPECT_NEAR(*c.pinned_beam_force_n / N, 1.0, 1e-9);
  EXPECT_NEAR(*c.pinned_beam_bending_stiffness_nm2 / EI, 1.0, 1e-9);
  // The string formula on the fundamental reads N (1 + pi^2 EI / (N L^2)).
  const double gamma1 = kPi * kPi * EI / (N * tie.length_m * tie.length_m);
  EXPECT_NEAR(*c.taut_string_force_n / (N * (1.0 + gamma1)), 1.0, 1e-12);
}

TEST(SimplifiedFormulas, WithoutTheFundamentalThereIsNoStringForceAndOneModeGivesNoRegression) {
  const model::Member tie = Tie(6.0, 0.030);
  const double N = 30000.0, EI = tie.NominalBendingStiffness_nm2(model::Direction::kVertical);
  const SimplifiedComparison upper = CompareWithSimplifiedFormulas(
      tie, model::Direction::kVertical,
      {{2, PinnedFrequency_hz(tie, 2, N, EI)}, {4, PinnedFrequency_hz(tie, 4, N, EI)}}, N, EI, 0.0, 0.0);
  EXPECT_FALSE(upper.taut_string_force_n);
  ASSERT_TRUE(upper.pinned_beam_force_n);
  EXPECT_NEAR(*upper.pinned_beam_force_n / N, 1.0, 1e-9);
  const SimplifiedComparison one = CompareWithSimplifiedFormulas(
      tie, model::Direction::kVertical, {{1, PinnedFrequency_hz(tie, 1, N, EI)}}, N, EI, 0.0, 0.0);
  EXPECT_TRUE(one.taut_string_force_n);
  EXPECT_FALSE(one.pinned_beam_force_n);
  EXPECT_EQ(one.modes_used, 0);
}

TEST(SimplifiedFormulas, ReasonsNameTheEffectsThatMatterForThisMember) {
  // A short stocky bar at low tension: bending stiffness dominates
  // (EI = 25 133 N m^2, gamma_1 = pi^2 EI / (N L^2) = 3.9, xi = 1.6), and
  // nearly clamped ends matter.
  model::Member stocky = Tie(2.0, 0.040);
  const double EI = stocky.NominalBendingStiffness_nm2(model::Direction::kVertical);
  const SimplifiedComparison s =
      CompareWithSimplifiedFormulas(stocky, model::Direction::kVertical, {}, 16000.0, EI, 0.9, 0.9);
  ASSERT_EQ(s.reasons.size(), 2u);
  EXPECT_NE(s.reasons[0].find("bending stiffness"), std::string::npos);
  EXPECT_NE(s.reasons[1].find("end restraint"), std::string::npos);
  // A long slender tie in high tension with pinned ends: none of the effects
  // reaches 1 % (EI = 7 952 N m^2, gamma_1 = 0.0045; no sag coupling for
  // free axial ends).
  model::Member slender = Tie(12.0, 0.030);
  const SimplifiedComparison t = CompareWithSimplifiedFormulas(
      slender, model::Direction::kVertical, {}, 120000.0,
      slender.NominalBendingStiffness_nm2(model::Direction::kVertical), 0.0, 0.0);
  EXPECT_TRUE(t.reasons.empty()) << t.reasons.front();
  // The same slender tie with axially fixed ends at low tension, vibrating
  // vertically: sag is named; laterally it is not (Irvine and Caughey 1974:
  // only in-plane symmetric modes couple with the cable stretch).
  slender.axial.kind = model::AxialEnds::Kind::kFixed;
  const double n_low = 5000.0;
  ASSERT_GT(SagForceShare(IrvineLambda2(slender, n_low)), 0.01);
  const double ei = slender.NominalBendingStiffness_nm2(model::Direction::kVertical);
  const auto vertical =
      CompareWithSimplifiedFormulas(slender, model::Direction::kVertical, {}, n_low, ei, 0.0, 0.0);
  const auto lateral =
      CompareWithSimplifiedFormulas(slender, model::Direction::kLateral, {}, n_low, ei, 0.0, 0.0);
  auto names_sag = [](const SimplifiedComparison& c) {
    for (const auto& r : c.reasons)
      if (r.find("sag") != std::string::npos) return true;
    return false;
  };
  EXPECT_TRUE(names_sag(vertical));
  EXPECT_FALSE(names_sag(lateral));
}

TEST(SimplifiedFormulas, SagShareFollowsIrvineAndCaugheyForSmallLambda) {
  // First symmetric in-plane mode: w in (pi, 3 pi) solves
  // g(w) = tan(w/2) - w/2 + (4/lambda^2)(w/2)^3 = 0; the force read from it
  // by the string formula is (w/pi)^2 times the true one. The expansion must
  // match to 0.5 % of the share up to lambda^2 = 1 (the next term is
  // O(lambda^4); scipy.optimize.brentq on the same equation gives 0.13 % at
  // lambda^2 = 1, run by hand).
  for (double lambda2 : {0.01, 0.1, 0.5, 1.0}) {
    auto g = [&](double w) { return std::tan(w / 2) - w / 2 + (4.0 / lambda2) * std::pow(w / 2, 3); };
    // g < 0 just above pi (tan -> -inf), g > 0 below 3 pi where the cubic
    // dominates for these lambda^2; bisection on that bracket.
    double lo = kPi + 1e-12, hi = 1.5 * kPi;
    ASSERT_LT(g(lo), 0.0);
    ASSERT_GT(g(hi - 1e-9), 0.0) << lambda2;
    for (int i = 0; i < 200; ++i) {
      const double mid = 0.5 * (lo + hi);
      (g(mid) < 0.0 ? lo : hi) = mid;
    }
    const double exact_share = std::pow(0.5 * (lo + hi) / kPi, 2) - 1.0;
    EXPECT_NEAR(SagForceShare(lambda2) / exact_share, 1.0, 5e-3) << "lambda^2 = " << lambda2;
  }
}

}  // namespace
}  // namespace taut::estimation
