// Mode pairing: MAC, the pinned-beam regression and the order search.
//
// References:
//  [A] R. J. Allemang, The modal assurance criterion - twenty years of use
//      and abuse, Sound and Vibration 37 (2003): MAC definition and its
//      scale invariance.
//  [B] Pinned-pinned beam with axial tension (docs/DESIGN.md; e.g. Blevins,
//      Formulas for Natural Frequency and Mode Shape, 1979, table 8-1 with
//      axial load): f_n = (n / 2L) sqrt(N/m) sqrt(1 + n^2 pi^2 EI / (N L^2)),
//      mode shapes sin(n pi x / L).
#include <gtest/gtest.h>

#include <cmath>
#include <numbers>

#include "estimation/pairing.h"
#include "model/modal.h"

namespace taut::estimation {
namespace {

constexpr double kPi = std::numbers::pi;

// [B]
double PinnedFrequency(int n, double N, double ei, double m, double L) {
  return n / (2.0 * L) * std::sqrt(N / m) * std::sqrt(1.0 + n * n * kPi * kPi * ei / (N * L * L));
}

std::vector<double> PinnedShape(int n, const std::vector<double>& x, double L) {
  std::vector<double> s;
  for (double xi : x) s.push_back(std::sin(n * kPi * xi / L));
  return s;
}

TEST(Mac, DefinitionScaleAndSignFree) {
  // [A]: MAC(a, c a) = 1 for any c != 0; discrete sine shapes of different
  // order on a symmetric uniform grid are orthogonal, MAC = 0.
  const std::vector<double> x = {0.5, 1.0, 1.5, 2.0, 2.5, 3.0, 3.5};
  const auto s1 = PinnedShape(1, x, 4.0), s2 = PinnedShape(2, x, 4.0);
  std::vector<double> scaled;
  for (double v : s1) scaled.push_back(-3.7 * v);
  EXPECT_NEAR(Mac(s1, scaled), 1.0, 1e-14);  // round-off only
  EXPECT_NEAR(Mac(s1, s2), 0.0, 1e-14);
  // Hand value: a = (1, 0), b = (1, 1): (1)^2 / (1 * 2) = 0.5.
  EXPECT_NEAR(Mac({1.0, 0.0}, {1.0, 1.0}), 0.5, 1e-15);
  EXPECT_EQ(Mac({1.0}, {1.0, 2.0}), 0.0);  // size mismatch is no match
}

OrderSearchInput PinnedInput(const std::vector<int>& orders, double N, double ei, double m, double L,
                             const std::vector<double>& x) {
  OrderSearchInput in;
  for (int n : orders) {
    const double f = PinnedFrequency(n, N, ei, m, L);
    in.frequency_hz.push_back(f);
    in.frequency_std_hz.push_back(1e-3 * f);
    in.shape.push_back(PinnedShape(n, x, L));
  }
  in.sensor_x_m = x;
  in.length_m = L;
  in.mass_per_length_kg_m = m;
  in.nominal_ei_nm2 = ei;
  return in;
}

TEST(PinnedBeamRegression, RecoversForceAndStiffnessOfClosedForm) {
  // Exact pinned frequencies [B] of orders 1..4 with the prior centred on
  // the true EI: the linear least squares is exact, so N and EI come back
  // to round-off (1e-9 relative allows for the squaring of f).
  const double L = 6.0, m = 5.55, ei = 7950.0, N = 30000.0;
  OrderSearchInput in = PinnedInput({1, 2, 3, 4}, N, ei, m, L, {1.5, 3.0, 4.5});
  double n_est = 0.0, ei_est = 0.0, chi2 = 0.0;
  ASSERT_TRUE(PinnedBeamRegression(in, {1, 2, 3, 4}, &n_est, &ei_est, &chi2).ok());
  EXPECT_NEAR(n_est / N, 1.0, 1e-9);
  EXPECT_NEAR(ei_est / ei, 1.0, 1e-9);
  EXPECT_NEAR(chi2, 0.0, 1e-12);
}

TEST(SearchModeOrders, SkipsOrderWithNodesAtAllSensors) {
  // Sensors at L/4, L/2, 3L/4: sin(4 pi x / L) vanishes at all three [B],
  // so order 4 cannot be seen and the measured set 1, 2, 3, 5 must be
  // recognised as such (not as 1, 2, 3, 4).
  const double L = 6.0, m = 5.55, ei = 7950.0, N = 30000.0;
  OrderSearchInput in = PinnedInput({1, 2, 3, 5}, N, ei, m, L, {1.5, 3.0, 4.5});
  OrderHypothesis h;
  ASSERT_TRUE(SearchModeOrders(in, &h).ok());
  EXPECT_EQ(h.order, (std::vector<int>{1, 2, 3, 5}));
  EXPECT_NEAR(h.axial_force_n / N, 1.0, 1e-6);
}

TEST(SearchModeOrders, VisibleMissingFundamentalAndSpuriousMode) {
  // Orders 2, 3, 4 of a bending-significant bar (the fundamental missed by
  // the identification) plus a spurious peak between orders 2 and 3 whose
  // shape is the order-1 shape: the search must keep 2, 3, 4 and leave the
  // spurious mode out (its frequency fits no order consistently).
  const double L = 3.0, m = 9.8, ei = 2.5e4, N = 20000.0;
  const std::vector<double> x = {0.6, 1.35, 2.1};
  OrderSearchInput in = PinnedInput({2, 3, 4}, N, ei, m, L, x);
  const double f_spurious = 0.5 * (in.frequency_hz[0] + in.frequency_hz[1]);
  in.frequency_hz.insert(in.frequency_hz.begin() + 1, f_spurious);
  in.frequency_std_hz.insert(in.frequency_std_hz.begin() + 1, 1e-3 * f_spurious);
  in.shape.insert(in.shape.begin() + 1, PinnedShape(1, x, L));
  OrderHypothesis h;
  ASSERT_TRUE(SearchModeOrders(in, &h).ok());
  EXPECT_EQ(h.order, (std::vector<int>{2, 0, 3, 4}));
}

TEST(PairModes, PairsModelModesAndLeavesStrangersUnpaired) {
  // The finite-element model of a pinned tie reproduces [B] closely; the
  // measured set is orders 1 and 3 (exact [B] frequencies and shapes) and
  // a mode at 1.5 f_1 that matches no model frequency within 15 %.
  model::Member member;
  member.length_m = 6.0;
  member.section.diameter_m = 0.03;
  member.elastic_modulus_pa = 2.0e11;
  member.density_kg_m3 = 7850;
  member.left.kind = member.right.kind = model::RotationEnd::Kind::kPinned;
  member.axial.kind = model::AxialEnds::Kind::kFree;
  const std::vector<double> x = {1.2, 2.7, 4.1};
  for (int i = 0; i < 3; ++i)
    member.sensors.push_back({"a" + std::to_string(i), x[i], 0.0, model::Direction::kLateral});
  const double N = 30000.0, m = member.MassPerLength_kg_m(),
               ei = member.NominalBendingStiffness_nm2(model::Direction::kLateral);
  model::ModalParameters p;
  p.axial_force_n = N;
  model::ModalResult r;
  ASSERT_TRUE(model::ComputeModes(member, model::Direction::kLateral, p, 5, &r).ok());
  const double f1 = PinnedFrequency(1, N, ei, m, 6.0), f3 = PinnedFrequency(3, N, ei, m, 6.0);
  std::vector<ModePair> pairs =
      PairModes({f1, 1.5 * f1, f3}, {PinnedShape(1, x, 6.0), PinnedShape(2, x, 6.0), PinnedShape(3, x, 6.0)},
                {0, 1, 2}, r);
  ASSERT_EQ(pairs.size(), 3u);
  ASSERT_TRUE(pairs[0].order.has_value());
  EXPECT_EQ(*pairs[0].order, 1);
  EXPECT_FALSE(pairs[1].order.has_value());
  ASSERT_TRUE(pairs[2].order.has_value());
  EXPECT_EQ(*pairs[2].order, 3);
  // The FE shapes at the sensors equal sin(n pi x/L) of [B] to discretisation
  // accuracy: MAC within 1e-6 of 1 (Hermite cubics, 40 elements).
  EXPECT_NEAR(pairs[0].mac, 1.0, 1e-6);
  EXPECT_NEAR(pairs[2].mac, 1.0, 1e-6);
}

}  // namespace
}  // namespace taut::estimation
