#include "estimation/identify_hypotheses.h"

#include <algorithm>
#include <cmath>

#include "estimation/identify_uncertainty.h"
#include "estimation/refusal.h"
#include "model/modal.h"

namespace taut::estimation::fit {

std::vector<Unknowns> GridStarts(const FitContext& ctx, const Unknowns& x_reg,
                                 const IdentifyOptions& options) {
  std::vector<Unknowns> starts;
  if (!ctx.free_left && !ctx.free_right) return starts;
  const std::vector<double> grid_l = ctx.free_left ? options.start_fixities : std::vector<double>{0.0};
  const std::vector<double> grid_r = ctx.free_right ? options.start_fixities : std::vector<double>{0.0};
  for (double rl : grid_l) {
    for (double rr : grid_r) {
      // Both ends elastic: the diagonal of the grid only (issue 12, speed):
      // N trades off against the total restraint r_left + r_right, which the
      // diagonal spans; the asymmetry r_left - r_right is fixed by the shapes.
      // With the off-diagonal starts, every start of the test and coverage
      // records reached the same minimum as without them.
      if (ctx.free_left && ctx.free_right && rl != rr) continue;
      Unknowns x = x_reg;
      if (ctx.free_left) x[kLeft] = kFixityOffset + rl;
      if (ctx.free_right) x[kRight] = kFixityOffset + rr;
      starts.push_back(x);
    }
  }
  return starts;
}

double AboveCompressionFloor(const FitContext& ctx, const Unknowns& x, double fallback_n) {
  if (x[0] >= 0.0) return x[0];
  double p_cr = 0.0;
  ++ctx.calls;
  if (!ctx.model->CriticalCompression(ctx.Params(x), &p_cr).ok() || !(p_cr > 0.0)) p_cr = fallback_n;
  return std::max(x[0], -kStartCriticalShare * p_cr / ctx.n_scale);
}

std::vector<Unknowns> CompressionStarts(const FitContext& ctx, const Unknowns& at) {
  Unknowns mid = at;
  if (ctx.free_left) mid[kLeft] = kFixityOffset + 0.5;
  if (ctx.free_right) mid[kRight] = kFixityOffset + 0.5;
  double p_cr = 0.0;
  ++ctx.calls;
  std::vector<Unknowns> out;
  if (!ctx.model->CriticalCompression(ctx.Params(mid), &p_cr).ok() || !(p_cr > 0.0)) return out;
  for (double share : kCompressionStartShares) {
    Unknowns x = mid;
    x[0] = -share * p_cr / ctx.n_scale;
    out.push_back(x);
  }
  return out;
}

namespace {

// Score of an estimate without its EI prior: the chi-square of the data
// (frequencies and shapes; twice the cost less the squared prior residual)
// plus kUnexplainedModePenalty for every strong in-plane mode left
// unpaired (unpaired modes add nothing to the chi-square, so a fit that
// explains fewer modes must not look better for it).
constexpr double kUnexplainedModePenalty = 9.0;
double DataScore(const Estimate& e, double ei_nominal, double sigma_ln) {
  const double z = std::log(e.bending_stiffness_nm2.value / ei_nominal) / sigma_ln;
  return std::max(0.0, 2.0 * e.fit.cost - z * z) +
         kUnexplainedModePenalty * CountStrongModes(e).strong_unpaired;
}

// I of the other orientation of a rectangle over I of the declared one in
// `plane` ((w/d)^2 in the vertical plane, (d/w)^2 in the lateral one); 0
// for other sections.
double OtherOrientationRatio(const model::Member& member, model::Direction plane) {
  const auto& s = member.section;
  if (s.shape != model::Section::Shape::kRectangle || !(s.width_m > 0.0 && s.depth_m > 0.0)) return 0.0;
  const double r = s.width_m / s.depth_m;
  return plane == model::Direction::kVertical ? r * r : 1.0 / (r * r);
}

// The prior sigma an estimate was made with (relaxed after a conflict).
double PriorSigmaOf(const Estimate& e, const IdentifyOptions& options) {
  for (const auto& c : e.cautions) {
    if (c.code == "stiffness-off-nominal") return kRelaxedPriorSigmaLn;
  }
  return options.ei_prior_sigma_ln;
}

// Widens the N interval of `est` to cover [lo, hi] (never the tighter of two
// candidates), records `method` in fit.axial_force_interval and adds the
// wide-interval caution when the widened interval calls for it.
void CoverBoth(double lo, double hi, const char* method, Estimate* est) {
  EstimatedQuantity& n = est->axial_force_n;
  n.ci95_low = std::min(n.ci95_low, lo);
  n.ci95_high = std::max(n.ci95_high, hi);
  n.std = std::max(n.std, (n.ci95_high - n.ci95_low) / (2.0 * kZ95));
  est->fit.axial_force_interval = method;
  const bool wide = std::any_of(est->cautions.begin(), est->cautions.end(),
                                [](const Caution& c) { return c.code == "wide-interval"; });
  if (!wide && n.ci95_high - n.ci95_low > kWideIntervalShare * std::abs(n.value)) {
    est->cautions.push_back({"wide-interval", "The 95 % interval of the axial force [" +
                                                  FormatKn(n.ci95_low) + ", " + FormatKn(n.ci95_high) +
                                                  "] is wider than " +
                                                  FormatNumber(100 * kWideIntervalShare, 2) +
                                                  " % of the estimate " + FormatKn(n.value) + "."});
  }
}

// Carries the cautions of the hypothesis search made before `from` into `to`.
void KeepSearchCautions(const Estimate& from, Estimate* to) {
  for (const auto& c : from.cautions) {
    if (c.code == "stiffness-off-nominal") to->cautions.push_back(c);
  }
}

}  // namespace

// Competing numberings (issue 12, failure class 3): when the search's rival
// (its winner shifted by +-1 or +-2 orders) scores within kRivalSearchScore
// of the winner and at least two modes are paired, the rival numbering is
// fitted too. A rival that explains
// the data better by more than the 95 % chi-square threshold (scaled by the
// reduced chi-square when above 1) replaces the estimate; one within it is
// a second candidate: the force interval is widened to cover both
// intervals (never the tighter one) and a caution names both forces.
void CompareRivalNumbering(const model::Member& member, const ModalIdentification& ident,
                           const IdentifyOptions& options, const OrderHypothesis& search, Estimate* est) {
  if (search.rival_order.empty() || !(search.rival_score - search.score < kRivalSearchScore)) return;
  // One paired mode: every numbering fits it exactly; the single-mode
  // caution and the profile over the fixities already say so.
  if (std::count_if(est->modes.begin(), est->modes.end(), [](const EstimatedMode& m) { return m.paired; }) <
      2)
    return;
  IdentifyOptions o = options;
  o.ei_prior_sigma_ln = PriorSigmaOf(*est, options);
  Estimate alt;
  if (!IdentifyWithPrior(member, ident, o, &alt, &search.rival_order).ok()) return;
  est->fit.forward_model_calls += alt.fit.forward_model_calls;
  const double ei_nominal = member.NominalBendingStiffness_nm2(est->direction);
  const double score = DataScore(*est, ei_nominal, o.ei_prior_sigma_ln);
  const double alt_score = DataScore(alt, ei_nominal, o.ei_prior_sigma_ln);
  const double threshold = kChi2Dof1At95 * std::max(1.0, est->fit.reduced_chi2);
  auto lowest = [](const Estimate& e) {
    int n = 0;
    for (const auto& m : e.modes) {
      if (m.paired && m.measured.order && (n == 0 || *m.measured.order < n)) n = *m.measured.order;
    }
    return n;
  };
  if (alt_score < score - threshold) {
    alt.fit.forward_model_calls = est->fit.forward_model_calls;
    KeepSearchCautions(*est, &alt);
    *est = std::move(alt);
    return;
  }
  if (alt_score > score + threshold) return;
  const EstimatedQuantity& n = est->axial_force_n;
  est->cautions.push_back(
      {"order-hypotheses-disagree",
       "Two numberings of the modes fit the record about equally well: lowest paired order " +
           std::to_string(lowest(*est)) + " gives " + FormatKn(n.value) + ", lowest paired order " +
           std::to_string(lowest(alt)) + " gives " + FormatKn(alt.axial_force_n.value) +
           "; the interval covers both. A record with more modes or sensors away from the nodes decides."});
  CoverBoth(alt.axial_force_n.ci95_low, alt.axial_force_n.ci95_high, "hypotheses", est);
}

SagComparison CompareSagAxialRigidity(FitContext& ctx, const IdentifyOptions& options, bool sag_possible,
                                      int dof, FitOutcome* best) {
  SagComparison out;
  if (!ctx.ea_from_fitted_e || !sag_possible || !best->usable) return out;
  // Does EA matter? EA times e^(+-prior std) at the estimate.
  model::ModalParameters p = ctx.Params(best->x);
  const double ea = ctx.EaOverL(best->x.data()) * ctx.length_m;
  model::ModalResult lo, hi;
  ctx.calls += 2;
  p.axial_rigidity_n = ea * std::exp(-options.ei_prior_sigma_ln);
  if (!ctx.model->Solve(p, ctx.num_modes, &lo).ok()) return out;
  p.axial_rigidity_n = ea * std::exp(options.ei_prior_sigma_ln);
  if (!ctx.model->Solve(p, ctx.num_modes, &hi).ok()) return out;
  bool matters = false;
  for (const PairData& pd : ctx.pairs) {
    const int k = pd.order - 1;
    matters = matters || std::abs(hi.modes[k].frequency_hz - lo.modes[k].frequency_hz) > 2.0 * pd.sigma_hz;
  }
  if (!matters) return out;
  // The other EA, polished from the estimate.
  ctx.ea_from_fitted_e = false;
  ctx.Reset();
  const FitOutcome alt = RunFit(ctx, best->x, -1, options);
  out.alternative_fitted = alt.usable;
  const double threshold = kChi2Dof1At95 * std::max(1.0, dof > 0 ? 2.0 * best->cost / dof : 1.0);
  if (alt.usable && 2.0 * alt.cost < 2.0 * best->cost - threshold) {
    *best = alt;  // the nominal E explains the sag better: keep ctx on it
    out.switched = true;
    return out;
  }
  ctx.ea_from_fitted_e = true;
  ctx.Reset();
  if (alt.usable && 2.0 * alt.cost <= 2.0 * best->cost + threshold) {
    out.comparable = true;
    out.other_force_n = ctx.N(alt.x.data());
    out.other_ea_share = ctx.ei_nominal / ctx.EI(best->x.data());  // nominal EA over fitted-E EA
  }
  return out;
}

void ResolvePriorConflict(const model::Member& member, const ModalIdentification& ident,
                          const IdentifyOptions& options, Estimate* est_out, OrderHypothesis* search) {
  Estimate& est = *est_out;
  // EI prior conflict (issue 12, failure class 2): the nominal EI can be
  // 4-12 times off (unknown E of old iron, corrosion, built-up sections, a
  // flat described on edge). When the estimate sits more than
  // kPriorConflictSigma prior stds from the nominal, or the fit is poor or
  // leaves strong modes unexplained (the prior may have forced a wrong
  // numbering of the modes), the whole
  // identification is repeated with the prior relaxed to
  // kRelaxedPriorSigmaLn; the relaxed estimate is kept when it is itself
  // off-nominal by that much and explains the data better by more than
  // kPriorConflictChi2 (a three-sigma improvement), or when the first was
  // already off-nominal.
  const double ei_nominal = member.NominalBendingStiffness_nm2(est.direction);
  const double z = std::log(est.bending_stiffness_nm2.value / ei_nominal) / options.ei_prior_sigma_ln;
  const bool off_nominal = std::abs(z) > kPriorConflictSigma;
  const bool unexplained = CountStrongModes(est).strong_unpaired >= kMinUnpairedForRefusal;
  if ((off_nominal || unexplained || est.fit.reduced_chi2 > kPoorFitReducedChi2) &&
      options.ei_prior_sigma_ln < kRelaxedPriorSigmaLn) {
    IdentifyOptions relaxed_options = options;
    relaxed_options.ei_prior_sigma_ln = kRelaxedPriorSigmaLn;
    Estimate relaxed;
    OrderHypothesis relaxed_search;
    const Status rs = IdentifyWithPrior(member, ident, relaxed_options, &relaxed, nullptr, &relaxed_search);
    if (rs.ok()) {
      const double ratio = relaxed.bending_stiffness_nm2.value / ei_nominal;
      const bool relaxed_off = std::abs(std::log(ratio)) > kPriorConflictSigma * options.ei_prior_sigma_ln;
      const bool better = DataScore(relaxed, ei_nominal, kRelaxedPriorSigmaLn) <
                          DataScore(est, ei_nominal, options.ei_prior_sigma_ln) - kPriorConflictChi2;
      if (relaxed_off && (better || off_nominal)) {
        relaxed.fit.forward_model_calls += est.fit.forward_model_calls;
        relaxed.fit.seconds += est.fit.seconds;
        std::string msg = "The modes put the bending stiffness at " + FormatNumber(ratio, 3) +
                          " times its nominal value (" + FormatNumber(relaxed.bending_stiffness_nm2.value) +
                          " against " + FormatNumber(ei_nominal) +
                          " N m^2 from E and the section), far outside the " +
                          FormatNumber(100 * options.ei_prior_sigma_ln, 2) +
                          " % expected; the fit was repeated with that prior relaxed. Check E, the section "
                          "(corrosion, built-up parts) and that the record belongs to this member.";
        if (const double other = OtherOrientationRatio(member, est.direction); other > 0.0) {
          msg += " A rectangle turned the other way (width and depth swapped) would give " +
                 FormatNumber(other, 3) + " times the nominal value.";
        }
        relaxed.cautions.erase(
            std::remove_if(relaxed.cautions.begin(), relaxed.cautions.end(),
                           [](const Caution& c) { return c.code == "stiffness-from-prior"; }),
            relaxed.cautions.end());
        relaxed.cautions.push_back({"stiffness-off-nominal", msg});
        est = std::move(relaxed);
        *search = relaxed_search;
      } else {
        est.fit.forward_model_calls += relaxed.fit.forward_model_calls;
      }
    }
  }
}

}  // namespace taut::estimation::fit
