#include "estimation/identify_problem.h"

#include <algorithm>

namespace taut::estimation::fit {

bool FitContext::EvaluateInside(const Unknowns& x, double* res) const {
  const int m = NumResiduals();
  for (size_t i = 0; i < memo_used; ++i) {
    if (memo[i].key == x && static_cast<int>(memo[i].residuals.size()) == m) {
      std::copy(memo[i].residuals.begin(), memo[i].residuals.end(), res);
      return memo[i].ok;
    }
  }
  const bool ok = EvaluateUncached(x, res);
  Memo& slot = memo[memo_next];
  memo_next = (memo_next + 1) % kMemoSize;
  memo_used = std::min(memo_used + 1, kMemoSize);
  slot.key = x;
  slot.ok = ok;
  slot.residuals.assign(res, res + m);
  return ok;
}

bool FitContext::EvaluateUncached(const Unknowns& x, double* res) const {
  model::ModalResult r;
  ++calls;
  // Started from the previous evaluation's modes (a nearby point: the
  // stencil of a numeric Jacobian or the next iterate).
  const bool near_ok = last_ok && last.modes.size() >= static_cast<size_t>(num_modes);
  if (!model->Solve(Params(x), num_modes, &r, near_ok ? &last : nullptr).ok()) return false;
  last = r;
  last_ok = true;
  const double ei = EI(x.data());
  int k = 0;
  for (const PairData& p : pairs) {
    const model::Mode& mode = r.modes[p.order - 1];
    res[k++] = (p.frequency_hz - mode.frequency_hz) / p.sigma_hz;
    if (!UseShapes()) continue;
    double pp = 0.0, pm = 0.0;
    for (size_t c = 0; c < model_index.size(); ++c) {
      const double psi = mode.shape_at_sensors[model_index[c]];
      pp += psi * psi;
      pm += psi * p.shape[c];
    }
    const double alpha = pp > 0.0 ? pm / pp : 0.0;
    for (size_t c = 0; c < model_index.size(); ++c) {
      res[k++] = (p.shape[c] - alpha * mode.shape_at_sensors[model_index[c]]) / shape_std;
    }
  }
  res[k++] = std::log(ei / ei_nominal) / ei_prior_sigma_ln;
  return true;
}

// Odd reflection at the bounds: see the declaration.
bool FitContext::Evaluate(const Unknowns& x, double* res) const {
  const int m = NumResiduals();
  for (int j = kLeft; j < kUnknowns; ++j) {
    if (!Free(j)) continue;
    const double r = x[j] - kFixityOffset;
    if (r >= 0.0 && r <= 1.0) continue;
    const double bound = r < 0.0 ? 0.0 : 1.0;
    Unknowns at = x, mirrored = x;
    at[j] = kFixityOffset + bound;
    mirrored[j] = kFixityOffset + 2.0 * bound - r;
    std::vector<double> a(m), b(m);
    if (!Evaluate(at, a.data()) || !Evaluate(mirrored, b.data())) return false;
    for (int i = 0; i < m; ++i) res[i] = 2.0 * a[i] - b[i];
    return true;
  }
  return EvaluateInside(x, res);
}

namespace {

// The Ceres functor: five one-entry parameter blocks (x0..x4 above), so
// that held unknowns are constant blocks for which Ceres asks no Jacobian
// (and numeric differentiation spends no model calls).
struct ModalCost {
  const FitContext* ctx;  // not owned; must outlive the cost function
  bool operator()(const double* x0, const double* x1, const double* x2, const double* x3, const double* x4,
                  double* residuals) const {
    return ctx->Evaluate({x0[0], x1[0], x2[0], x3[0], x4[0]}, residuals);
  }
};

// Watches a Levenberg-Marquardt run (Solver::Options::
// update_state_every_iteration, so that `x` is the current iterate):
//  - arrival: a start that has come within half the same-minimum
//    tolerances of an earlier start's minimum (cost within
//    kSameMinimumCost / 2 relative, every internal unknown within
//    kSameMinimumForce / 2; the unknowns are all of order one, see the
//    parameterisation above) has found that minimum and would only repeat
//    the earlier start's last iterations: the run stops, counts as converged
//    to the best (FitSummary::starts_at_best) and never replaces the fully
//    converged reference;
//  - a fixity stuck on a bound of [0, 1] for kStuckIterations iterations:
//    Ceres projects each step onto the box, so along a bound the other
//    unknowns creep (seen in a profile fit: 20 iterations at trust-region
//    ratios 0.1-0.2 with the left fixity at 0, still not converged); the run
//    stops so that RunFit can hold that fixity on its bound (an active set,
//    Nocedal and Wright, Numerical Optimization, 2006, sec. 16.5).
constexpr int kStuckIterations = 2;
constexpr double kAtBound = 1e-9;

class FitMonitor : public ceres::IterationCallback {
 public:
  // Not owned; must outlive the solve. reference may be null.
  FitMonitor(const Unknowns* x, const FitOutcome* reference, std::array<bool, kUnknowns> watch_bounds)
      : x_(x), reference_(reference), watch_(watch_bounds) {}
  ceres::CallbackReturnType operator()(const ceres::IterationSummary& s) override {
    if (reference_ != nullptr && Arrived(s.cost)) {
      arrived_ = true;
      return ceres::SOLVER_TERMINATE_SUCCESSFULLY;
    }
    bool any = false;
    for (int j = kLeft; j < kUnknowns; ++j) {
      if (!watch_[j]) continue;
      const double r = (*x_)[j] - kFixityOffset;
      count_[j] = (r <= kAtBound || r >= 1.0 - kAtBound) ? count_[j] + 1 : 0;
      if (count_[j] >= kStuckIterations) stuck_[j] = true;
      any = any || stuck_[j];
    }
    return any ? ceres::SOLVER_TERMINATE_SUCCESSFULLY : ceres::SOLVER_CONTINUE;
  }
  bool arrived() const { return arrived_; }
  const std::array<bool, kUnknowns>& stuck() const { return stuck_; }

 private:
  bool Arrived(double cost) const {
    if (!reference_->usable) return false;
    if (cost > reference_->cost + 0.5 * kSameMinimumCost * std::max(1.0, reference_->cost)) return false;
    for (int j = 0; j < kUnknowns; ++j) {
      if (std::abs((*x_)[j] - reference_->x[j]) > 0.5 * kSameMinimumForce) return false;
    }
    return true;
  }
  const Unknowns* x_;
  const FitOutcome* reference_;
  std::array<bool, kUnknowns> watch_;
  std::array<int, kUnknowns> count_{};
  std::array<bool, kUnknowns> stuck_{};
  bool arrived_ = false;
};

// Central differences for the fits and the Jacobian of the covariance;
// forward differences (half the model calls per iteration) for the profile
// points, which need only the minimum cost, not an accurate gradient at it:
// the error of a forward difference, h |f''| / 2 ~ 1e-4 relative, slows
// the last Levenberg-Marquardt steps but does not move the minimum.
ceres::CostFunction* MakeCost(const FitContext& ctx, bool forward) {
  ceres::NumericDiffOptions nd;
  nd.relative_step_size = kRelativeStep;
  if (forward) {
    return new ceres::NumericDiffCostFunction<ModalCost, ceres::FORWARD, ceres::DYNAMIC, 1, 1, 1, 1, 1>(
        new ModalCost{&ctx}, ceres::TAKE_OWNERSHIP, ctx.NumResiduals(), nd);
  }
  return new ceres::NumericDiffCostFunction<ModalCost, ceres::CENTRAL, ceres::DYNAMIC, 1, 1, 1, 1, 1>(
      new ModalCost{&ctx}, ceres::TAKE_OWNERSHIP, ctx.NumResiduals(), nd);
}

}  // namespace

void BuildProblem(const FitContext& ctx, Unknowns& x, bool hold_force, ceres::Problem* problem,
                  bool forward) {
  problem->AddResidualBlock(MakeCost(ctx, forward), nullptr, &x[0], &x[1], &x[2], &x[3], &x[4]);
  if (hold_force) problem->SetParameterBlockConstant(&x[0]);
  for (int j = kLeft; j < kUnknowns; ++j) {
    double* p = &x[j];
    if (!ctx.Free(j)) {
      problem->SetParameterBlockConstant(p);
      continue;
    }
    problem->SetParameterLowerBound(p, 0, kFixityOffset + 0.0);
    problem->SetParameterUpperBound(p, 0, kFixityOffset + 1.0);
  }
}

// Solver tolerances. Full fits: Ceres' relative cost-change and step
// tolerances at 1e-8 leave the cost converged far beyond what the
// intervals need (a chi-square change of 1e-8 relative). Profile fits only
// need the cost to a small share of the 3.84 threshold, so they stop
// earlier.
constexpr double kFitTolerance = 1e-8;
constexpr double kProfileFitTolerance = 1e-6;
constexpr int kProfileMaxIterations = 20;

double CostAt(const FitContext& ctx, const Unknowns& x) {
  std::vector<double> r(static_cast<size_t>(ctx.NumResiduals()));
  if (!ctx.Evaluate(x, r.data())) return std::numeric_limits<double>::infinity();
  double c = 0.0;
  for (double v : r) c += v * v;
  return 0.5 * c;
}

// Step into [0, 1] that checks whether a fixity held on a bound belongs
// there: the first-order condition of the bound-constrained minimum is
// that the cost does not fall on moving inward (Nocedal and Wright 2006,
// eq. 12.34). 1e-4 is the central-difference step of the fixities.
constexpr double kBoundProbe = 1e-4;

FitOutcome RunFit(const FitContext& ctx, const Unknowns& start, int held, const IdentifyOptions& options,
                  const FitOutcome* reference) {
  const bool profile = held >= 0;
  FitOutcome out;
  out.x = start;
  std::array<bool, kUnknowns> held_at_bound{};
  int iterations = 0;
  ceres::Solver::Summary summary;
  for (int phase = 0; phase < 3; ++phase) {
    ceres::Problem problem;
    BuildProblem(ctx, out.x, held == 0, &problem, profile);
    if (held > 0 && !problem.IsParameterBlockConstant(&out.x[held]))
      problem.SetParameterBlockConstant(&out.x[held]);
    for (int j = kLeft; j < kUnknowns; ++j) {
      if (phase == 1 && held_at_bound[j]) problem.SetParameterBlockConstant(&out.x[j]);
    }
    ceres::Solver::Options so;
    so.trust_region_strategy_type = ceres::LEVENBERG_MARQUARDT;
    so.linear_solver_type = ceres::DENSE_QR;
    so.max_num_iterations =
        profile ? std::min(options.max_iterations, kProfileMaxIterations) : options.max_iterations;
    so.function_tolerance = profile ? kProfileFitTolerance : kFitTolerance;
    so.parameter_tolerance = profile ? kProfileFitTolerance : kFitTolerance;
    so.gradient_tolerance = 1e-12;
    so.logging_type = ceres::SILENT;
    so.minimizer_progress_to_stdout = false;
    so.num_threads = 1;
    std::array<bool, kUnknowns> watch{};
    for (int j = kLeft; j < kUnknowns; ++j) watch[j] = phase == 0 && ctx.Free(j) && j != held;
    FitMonitor monitor(&out.x, phase == 0 ? reference : nullptr, watch);
    so.callbacks.push_back(&monitor);
    so.update_state_every_iteration = true;
    ceres::Solve(so, &problem, &summary);
    iterations += static_cast<int>(summary.iterations.size()) - 1;
    out.arrived = monitor.arrived();
    if (!summary.IsSolutionUsable()) break;
    if (phase == 0) {
      held_at_bound = monitor.stuck();
      if (out.arrived || std::none_of(held_at_bound.begin(), held_at_bound.end(), [](bool b) { return b; }))
        break;
    } else if (phase == 1) {
      bool release = false;
      for (int j = kLeft; j < kUnknowns; ++j) {
        if (!held_at_bound[j]) continue;
        Unknowns probe = out.x;
        probe[j] += (probe[j] - kFixityOffset < 0.5 ? 1.0 : -1.0) * kBoundProbe;
        release = release || CostAt(ctx, probe) < summary.final_cost * (1.0 - kFitTolerance);
      }
      if (!release) break;
    }
  }
  out.usable = summary.IsSolutionUsable() && std::isfinite(summary.final_cost);
  out.converged = summary.termination_type == ceres::CONVERGENCE || out.arrived;
  out.cost = out.usable ? summary.final_cost : std::numeric_limits<double>::infinity();
  out.iterations = iterations;
  return out;
}

bool JacobianAt(const FitContext& ctx, Unknowns x, Eigen::MatrixXd* jac) {
  ceres::Problem problem;
  BuildProblem(ctx, x, false, &problem);
  ceres::Problem::EvaluateOptions eo;
  eo.parameter_blocks = {&x[0], &x[1], &x[2], &x[3], &x[4]};
  ceres::CRSMatrix crs;
  if (!problem.Evaluate(eo, nullptr, nullptr, nullptr, &crs)) return false;
  jac->setZero(crs.num_rows, crs.num_cols);
  for (int r = 0; r < crs.num_rows; ++r) {
    for (int k = crs.rows[r]; k < crs.rows[r + 1]; ++k) (*jac)(r, crs.cols[k]) = crs.values[k];
  }
  return true;
}

}  // namespace taut::estimation::fit
