#include "estimation/tolerance_budget.h"

#include <Eigen/Dense>
#include <algorithm>
#include <cmath>
#include <numbers>

#include "model/modal.h"

namespace taut::estimation {

namespace {

constexpr double kZ95 = 1.959963984540054;  // two-sided 95 % point of the normal
// Std of a uniform distribution on [0, 1] (identify.cpp: the prior of a
// fixity the data cannot determine).
constexpr double kUniformUnitStd = 0.28867513459481287;  // 1 / sqrt(12)
// Central-difference steps. Inputs: 1e-4 of the nominal (of the length for
// a sensor position); the residuals are smooth in them and the eigen-solver's
// round-off (~1e-13 relative, modal.cpp) over this step is ~1e-9, while
// the truncation error is ~1e-8 relative.
constexpr double kInputStep = 1e-4;
// Unknowns: N by 1e-4 of max(|N|, pi^2 EI / L^2), ln EI by 1e-4, a fixity
// by 1e-4 (one-sided at a bound of [0, 1]).
constexpr double kUnknownStep = 1e-4;
// Default mesh when the estimate does not say (ModalOptions' default).
constexpr int kDefaultElements = 40;

enum Group { kFrequency = 0, kShape = 1, kPrior = 2, kRange = 3, kGroups = 4 };

bool Elastic(const model::RotationEnd& e) { return e.kind == model::RotationEnd::Kind::kElastic; }

// Everything the residuals of identify.h need, taken from the estimate.
struct Setup {
  model::Direction plane = model::Direction::kVertical;
  int elements = kDefaultElements;
  int num_modes = 1;
  struct Pair {
    int order = 1;
    double frequency_hz = 0.0;
    double sigma_hz = 1.0;
    std::vector<double> shape;  // at Setup::channels
  };
  std::vector<Pair> pairs;
  std::vector<std::string> channels;  // in-plane channels of the estimate
  double shape_std = 0.05;
  double prior_sigma_ln = 0.15;
  bool free_left = false, free_right = false;    // elastic ends: unknowns
  bool range_left = false, range_right = false;  // not identifiable: range prior
  double r_left = 0.0, r_right = 0.0;            // estimate
  std::optional<double> axial_support_n_per_m;   // estimated: held
  // EA of the sag term from the fitted E, as the fit did (FitSummary::sag_ea_from_fitted_e).
  bool ea_from_fitted_e = false;
  bool UseShapes() const { return channels.size() >= 2; }
  int Unknowns() const { return 2 + free_left + free_right; }
};

// Residuals of the modal fit (identify.h) of `model`'s member at `theta` =
// (N, ln EI, free fixities...); `group` receives the group of each row.
bool Residuals(const Setup& s, const model::ModalModel& model, const Eigen::VectorXd& theta,
               Eigen::VectorXd* r, std::vector<int>* group, int* solves) {
  const model::Member& member = model.member();
  model::ModalParameters p;
  p.axial_force_n = theta(0);
  p.bending_stiffness_nm2 = std::exp(theta(1));
  int k = 2;
  if (s.free_left) p.fixity_left = std::clamp(theta(k++), 0.0, 1.0);
  if (s.free_right) p.fixity_right = std::clamp(theta(k++), 0.0, 1.0);
  p.axial_support_stiffness_n_per_m = s.axial_support_n_per_m;
  // The fit's EA rule (identify.h FitSummary::sag_ea_from_fitted_e): with EA
  // from the fitted E, EA = E_fit A = EI A / I depends on the section's A / I,
  // not on the nominal E, and a sensitivity that held the nominal EA would
  // disagree with a refit by 5-10 % on a member whose sag couples EA in.
  if (s.ea_from_fitted_e)
    p.axial_rigidity_n =
        member.AxialRigidity_n() * std::exp(theta(1)) / member.NominalBendingStiffness_nm2(s.plane);
  model::ModalResult res;
  ++*solves;
  if (!model.Solve(p, s.num_modes, &res).ok()) return false;
  std::vector<int> index;  // of each estimate channel in res.channels
  for (const auto& c : s.channels) {
    const auto it = std::find(res.channels.begin(), res.channels.end(), c);
    index.push_back(it == res.channels.end() ? -1 : static_cast<int>(it - res.channels.begin()));
  }
  std::vector<double> out;
  std::vector<int> g;
  for (const auto& pair : s.pairs) {
    const model::Mode& mode = res.modes[pair.order - 1];
    out.push_back((pair.frequency_hz - mode.frequency_hz) / pair.sigma_hz);
    g.push_back(kFrequency);
    if (!s.UseShapes()) continue;
    double pp = 0.0, pm = 0.0;
    for (size_t c = 0; c < index.size(); ++c) {
      const double psi = index[c] >= 0 ? mode.shape_at_sensors[index[c]] : 0.0;
      pp += psi * psi;
      pm += psi * pair.shape[c];
    }
    const double alpha = pp > 0.0 ? pm / pp : 0.0;
    for (size_t c = 0; c < index.size(); ++c) {
      const double psi = index[c] >= 0 ? mode.shape_at_sensors[index[c]] : 0.0;
      out.push_back((pair.shape[c] - alpha * psi) / s.shape_std);
      g.push_back(kShape);
    }
  }
  out.push_back((theta(1) - std::log(member.NominalBendingStiffness_nm2(s.plane))) / s.prior_sigma_ln);
  g.push_back(kPrior);
  k = 2;
  if (s.free_left) {
    if (s.range_left) {
      out.push_back((theta(k) - s.r_left) / kUniformUnitStd);
      g.push_back(kRange);
    }
    ++k;
  }
  if (s.free_right && s.range_right) {
    out.push_back((theta(k) - s.r_right) / kUniformUnitStd);
    g.push_back(kRange);
  }
  *r = Eigen::Map<const Eigen::VectorXd>(out.data(), static_cast<Eigen::Index>(out.size()));
  if (group) *group = g;
  return true;
}

std::string InputLabel(const model::Member& member, const model::ResolvedTolerance& t) {
  using Kind = model::ResolvedTolerance::Kind;
  switch (t.kind) {
    case Kind::kLength:
      return "member length";
    case Kind::kDiameter:
      return "section diameter";
    case Kind::kWidth:
      return "section width";
    case Kind::kDepth:
      return "section depth";
    case Kind::kArea:
      return "section area";
    case Kind::kSecondMoment:
      return "section second moment";
    case Kind::kElasticModulus:
      return "elastic modulus";
    case Kind::kDensity:
      return "density";
    case Kind::kSensorPosition:
      return "position of sensor " + member.sensors[t.sensor].channel;
  }
  return t.key;
}

// A budget source of the fit (no tolerance).
BudgetSource FitSource(const char* code, const std::string& label, double std_n) {
  BudgetSource b;
  b.source = code;
  b.label = label;
  b.std_n = std_n;
  return b;
}

std::string InputUnit(const model::ResolvedTolerance& t) {
  using Kind = model::ResolvedTolerance::Kind;
  switch (t.kind) {
    case Kind::kArea:
      return "m^2";
    case Kind::kSecondMoment:
      return "m^4";
    case Kind::kElasticModulus:
      return "Pa";
    case Kind::kDensity:
      return "kg/m3";
    default:
      return "m";
  }
}

// Widens a 95 % interval [lo, hi] around v by a one-sigma term s in
// quadrature on each side.
void Widen(EstimatedQuantity* q, double s) {
  if (q->fixed || !(s > 0.0)) return;
  const double add = kZ95 * s;
  const double lo = q->value - std::hypot(q->value - q->ci95_low, add);
  const double hi = q->value + std::hypot(q->ci95_high - q->value, add);
  q->ci95_low = std::min(q->ci95_low, lo);
  q->ci95_high = std::max(q->ci95_high, hi);
  q->std = std::hypot(q->std, s);
}

// As Widen on the log scale (EI > 0): s is the one-sigma of EI, s / EI of ln EI.
void WidenLog(EstimatedQuantity* q, double s) {
  if (q->fixed || !(s > 0.0) || !(q->value > 0.0) || !(q->ci95_low > 0.0) || !(q->ci95_high > 0.0)) {
    Widen(q, s);
    return;
  }
  const double add = kZ95 * s / q->value;
  const double lo = q->value * std::exp(-std::hypot(std::log(q->value / q->ci95_low), add));
  const double hi = q->value * std::exp(std::hypot(std::log(q->ci95_high / q->value), add));
  q->ci95_low = std::min(q->ci95_low, lo);
  q->ci95_high = std::max(q->ci95_high, hi);
  q->std = std::hypot(q->std, s);
}

std::optional<SimplifiedComparison> Simplified(const model::Member& member, const Estimate& e) {
  std::vector<std::pair<int, double>> of;
  for (const auto& m : e.modes) {
    if (!m.paired || !m.measured.order) continue;
    const int n = *m.measured.order;
    const bool seen = std::any_of(of.begin(), of.end(), [n](const auto& x) { return x.first == n; });
    if (!seen && m.measured.frequency_hz > 0.0) of.emplace_back(n, m.measured.frequency_hz);
  }
  if (of.empty()) return std::nullopt;
  return CompareWithSimplifiedFormulas(member, e.direction, of, e.axial_force_n.value,
                                       e.bending_stiffness_nm2.value, e.fixity_left.value,
                                       e.fixity_right.value);
}

}  // namespace

ToleranceTerms ComputeToleranceTerms(const model::Member& member, const IdentifyOptions& options,
                                     const Estimate& modal) {
  ToleranceTerms t;
  Setup s;
  s.plane = modal.direction;
  s.elements = modal.fit.elements > 0 ? modal.fit.elements : kDefaultElements;
  s.channels = modal.channels;
  s.shape_std = options.shape_std;
  s.prior_sigma_ln = options.ei_prior_sigma_ln;
  for (const auto& c : modal.cautions) {
    if (c.code == "stiffness-off-nominal") s.prior_sigma_ln = kRelaxedPriorSigmaLn;  // as identify.cpp
  }
  s.free_left = Elastic(member.left) && !modal.fixity_left.fixed;
  s.free_right = Elastic(member.right) && !modal.fixity_right.fixed;
  s.range_left = s.free_left && !modal.fixity_left.identifiable;
  s.range_right = s.free_right && !modal.fixity_right.identifiable;
  s.r_left = modal.fixity_left.value;
  s.r_right = modal.fixity_right.value;
  if (!modal.axial_support_ratio.fixed) s.axial_support_n_per_m = modal.axial_support_stiffness_n_per_m;
  s.ea_from_fitted_e = modal.fit.sag_ea_from_fitted_e;
  for (const auto& m : modal.modes) {
    if (!m.paired || !m.measured.order || *m.measured.order < 1) continue;
    Setup::Pair p;
    p.order = *m.measured.order;
    p.frequency_hz = m.measured.frequency_hz;
    p.sigma_hz = std::max(m.measured.frequency_std_hz, kMinRelativeFrequencyStd * m.measured.frequency_hz);
    for (const auto& c : s.channels) {
      const auto it = std::find(modal.shape_channels.begin(), modal.shape_channels.end(), c);
      const size_t i = static_cast<size_t>(it - modal.shape_channels.begin());
      p.shape.push_back(it != modal.shape_channels.end() && i < m.measured.shape.size() ? m.measured.shape[i]
                                                                                        : 0.0);
    }
    s.num_modes = std::max(s.num_modes, p.order);
    s.pairs.push_back(p);
  }
  if (s.pairs.empty()) {
    t.reason = "no paired mode";
    return t;
  }
  if (!(modal.bending_stiffness_nm2.value > 0.0)) {
    t.reason = "no bending stiffness estimate";
    return t;
  }

  // The optimum and the Jacobian in the unknowns.
  const int k = s.Unknowns();
  Eigen::VectorXd theta(k);
  theta(0) = modal.axial_force_n.value;
  theta(1) = std::log(modal.bending_stiffness_nm2.value);
  {
    int j = 2;
    if (s.free_left) theta(j++) = s.r_left;
    if (s.free_right) theta(j++) = s.r_right;
  }
  Eigen::VectorXd r0;
  std::vector<int> group;
  const model::ModalModel base(member, s.plane, {s.elements});  // shared by the Jacobian's columns
  if (!Residuals(s, base, theta, &r0, &group, &t.model_solves)) {
    t.reason = "the model fails at the estimate";
    return t;
  }
  const Eigen::Index rows = r0.size();
  Eigen::MatrixXd jac(rows, k);
  const double n_scale =
      std::max(std::abs(theta(0)), std::numbers::pi * std::numbers::pi * modal.bending_stiffness_nm2.value /
                                       (member.length_m * member.length_m));
  for (int j = 0; j < k; ++j) {
    const double h = j == 0 ? kUnknownStep * n_scale : kUnknownStep;
    double up = h, down = h;
    if (j >= 2) {  // a fixity: stay inside [0, 1]
      if (theta(j) + h > 1.0) up = 0.0;
      if (theta(j) - h < 0.0) down = 0.0;
    }
    Eigen::VectorXd tp = theta, tm = theta, rp, rm;
    tp(j) += up;
    tm(j) -= down;
    if (!Residuals(s, base, tp, &rp, nullptr, &t.model_solves) ||
        !Residuals(s, base, tm, &rm, nullptr, &t.model_solves) || rp.size() != rows || rm.size() != rows) {
      t.reason = "the model fails next to the estimate";
      return t;
    }
    jac.col(j) = (rp - rm) / (up + down);
  }
  const Eigen::MatrixXd cov =
      (jac.transpose() * jac).completeOrthogonalDecomposition().pseudoInverse();  // (J^T J)^-1

  // Fit variance of N by residual group: C J_g^T J_g C.
  const double s2 = std::max(1.0, modal.fit.reduced_chi2);
  double var_group[kGroups] = {0.0, 0.0, 0.0, 0.0};
  for (Eigen::Index i = 0; i < rows; ++i) {
    const double v = cov.row(0).dot(jac.row(i));
    var_group[group[i]] += s2 * v * v;
  }
  t.var_n_frequencies = var_group[kFrequency];
  t.var_n_shapes = var_group[kShape];
  t.var_n_prior = var_group[kPrior];
  t.var_n_fixity_range = var_group[kRange];

  // Each input: dr/dp by central differences, then d theta / dp.
  for (const model::ResolvedTolerance& in : model::ResolveTolerances(member)) {
    const double h =
        kInputStep *
        (in.kind == model::ResolvedTolerance::Kind::kSensorPosition ? member.length_m : in.nominal);
    Eigen::VectorXd rp, rm;
    // Central differences; one-sided where a step would leave the model's
    // preconditions (a sensor within a step of an end), none where both would.
    const model::Member plus = model::PerturbMember(member, in, h),
                        minus = model::PerturbMember(member, in, -h);
    const bool plus_ok = model::ValidateMember(plus).ok(), minus_ok = model::ValidateMember(minus).ok();
    if (!plus_ok && !minus_ok) continue;
    const model::ModalModel up(plus_ok ? plus : member, s.plane, {s.elements});
    const model::ModalModel down(minus_ok ? minus : member, s.plane, {s.elements});
    const double step = (plus_ok ? h : 0.0) + (minus_ok ? h : 0.0);
    if (!Residuals(s, up, theta, &rp, nullptr, &t.model_solves) ||
        !Residuals(s, down, theta, &rm, nullptr, &t.model_solves) || rp.size() != rows || rm.size() != rows) {
      t.reason = "the model fails with " + in.key + " moved";
      return t;
    }
    const Eigen::VectorXd dr = (rp - rm) / step;
    const Eigen::VectorXd dtheta = -cov * (jac.transpose() * dr);
    InputSensitivity is;
    is.input = in;
    is.d_axial_force = dtheta(0);
    is.d_bending_stiffness = modal.bending_stiffness_nm2.value * dtheta(1);
    int j = 2;
    if (s.free_left) is.d_fixity_left = dtheta(j++);
    if (s.free_right) is.d_fixity_right = dtheta(j++);
    t.inputs.push_back(is);
  }
  t.ok = true;
  return t;
}

void ApplyToleranceTerms(const model::Member& member, const ToleranceTerms& terms, Estimate* e) {
  UncertaintyBudget b;
  const EstimatedQuantity& n = e->axial_force_n;
  b.fit_std_n = std::max(n.value - n.ci95_low, n.ci95_high - n.value) / kZ95;
  if (!std::isfinite(b.fit_std_n)) b.fit_std_n = n.std;
  const double var_fit = b.fit_std_n * b.fit_std_n;

  double var_n = 0.0, var_ei = 0.0, var_rl = 0.0, var_rr = 0.0;
  for (const InputSensitivity& is : terms.inputs) {
    const double sd = is.input.std;
    var_n += std::pow(is.d_axial_force * sd, 2);
    var_ei += std::pow(is.d_bending_stiffness * sd, 2);
    var_rl += std::pow(is.d_fixity_left * sd, 2);
    var_rr += std::pow(is.d_fixity_right * sd, 2);
  }
  b.tolerance_std_n = std::sqrt(var_n);
  b.axial_force_std_n = std::sqrt(var_fit + var_n);

  // The fit's variance split by the linearised groups; what the reported
  // interval holds beyond the linear one is model choice (order hypotheses,
  // the time-domain fit's modal floor) or nonlinearity (profile).
  std::vector<BudgetSource> src;
  const double var_lin =
      terms.var_n_frequencies + terms.var_n_shapes + terms.var_n_prior + terms.var_n_fixity_range;
  if (terms.ok && var_lin > 0.0) {
    const double scale = std::min(1.0, var_fit / var_lin);
    const auto add = [&](const char* code, const char* label, double v) {
      if (v > 0.0) src.push_back(FitSource(code, label, std::sqrt(scale * v)));
    };
    add(kBudgetFrequencies, "measured frequencies", terms.var_n_frequencies);
    add(kBudgetModeShapes, "measured mode shapes", terms.var_n_shapes);
    add(kBudgetStiffnessPrior, "nominal bending stiffness (prior)", terms.var_n_prior);
    add(kBudgetFixityRange, "end fixity the data leave open", terms.var_n_fixity_range);
    const double extra = var_fit - scale * var_lin;
    if (extra > 1e-6 * var_fit) {
      // The reported interval holds more than the linear split: by design
      // for two numberings, the two EA of the sag term or the time-domain
      // floor (model choice) and a
      // profile-likelihood interval (nonlinearity); for a Wald interval the
      // fit's own covariance is wider than the split (it treats a fixity
      // the data leave open its own way, identify.cpp), said as such.
      const std::string& kind = e->fit.axial_force_interval;
      if (kind == "hypotheses" || kind == "modal-floor" || kind == "sag-stiffness") {
        src.push_back(FitSource(kBudgetModelChoice, "model choice (" + kind + ")", std::sqrt(extra)));
      } else if (kind == "profile") {
        src.push_back(
            FitSource(kBudgetNonlinearity, "profile interval beyond the linear one", std::sqrt(extra)));
      } else {
        src.push_back(FitSource(kBudgetFitUnsplit, "rest of the fit's interval, not split by source",
                                std::sqrt(extra)));
      }
    }
  } else if (var_fit > 0.0) {
    src.push_back(FitSource(
        kBudgetFit,
        "the fit (not split: " + (terms.ok ? std::string("no linear variance") : terms.reason) + ")",
        b.fit_std_n));
  }
  for (const InputSensitivity& is : terms.inputs) {
    src.push_back({is.input.key, InputLabel(member, is.input), std::abs(is.d_axial_force) * is.input.std, 0.0,
                   is.input.std, is.input.is_default, InputUnit(is.input)});
  }
  const double total = var_fit + var_n;
  for (auto& x : src) x.share = total > 0.0 ? x.std_n * x.std_n / total : 0.0;
  std::stable_sort(src.begin(), src.end(), [](const auto& a, const auto& c) { return a.share > c.share; });
  b.sources = std::move(src);
  if (!terms.ok) {
    b.method = "none: " + terms.reason;
    e->cautions.push_back(
        {"tolerances-not-propagated",
         "The member's tolerances could not be propagated (" + terms.reason +
             "): the intervals hold the fit's uncertainty only, not that of the length, section, "
             "material and sensor positions."});
  }

  b.repeatable_force_std_n = e->axial_force_n.std;
  b.repeatable_bending_stiffness_std_nm2 = e->bending_stiffness_nm2.std;
  Widen(&e->axial_force_n, std::sqrt(var_n));
  WidenLog(&e->bending_stiffness_nm2, std::sqrt(var_ei));
  for (auto [q, v] : {std::pair{&e->fixity_left, var_rl}, std::pair{&e->fixity_right, var_rr}}) {
    Widen(q, std::sqrt(v));
    q->ci95_low = std::clamp(q->ci95_low, 0.0, 1.0);
    q->ci95_high = std::clamp(q->ci95_high, 0.0, 1.0);
  }
  e->uncertainty_budget = std::move(b);
  e->simplified = Simplified(member, *e);
}

double RepeatableStd(const Estimate& e, bool force) {
  if (!e.uncertainty_budget) return force ? e.axial_force_n.std : e.bending_stiffness_nm2.std;
  return force ? e.uncertainty_budget->repeatable_force_std_n
               : e.uncertainty_budget->repeatable_bending_stiffness_std_nm2;
}

}  // namespace taut::estimation
