// Code verification of the two nonlinear forms by the method of
// manufactured solutions (Roache, J. Fluids Eng. 124, 2002; Salari and
// Knupp, Sandia report SAND2000-1444, 2000): pick smooth w(x,t), u(x,t),
// derive the loads that make them exact, and measure the observed order of
// accuracy  p = log2(e_h / e_{h/2})  in space and in time, errors being the
// maximum over time of the L2 norm in space of w_h - w. Theory: 4 for w in
// L2 with Hermite cubics (Strang and Fix 1973, sec. 3.2), 2 in time for the
// midpoint rule. Plus the agreement of the two forms at large amplitude.
#include <gtest/gtest.h>

#include <cmath>
#include <numbers>

#include "model/transient.h"
#include "model/von_karman_full.h"
#include "tests/model/test_support.h"

namespace taut::model {
namespace {

constexpr double kPi = std::numbers::pi;

Member Bar() {
  Member m = testing::PlainBar();
  m.axial.kind = AxialEnds::Kind::kFixed;
  return m;
}

// Free-DOF Hermite interpolant of w with slope dw.
Eigen::VectorXd InterpolateFree(const Mesh& mesh, const std::function<double(double)>& w,
                                const std::function<double(double)>& dw) {
  Eigen::VectorXd q = Eigen::VectorXd::Zero(mesh.FreeDofs());
  for (int i = 0; i < mesh.Nodes(); ++i) {
    if (WDof(i, mesh.Nodes()) >= 0) q[WDof(i, mesh.Nodes())] = w(mesh.x_m[i]);
    q[ThetaDof(i, mesh.Nodes())] = dw(mesh.x_m[i]);
  }
  return q;
}

// L2 norm of InterpolateW(q) - w_exact by 5-point Gauss per element.
double ErrorL2(const Mesh& mesh, const Eigen::VectorXd& q, const std::function<double(double)>& w_exact) {
  static constexpr double kX[5] = {0.04691007703066800, 0.2307653449471585, 0.5, 0.7692346550528415,
                                   0.9530899229693320};
  static constexpr double kW[5] = {0.1184634425280945, 0.2393143352496832, 0.2844444444444444,
                                   0.2393143352496832, 0.1184634425280945};
  double sum = 0.0;
  for (int e = 0; e < mesh.Elements(); ++e) {
    const double h = mesh.x_m[e + 1] - mesh.x_m[e];
    for (int g = 0; g < 5; ++g) {
      const double x = mesh.x_m[e] + kX[g] * h;
      const double d = InterpolateW(mesh, q, x) - w_exact(x);
      sum += kW[g] * h * d * d;
    }
  }
  return std::sqrt(sum);
}

// Manufactured solution: w = a(t) sin(k x), a = A cos(Omega t), k = pi/L,
// on a pinned-pinned bar with immovable ends and preload N0. For the
// quasi-static form the uniform force is N(t) = N0 + EA a^2 k^2 / 4
// (from N = N0 + (EA/L)(1/2) int w'^2 dx), and the load that makes w exact is
//   q(x,t) = sin(kx) [m a'' + EI k^4 a + N(t) k^2 a].
struct QuasiStaticMms {
  Member m = Bar();
  double n0 = 10000.0;
  double amp = 0.0075;  // a/r = 1: the nonlinearity is active
  double omega = 2 * kPi * 4.0;
  double k = kPi / 6.0;
  double a(double t) const { return amp * std::cos(omega * t); }
  double w(double x, double t) const { return a(t) * std::sin(k * x); }
  double load(double x, double t) const {
    const double ei = m.NominalBendingStiffness_nm2(Direction::kVertical);
    const double ea = m.AxialRigidity_n();
    const double at = a(t);
    const double n = n0 + ea * at * at * k * k / 4.0;
    return std::sin(k * x) *
           (m.MassPerLength_kg_m() * (-omega * omega * at) + ei * std::pow(k, 4) * at + n * k * k * at);
  }
  // Max over samples of the relative L2 error of w.
  double Error(int elements, int steps_per_period, double periods) const {
    ModalParameters p;
    p.axial_force_n = n0;
    p.gravity_m_s2 = 0.0;
    TransientOptions o;
    o.target_elements = elements;
    o.output_rate_hz = steps_per_period * omega / (2 * kPi);
    o.duration_s = periods * 2 * kPi / omega;
    const TransientModel model(m, Direction::kVertical, p, o);
    EXPECT_TRUE(model.status().ok()) << model.status().message;
    TransientLoads loads;
    loads.initial_displacement = InterpolateFree(
        model.mesh(), [&](double x) { return w(x, 0.0); },
        [&](double x) { return a(0.0) * k * std::cos(k * x); });
    loads.distributed = [&](double x, double t) { return load(x, t); };
    double worst = 0.0;
    const double norm = amp * std::sqrt(m.length_m / 2.0);
    loads.observer = [&](double t, const Eigen::VectorXd& wq) {
      worst = std::max(worst, ErrorL2(model.mesh(), wq, [&](double x) { return w(x, t); }) / norm);
    };
    TransientResult r;
    EXPECT_TRUE(model.Run(loads, &r).ok());
    return worst;
  }
};

TEST(ManufacturedSolution, QuasiStaticFormOrdersInSpaceAndTime) {
  const QuasiStaticMms mms;
  // Space: time step small enough ((Omega h)^2/12 ~ 5e-8) not to pollute.
  std::vector<double> es;
  for (int ne : {2, 4, 8}) es.push_back(mms.Error(ne, 8000, 1.0));
  for (size_t i = 1; i < es.size(); ++i) {
    const double p = std::log2(es[i - 1] / es[i]);
    std::printf("quasi-static form, space: error %.3e -> %.3e, observed order %.2f (theory 4)\n", es[i - 1],
                es[i], p);
    EXPECT_NEAR(p, 4.0, 0.4);
  }
  // Time: a fine mesh (spatial error ~1e-8) and coarse steps.
  std::vector<double> et;
  for (int steps : {40, 80, 160}) et.push_back(mms.Error(24, steps, 1.0));
  for (size_t i = 1; i < et.size(); ++i) {
    const double p = std::log2(et[i - 1] / et[i]);
    std::printf("quasi-static form, time: error %.3e -> %.3e, observed order %.2f (theory 2)\n", et[i - 1],
                et[i], p);
    EXPECT_NEAR(p, 2.0, 0.2);
  }
}

// Full u-w form: w as above and u = b(t) sin(2 k x), b = B cos(Omega t).
// With N = N0 + EA (u' + w'^2/2):
//   q_w = m w_tt + EI w'''' - (N w')' ,  q_u = m u_tt - N',
//   N'  = EA (-4 b k^2 sin 2kx - (1/2) a^2 k^3 sin 2kx),
//   (N w')' = N' w' + N w''.
struct FullMms {
  Member m = Bar();
  double n0 = 10000.0;
  double amp = 0.0075;
  double bmp = -0.0075 * 0.0075 * (kPi / 6.0) / 8.0 * 0.7;  // near the quasi-static u, not equal
  double omega = 2 * kPi * 4.0;
  double k = kPi / 6.0;
  double a(double t) const { return amp * std::cos(omega * t); }
  double b(double t) const { return bmp * std::cos(omega * t); }
  void loads(double x, double t, double* qw, double* qu) const {
    const double ei = m.NominalBendingStiffness_nm2(Direction::kVertical);
    const double ea = m.AxialRigidity_n();
    const double mass = m.MassPerLength_kg_m();
    const double at = a(t), bt = b(t);
    const double s1 = std::sin(k * x), c1 = std::cos(k * x), s2 = std::sin(2 * k * x),
                 c2 = std::cos(2 * k * x);
    const double wx = at * k * c1, wxx = -at * k * k * s1;
    const double n = n0 + ea * (2 * bt * k * c2 + 0.5 * wx * wx);
    const double nx = ea * (-4 * bt * k * k * s2 - 0.5 * at * at * k * k * k * s2);
    *qw = mass * (-omega * omega * at) * s1 + ei * std::pow(k, 4) * at * s1 - (nx * wx + n * wxx);
    *qu = mass * (-omega * omega * bt) * s2 - nx;
  }
  double Error(int elements, int steps, double periods) const {
    ModalParameters p;
    p.axial_force_n = n0;
    p.gravity_m_s2 = 0.0;
    const FullVonKarman model(m, Direction::kVertical, p, elements);
    EXPECT_TRUE(model.status().ok());
    Eigen::VectorXd q = model.Interpolate([&](double x) { return a(0) * std::sin(k * x); },
                                          [&](double x) { return a(0) * k * std::cos(k * x); },
                                          [&](double x) { return b(0) * std::sin(2 * k * x); });
    Eigen::VectorXd v = Eigen::VectorXd::Zero(model.Dofs());
    const double h = 2 * kPi / omega / steps;
    const double norm = amp * std::sqrt(m.length_m / 2.0);
    double worst = 0.0;
    BodyForce force = [&](double x, double t, double* qw, double* qu) { loads(x, t, qw, qu); };
    const int total = static_cast<int>(std::lround(steps * periods));
    for (int i = 0; i < total; ++i) {
      const Status s = model.Step(h, i * h, force, &q, &v);
      EXPECT_TRUE(s.ok()) << s.message;
      if (!s.ok()) return 1.0;
      const double t = (i + 1) * h;
      worst = std::max(worst, model.WErrorL2(q, [&](double x) { return a(t) * std::sin(k * x); }) / norm);
    }
    return worst;
  }
};

TEST(ManufacturedSolution, FullUWFormOrdersInSpaceAndTime) {
  const FullMms mms;
  std::vector<double> es;
  for (int ne : {2, 4, 8}) es.push_back(mms.Error(ne, 4000, 1.0));
  for (size_t i = 1; i < es.size(); ++i) {
    const double p = std::log2(es[i - 1] / es[i]);
    std::printf("full u-w form, space: error %.3e -> %.3e, observed order %.2f (theory 4)\n", es[i - 1],
                es[i], p);
    EXPECT_NEAR(p, 4.0, 0.5);
  }
  std::vector<double> et;
  for (int steps : {40, 80, 160}) et.push_back(mms.Error(16, steps, 1.0));
  for (size_t i = 1; i < et.size(); ++i) {
    const double p = std::log2(et[i - 1] / et[i]);
    std::printf("full u-w form, time: error %.3e -> %.3e, observed order %.2f (theory 2)\n", et[i - 1], et[i],
                p);
    EXPECT_NEAR(p, 2.0, 0.2);
  }
}

// The full form conserves its discrete energy too (Gonzalez 1996): no load,
// large amplitude, 2,000 steps, 1e-10 relative.
TEST(FullVonKarmanForm, EnergyConserved) {
  const Member m = Bar();
  ModalParameters p;
  p.axial_force_n = 5000.0;
  const FullVonKarman model(m, Direction::kVertical, p, 12);
  const double k = kPi / m.length_m, amp = 2.0 * 0.0075;
  Eigen::VectorXd q =
      model.Interpolate([&](double x) { return amp * std::sin(k * x); },
                        [&](double x) { return amp * k * std::cos(k * x); }, [](double) { return 0.0; });
  Eigen::VectorXd v = Eigen::VectorXd::Zero(model.Dofs());
  const double e0 = model.Energy(q, v);
  const double e_rest = model.Energy(Eigen::VectorXd::Zero(model.Dofs()), v);
  double drift = 0.0;
  for (int i = 0; i < 2000; ++i) {
    ASSERT_TRUE(model.Step(1e-3, i * 1e-3, {}, &q, &v).ok());
    drift = std::max(drift, std::abs(model.Energy(q, v) - e0) / (e0 - e_rest));
  }
  std::printf("full u-w form energy drift over 2000 steps: %.2e\n", drift);
  EXPECT_LT(drift, 1e-10);
}

// The quasi-static axial assumption on a slender bar (L/r = 800): both
// forms released from w = a sin(pi x/L) at a/r = 2 (the full form with its
// quasi-static u = -(a^2 k / 8) sin 2kx) give the same period to 0.5 %
// (the tolerance). Axial modes are ~100 times faster than bending.
TEST(VonKarmanForms, AgreeOnSlenderBarAtLargeAmplitude) {
  const Member m = Bar();
  ModalParameters p;
  p.axial_force_n = 10000.0;
  p.gravity_m_s2 = 0.0;
  const double k = kPi / m.length_m, amp = 2.0 * 0.0075;
  auto w0 = [&](double x) { return amp * std::sin(k * x); };
  auto dw0 = [&](double x) { return amp * k * std::cos(k * x); };
  const int elements = 16;
  // Quasi-static form.
  TransientOptions o;
  o.target_elements = elements;
  o.output_rate_hz = 2000.0;
  o.duration_s = 0.8;  // > 3 periods
  const TransientModel qs(m, Direction::kVertical, p, o);
  TransientLoads loads;
  loads.initial_displacement = InterpolateFree(qs.mesh(), w0, dw0);
  TransientResult r;
  ASSERT_TRUE(qs.Run(loads, &r).ok());
  auto period = [](const std::vector<double>& x, double dt) {
    std::vector<double> t;
    for (size_t i = 1; i < x.size(); ++i) {
      if (x[i - 1] < 0 && x[i] >= 0) t.push_back((i - 1 + x[i - 1] / (x[i - 1] - x[i])) * dt);
    }
    return t.size() < 2 ? 0.0 : (t.back() - t.front()) / (t.size() - 1);
  };
  std::vector<double> mid_qs(r.midspan_m.data(), r.midspan_m.data() + r.midspan_m.size());
  const double t_qs = period(mid_qs, 1.0 / o.output_rate_hz);
  // Full form.
  const FullVonKarman full(m, Direction::kVertical, p, elements);
  Eigen::VectorXd q =
      full.Interpolate(w0, dw0, [&](double x) { return -amp * amp * k / 8.0 * std::sin(2 * k * x); });
  Eigen::VectorXd v = Eigen::VectorXd::Zero(full.Dofs());
  std::vector<double> mid_full = {full.W(q, 0.5 * m.length_m)};
  const double h = 1.0 / o.output_rate_hz;
  for (int i = 0; i < static_cast<int>(o.duration_s / h); ++i) {
    ASSERT_TRUE(full.Step(h, i * h, {}, &q, &v).ok());
    mid_full.push_back(full.W(q, 0.5 * m.length_m));
  }
  const double t_full = period(mid_full, h);
  ASSERT_GT(t_qs, 0.0);
  ASSERT_GT(t_full, 0.0);
  std::printf("periods at a/r = 2: quasi-static %.6f s, full u-w %.6f s, ratio - 1 = %.2e\n", t_qs, t_full,
              t_full / t_qs - 1.0);
  EXPECT_NEAR(t_full / t_qs, 1.0, 5e-3);
}

}  // namespace
}  // namespace taut::model
