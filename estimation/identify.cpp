#include "estimation/identify.h"

#include <ceres/ceres.h>
#include <ceres/normal_prior.h>

#include <Eigen/Dense>
#include <algorithm>
#include <array>
#include <chrono>
#include <cmath>
#include <limits>
#include <memory>
#include <numbers>
#include <set>
#include <sstream>

#include "estimation/refusal.h"
#include "model/modal.h"

namespace taut::estimation {

namespace {

// --- Internal parameterisation --------------------------------------------
//
// Ceres' numeric differentiation steps each parameter by
// max(sqrt(eps), relative_step |x|). The forward model's eigenvalues are
// accurate to about 1e-13 relative and its shapes to about 1e-11 (Lanczos
// residual 1e-11, modal.cpp), so the central-difference error
//   h^2 |f'''| / 6 + eps_model / h
// is smallest near h = (3 eps_model / |f'''|)^(1/3) ~ 1e-4 for parameters of
// order one with O(1) third derivatives (the modal quantities are smooth,
// analytic functions of N, ln EI and r away from buckling). We therefore
// keep every internal parameter of order one and away from zero:
//   x0 = N / N_scale            (N_scale = max(|N_start|, pi^2 EI_nom / L^2)),
//   x1 = ln(EI / EI_nom) + kLnEiOffset,
//   x2 = r_left + kFixityOffset, x3 = r_right + kFixityOffset,
//   x4 = rho + kFixityOffset, rho = k_ax / (EA / L) the axial support ratio
//        (0 = axially free supports, 1 = rigid; an unknown only where
//        AxialSupportMatters, else held),
// so the step is ~1e-4 N_scale in N, ~1e-3 in ln EI and 1e-4..2e-4 in r, rho.
// (x0 may pass through zero for a compressed member; there the step falls
// to sqrt(eps) N_scale ~ 1.5e-8 N_scale, whose round-off error
// 1e-13 / 1.5e-8 ~ 1e-5 relative is still far below the frequency stds.)
constexpr double kRelativeStep = 1e-4;
constexpr double kLnEiOffset = 10.0;
constexpr double kFixityOffset = 1.0;

// The internal unknowns x0..x4 and the positions of the bounded ones.
constexpr int kUnknowns = 5;
constexpr int kLeft = 2, kRight = 3, kAxial = 4;
using Unknowns = std::array<double, kUnknowns>;

// Series support stiffness k_s [N/m] of an axial support ratio
// rho = k_ax / (EA/L) in [0, 1]: 1/k_ax = L/EA + 1/k_s (parameters.h), so
// k_s = (EA/L) rho / (1 - rho); +inf at rho = 1 (rigid supports).
double SupportStiffness(double rho, double ea_over_l) {
  return rho >= 1.0 ? std::numeric_limits<double>::infinity() : ea_over_l * rho / (1.0 - rho);
}

// 95 % two-sided normal quantile and the 95 % quantile of chi-square with
// one degree of freedom (scipy.stats.norm.ppf(0.975), scipy.stats.chi2.ppf(0.95, 1)).
constexpr double kZ95 = 1.959963984540054;
constexpr double kChi2Dof1At95 = 3.841458820694124;
// Std of a uniform distribution on [0, 1]: what "unknown fixity" means.
constexpr double kUniformUnitStd = 0.28867513459481287;  // 1 / sqrt(12)

// Identifiability: the weighted Jacobian's columns are scaled to natural
// units (N: its own magnitude, ln EI: 1, r: the whole range 1). A direction
// of J^T J whose std 1/sqrt(lambda) exceeds kMaxIdentifiableStd natural
// units is not determined by the data; parameters with a component of at
// least kParticipation in it are named.
constexpr double kMaxIdentifiableStd = 0.5;
constexpr double kParticipation = 0.3;
// Posterior std of ln EI above this share of the prior std: EI comes mainly
// from the prior.
constexpr double kPriorDominatedShare = 0.8;

// Two starts reached the same minimum when their costs agree to this
// (relative, with an absolute floor of the same size in cost units) and
// their forces to kSameMinimumForce of N_scale.
constexpr double kSameMinimumCost = 1e-4;
constexpr double kSameMinimumForce = 1e-3;

// Profile likelihood: at most this many steps outward per side, the first
// of 1.96 Wald stds (or 10 % of the force scale), doubling after each step
// that stays inside the interval, halving after a failed evaluation.
constexpr int kMaxProfileSteps = 10;
// Mesh refinements allowed when the mesh error check fails.
constexpr int kMaxMeshRefinements = 3;
// Re-pairing rounds after a fit (the pairing is redone at the estimate).
constexpr int kMaxPairingRounds = 2;
// Model modes beyond the highest expected order that pairing considers.
constexpr int kPairingExtraModes = 2;
// Fixity of the first start (the middle of [0, 1]).
constexpr double kMidFixity = 0.5;

struct PairData {
  int measured = 0;  // index into the sorted measured modes
  int order = 0;     // model order, 1-based
  double frequency_hz = 0.0;
  double sigma_hz = 0.0;
  std::vector<double> shape;  // in-plane channels
};

struct FitContext {
  const model::ModalModel* model = nullptr;  // not owned
  std::vector<PairData> pairs;
  std::vector<int> model_index;  // per in-plane channel: index into shape_at_sensors
  int num_modes = 1;
  double n_scale = 1.0;
  double ei_nominal = 1.0;
  double ei_prior_sigma_ln = 0.15;
  double shape_std = 0.05;
  bool free_left = false, free_right = false;
  // The axial support ratio rho = k_ax / (EA / L) (x4) is an unknown (see
  // AxialSupportMatters); otherwise the member's declared axial ends hold.
  bool free_axial = false;
  double ea_over_l = 1.0;  // EA / L [N/m]
  mutable long calls = 0;

  bool UseShapes() const { return model_index.size() >= 2; }
  int NumResiduals() const {
    int n = 1;
    for (const auto& p : pairs) n += 1 + (UseShapes() ? static_cast<int>(p.shape.size()) : 0);
    return n;
  }
  bool Free(int j) const {
    return j < 2 || (j == kLeft && free_left) || (j == kRight && free_right) || (j == kAxial && free_axial);
  }

  double N(const double* x) const { return x[0] * n_scale; }
  double EI(const double* x) const { return ei_nominal * std::exp(x[1] - kLnEiOffset); }

  // Model parameters at x (bounded unknowns inside [0, 1]).
  model::ModalParameters Params(const Unknowns& x) const {
    model::ModalParameters p;
    p.axial_force_n = N(x.data());
    p.bending_stiffness_nm2 = EI(x.data());
    if (free_left) p.fixity_left = x[kLeft] - kFixityOffset;
    if (free_right) p.fixity_right = x[kRight] - kFixityOffset;
    if (free_axial)
      p.axial_support_stiffness_n_per_m = SupportStiffness(x[kAxial] - kFixityOffset, ea_over_l);
    return p;
  }

  // Recent evaluations, keyed by the exact unknowns: Ceres 2.1 evaluates
  // the residuals and the numeric Jacobian at an accepted point a second
  // time (seen in a trace of the model calls), and the odd reflection at a
  // bound (Evaluate) asks for the bound point itself. 24 entries hold two
  // full central-difference stencils of 9 points.
  struct Memo {
    Unknowns key{};
    std::vector<double> residuals;
    bool ok = false;
  };
  static constexpr size_t kMemoSize = 24;
  mutable std::array<Memo, kMemoSize> memo;
  mutable size_t memo_next = 0;
  mutable size_t memo_used = 0;

  // The last model solution (Lanczos start of the next solve).
  mutable model::ModalResult last;
  mutable bool last_ok = false;

  // Clears the memo and the last solution (after the model or the pairing changed).
  void Reset() const {
    memo_used = 0;
    last_ok = false;
  }

  // Residuals for bounded unknowns inside [0, 1].
  bool EvaluateInside(const Unknowns& x, double* res) const {
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

  bool EvaluateUncached(const Unknowns& x, double* res) const {
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

  // Residuals for any bounded unknown: outside [0, 1] the residual vector
  // is continued by odd reflection about the bound, R(-r) = 2 R(0) - R(r),
  // so that central differences at a bound (where Ceres' bounds allow the
  // iterate to sit) see a C1 function and give the one-sided derivative.
  bool Evaluate(const Unknowns& x, double* res) const {
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
};

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

struct FitOutcome {
  Unknowns x{};
  double cost = std::numeric_limits<double>::infinity();
  bool usable = false;
  bool converged = false;
  // Stopped on arriving at the reference minimum (see ArrivalCallback).
  bool arrived = false;
  int iterations = 0;
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

ceres::CostFunction* MakeCost(const FitContext& ctx) {
  ceres::NumericDiffOptions nd;
  nd.relative_step_size = kRelativeStep;
  return new ceres::NumericDiffCostFunction<ModalCost, ceres::CENTRAL, ceres::DYNAMIC, 1, 1, 1, 1, 1>(
      new ModalCost{&ctx}, ceres::TAKE_OWNERSHIP, ctx.NumResiduals(), nd);
}

// Adds the residual block on x and sets bounds and held blocks.
void BuildProblem(const FitContext& ctx, Unknowns& x, bool hold_force, ceres::Problem* problem) {
  problem->AddResidualBlock(MakeCost(ctx), nullptr, &x[0], &x[1], &x[2], &x[3], &x[4]);
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

// Cost 1/2 |r|^2 at x (infinity when the model cannot be evaluated).
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

// `reference` (optional): an earlier start's minimum; the run stops on
// arriving there (FitMonitor). A fixity stuck on a bound is held there for
// a second run; when a step inward from that result lowers the cost, a
// third run with it free again follows.
FitOutcome RunFit(const FitContext& ctx, const Unknowns& start, bool hold_force,
                  const IdentifyOptions& options, const FitOutcome* reference = nullptr) {
  FitOutcome out;
  out.x = start;
  std::array<bool, kUnknowns> held_at_bound{};
  int iterations = 0;
  ceres::Solver::Summary summary;
  for (int phase = 0; phase < 3; ++phase) {
    ceres::Problem problem;
    BuildProblem(ctx, out.x, hold_force, &problem);
    for (int j = kLeft; j < kUnknowns; ++j) {
      if (phase == 1 && held_at_bound[j]) problem.SetParameterBlockConstant(&out.x[j]);
    }
    ceres::Solver::Options so;
    so.trust_region_strategy_type = ceres::LEVENBERG_MARQUARDT;
    so.linear_solver_type = ceres::DENSE_QR;
    so.max_num_iterations =
        hold_force ? std::min(options.max_iterations, kProfileMaxIterations) : options.max_iterations;
    so.function_tolerance = hold_force ? kProfileFitTolerance : kFitTolerance;
    so.parameter_tolerance = hold_force ? kProfileFitTolerance : kFitTolerance;
    so.gradient_tolerance = 1e-12;
    so.logging_type = ceres::SILENT;
    so.minimizer_progress_to_stdout = false;
    so.num_threads = 1;
    std::array<bool, kUnknowns> watch{};
    for (int j = kLeft; j < kUnknowns; ++j) watch[j] = phase == 0 && ctx.Free(j);
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

// Dense weighted Jacobian (rows residuals, columns x0..x4, zero columns for
// held blocks) at x.
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

// Gauss-Newton covariance of the free, identifiable blocks by
// ceres::Covariance (DENSE_SVD, no null space allowed: a rank-deficient
// problem fails instead of returning a pseudo-inverse with zero variance
// along the undetermined direction). `held[j]` marks blocks held constant;
// `range_prior[j]` adds the residual (x_j - x_j,hat) / kUniformUnitStd, the
// Gaussian with the std of a uniform distribution over the fixity range
// [0, 1]: a fixity the data leave undetermined then carries "anywhere in
// its range" into the covariance of N and EI instead of being held at an
// arbitrary point of the flat valley (which would make their intervals
// conditional on it, hence too tight).
using Blocks = std::array<bool, kUnknowns>;
using CovarianceMatrix = Eigen::Matrix<double, kUnknowns, kUnknowns>;

bool CovarianceAt(const FitContext& ctx, Unknowns x, const Blocks& held, const Blocks& range_prior,
                  CovarianceMatrix* cov) {
  ceres::Problem problem;
  BuildProblem(ctx, x, held[0], &problem);
  for (int j = 1; j < kUnknowns; ++j) {
    if (held[j] && !problem.IsParameterBlockConstant(&x[j])) problem.SetParameterBlockConstant(&x[j]);
    if (range_prior[j] && !problem.IsParameterBlockConstant(&x[j])) {
      ceres::Matrix a(1, 1);
      a(0, 0) = 1.0 / kUniformUnitStd;
      ceres::Vector b(1);
      b[0] = x[j];
      problem.AddResidualBlock(new ceres::NormalPrior(a, b), nullptr, &x[j]);
    }
  }
  ceres::Covariance::Options co;
  co.algorithm_type = ceres::DENSE_SVD;
  co.null_space_rank = 0;
  co.num_threads = 1;
  ceres::Covariance covariance(co);
  std::vector<const double*> blocks;
  for (int j = 0; j < kUnknowns; ++j) {
    if (!problem.IsParameterBlockConstant(&x[j])) blocks.push_back(&x[j]);
  }
  cov->setZero();
  if (blocks.empty()) return true;
  std::vector<std::pair<const double*, const double*>> pairs;
  for (const double* a : blocks) {
    for (const double* b : blocks) pairs.emplace_back(a, b);
  }
  if (!covariance.Compute(pairs, &problem)) return false;
  for (int i = 0; i < kUnknowns; ++i) {
    for (int j = 0; j < kUnknowns; ++j) {
      if (problem.IsParameterBlockConstant(&x[i]) || problem.IsParameterBlockConstant(&x[j])) continue;
      double v = 0.0;
      if (!covariance.GetCovarianceBlock(&x[i], &x[j], &v)) return false;
      (*cov)(i, j) = v;
    }
  }
  return true;
}

}  // namespace

void AppendForceCautions(const model::Member& member, model::Direction plane, double axial_force_n,
                         double critical_compression_n, Cautions* cautions) {
  if (axial_force_n < 0.0) {
    const double share = critical_compression_n > 0.0 ? -axial_force_n / critical_compression_n : 1.0;
    if (share > kNearBucklingShare) {
      cautions->push_back({"compression-near-buckling",
                           "The member is in compression at " + FormatNumber(100 * share, 3) +
                               " % of its critical load " + FormatKn(critical_compression_n) + "."});
    } else {
      cautions->push_back({"compression", "The member is in compression (" + FormatKn(axial_force_n) + ")."});
    }
  }
  if (member.Slenderness(plane) < kStockySlenderness) {
    cautions->push_back({"stocky-member", "Slenderness L/r = " + FormatNumber(member.Slenderness(plane), 3) +
                                              " is below " + FormatNumber(kStockySlenderness, 3) +
                                              ": shear and rotary inertia, ignored by the model, matter."});
  }
  if (member.design_axial_force_n && *member.design_axial_force_n != 0.0) {
    const double d = *member.design_axial_force_n;
    if (std::abs(axial_force_n - d) > kDesignForceDeviationShare * std::abs(d)) {
      cautions->push_back(
          {"far-from-design-force", "The estimate " + FormatKn(axial_force_n) +
                                        " differs from the design force " + FormatKn(d) + " by more than " +
                                        FormatNumber(100 * kDesignForceDeviationShare, 2) + " %."});
    }
  }
}

namespace {

// One identification with the EI prior of `options` (the whole sequence of
// the file comment of identify.h); IdentifyFromModes adds the prior
// conflict check, the refusals and the verdict.
// `forced_orders` (optional): the numbering to use instead of the search's
// (one entry per measured mode in ascending frequency, 0 = left out);
// `search` (optional) receives the search's hypothesis with its rival.
Status IdentifyWithPrior(const model::Member& member, const ModalIdentification& ident,
                         const IdentifyOptions& options, Estimate* estimate,
                         const std::vector<int>* forced_orders = nullptr, OrderHypothesis* search = nullptr) {
  const auto t0 = std::chrono::steady_clock::now();
  if (Status s = model::ValidateMember(member); !s.ok()) return s;
  if (!(options.shape_std > 0.0 && options.ei_prior_sigma_ln > 0.0 && options.min_elements >= 1 &&
        options.elements_per_order >= 1 && options.max_iterations >= 1)) {
    return Status::InvalidArgument(
        "identify options: shape_std, ei_prior_sigma_ln, min_elements, elements_per_order and "
        "max_iterations must be > 0");
  }
  if (ident.channels.empty()) return Status::InvalidArgument("the identified modes name no channels");
  if (ident.modes.empty()) {
    return Status::InvalidArgument(
        "no mode was identified in the record: nothing to fit the member model to");
  }

  // --- Channels -> sensors, plane ------------------------------------------
  std::vector<int> sensor_of_channel;
  for (const std::string& c : ident.channels) {
    int found = -1;
    for (size_t s = 0; s < member.sensors.size(); ++s) {
      if (member.sensors[s].channel == c) found = static_cast<int>(s);
    }
    if (found < 0) {
      std::string names;
      for (const auto& s : member.sensors) names += (names.empty() ? "" : ", ") + s.channel;
      return Status::InvalidArgument("record channel '" + c + "' is not a sensor of member '" + member.id +
                                     "' (its sensors: " + (names.empty() ? "none" : names) + ")");
    }
    sensor_of_channel.push_back(found);
  }
  int vertical = 0, lateral = 0;
  for (int s : sensor_of_channel)
    (member.sensors[s].direction == model::Direction::kVertical ? vertical : lateral)++;
  const model::Direction plane =
      lateral > vertical ? model::Direction::kLateral : model::Direction::kVertical;

  // Modes, validated and sorted by frequency.
  std::vector<IdentifiedMode> measured = ident.modes;
  for (size_t i = 0; i < measured.size(); ++i) {
    const IdentifiedMode& m = measured[i];
    const std::string where = "mode " + std::to_string(i + 1);
    if (!(std::isfinite(m.frequency_hz) && m.frequency_hz > 0.0)) {
      return Status::InvalidArgument(where + ": frequency_hz = " + FormatNumber(m.frequency_hz) +
                                     ": must be finite and > 0");
    }
    if (!(std::isfinite(m.frequency_std_hz) && m.frequency_std_hz > 0.0)) {
      return Status::InvalidArgument(where + ": frequency_std_hz = " + FormatNumber(m.frequency_std_hz) +
                                     ": must be finite and > 0");
    }
    if (m.shape.size() != ident.channels.size()) {
      return Status::InvalidArgument(where + ": shape has " + std::to_string(m.shape.size()) +
                                     " entries for " + std::to_string(ident.channels.size()) + " channels");
    }
    for (double v : m.shape) {
      if (!std::isfinite(v)) return Status::InvalidArgument(where + ": shape entry is not finite");
    }
  }
  std::stable_sort(measured.begin(), measured.end(), [](const IdentifiedMode& a, const IdentifiedMode& b) {
    return a.frequency_hz < b.frequency_hz;
  });

  Estimate est;
  est.direction = plane;
  est.notice = StandingNotice();
  est.cautions = ident.cautions;
  // Large amplitude: the free-decay backbone of an impact record shows the
  // frequency moving with amplitude (membrane stretching hardens the member,
  // docs/DESIGN.md; Nayfeh and Mook 1979), so the linear tangent model, fitted to
  // the identified frequencies, is biased towards the larger amplitudes.
  if (ident.impact && ident.impact->backbone.size() >= 2) {
    double f_min = std::numeric_limits<double>::infinity(), f_max = 0.0;
    for (const auto& p : ident.impact->backbone) {
      f_min = std::min(f_min, p.frequency_hz);
      f_max = std::max(f_max, p.frequency_hz);
    }
    if (f_min > 0.0 && (f_max - f_min) / f_min > kLargeAmplitudeFrequencyShift) {
      est.cautions.push_back(
          {"large-amplitude",
           "The dominant frequency moves by " + FormatNumber(100.0 * (f_max - f_min) / f_min, 2) +
               " % over the free decay: the member vibrated at amplitudes where stretching "
               "stiffens it, and the linear model's force is biased high."});
    }
  }
  est.shape_channels = ident.channels;

  // In-plane channels: their record index and their index in the model's
  // shape vector (ModalResult::channels lists the plane's sensors in member order).
  std::vector<int> record_index, model_index;
  std::vector<double> sensor_x;
  {
    int k_model = 0;
    for (size_t s = 0; s < member.sensors.size(); ++s) {
      if (member.sensors[s].direction != plane) continue;
      for (size_t c = 0; c < sensor_of_channel.size(); ++c) {
        if (sensor_of_channel[c] == static_cast<int>(s)) {
          record_index.push_back(static_cast<int>(c));
          model_index.push_back(k_model);
          sensor_x.push_back(member.sensors[s].position_m);
          est.channels.push_back(ident.channels[c]);
        }
      }
      ++k_model;
    }
  }
  if (static_cast<int>(record_index.size()) < static_cast<int>(ident.channels.size())) {
    est.cautions.push_back({"other-plane-channels-ignored",
                            "The record has " + std::to_string(ident.channels.size() - record_index.size()) +
                                " channel(s) sensing the other plane; only the " + model::ToString(plane) +
                                " channels were used."});
  }
  std::vector<std::vector<double>> shapes_in_plane;
  for (const auto& m : measured) {
    std::vector<double> v;
    for (int c : record_index) v.push_back(m.shape[c]);
    shapes_in_plane.push_back(v);
  }

  const double length = member.length_m;
  double sensor_mass = 0.0;
  for (const auto& s : member.sensors) sensor_mass += s.mass_kg;
  const double ei_nominal = member.NominalBendingStiffness_nm2(plane);
  const double n_euler_pinned = std::numbers::pi * std::numbers::pi * ei_nominal / (length * length);

  // --- Order hypothesis and pinned-beam regression --------------------------
  OrderSearchInput osi;
  for (const auto& m : measured) {
    osi.frequency_hz.push_back(m.frequency_hz);
    osi.frequency_std_hz.push_back(std::max(m.frequency_std_hz, kMinRelativeFrequencyStd * m.frequency_hz));
  }
  osi.shape = shapes_in_plane;
  osi.sensor_x_m = sensor_x;
  osi.length_m = length;
  osi.mass_per_length_kg_m = member.MassPerLength_kg_m() + sensor_mass / length;
  osi.nominal_ei_nm2 = ei_nominal;
  osi.ei_prior_sigma_ln = options.ei_prior_sigma_ln;
  osi.max_order_offset = 0.25 * ((member.left.kind != model::RotationEnd::Kind::kPinned) +
                                 (member.right.kind != model::RotationEnd::Kind::kPinned));
  OrderHypothesis hyp;
  if (Status s = SearchModeOrders(osi, &hyp); !s.ok()) return s;
  if (search != nullptr) *search = hyp;
  if (forced_orders != nullptr && forced_orders->size() == measured.size()) {
    double chi2 = 0.0;
    if (Status s =
            PinnedBeamRegression(osi, *forced_orders, &hyp.axial_force_n, &hyp.bending_stiffness_nm2, &chi2);
        !s.ok()) {
      return s;
    }
    hyp.order = *forced_orders;
  }
  int highest = 1;
  for (int n : hyp.order) highest = std::max(highest, n);

  FitContext ctx;
  ctx.model_index = model_index;
  ctx.ei_nominal = ei_nominal;
  ctx.ei_prior_sigma_ln = options.ei_prior_sigma_ln;
  ctx.shape_std = options.shape_std;
  ctx.free_left = member.left.kind == model::RotationEnd::Kind::kElastic;
  ctx.free_right = member.right.kind == model::RotationEnd::Kind::kElastic;
  ctx.ea_over_l = member.AxialRigidity_n() / member.length_m;
  // Declared axial support ratio (the start of x4; see AxialSupportMatters).
  double rho_declared = 1.0;
  {
    model::ResolvedParameters rp;
    model::ModalParameters p0;
    p0.bending_stiffness_nm2 = ei_nominal;
    if (model::ResolveParameters(member, plane, p0, &rp).ok() && ctx.ea_over_l > 0.0)
      rho_declared = std::clamp(rp.k_axial_n_per_m / ctx.ea_over_l, 0.0, 1.0);
  }
  // Pairing looks at kPairingExtraModes model modes beyond the highest order
  // the measured modes may have; the fits then solve only up to the highest
  // paired order (fewer Lanczos vectors per model call).
  const int expected_highest = std::max(highest, static_cast<int>(measured.size()));
  int pairing_modes = expected_highest + kPairingExtraModes;
  ctx.n_scale = std::max(std::abs(hyp.axial_force_n), n_euler_pinned);

  int elements = std::max(options.min_elements, options.elements_per_order * expected_highest);
  auto model = std::make_unique<model::ModalModel>(member, plane, model::ModalOptions{elements});
  pairing_modes = std::min(pairing_modes, model->mesh().FreeDofs() / 2);
  ctx.num_modes = pairing_modes;
  auto set_fit_modes = [&]() {
    ctx.num_modes = 1;
    for (const PairData& p : ctx.pairs) ctx.num_modes = std::max(ctx.num_modes, p.order);
  };
  ctx.model = model.get();

  // Start 1: the regression (fixities 0, consistent with its pinned ends).
  // The regression's EI, within 0.5-2 times the nominal or two prior stds
  // (the relaxed prior of a conflict, IdentifyFromModes, opens the range).
  const double ei_spread = std::max(2.0, std::exp(2.0 * options.ei_prior_sigma_ln));
  const double ei_start =
      std::clamp(hyp.bending_stiffness_nm2, ei_nominal / ei_spread, ei_nominal * ei_spread);
  const double x1_start = std::log(ei_start / ei_nominal) + kLnEiOffset;
  Unknowns x_reg = {std::max(hyp.axial_force_n, -0.5 * n_euler_pinned) / ctx.n_scale, x1_start,
                    kFixityOffset + 0.0, kFixityOffset + 0.0, kFixityOffset + rho_declared};
  if (!ctx.free_left) x_reg[2] = kFixityOffset;  // unused for held ends
  if (!ctx.free_right) x_reg[3] = kFixityOffset;

  auto pairs_from = [&](const std::vector<ModePair>& mp) {
    std::vector<PairData> out;
    for (size_t i = 0; i < mp.size(); ++i) {
      if (!mp[i].order || *mp[i].order > pairing_modes) continue;
      PairData p;
      p.measured = static_cast<int>(i);
      p.order = *mp[i].order;
      p.frequency_hz = measured[i].frequency_hz;
      p.sigma_hz = osi.frequency_std_hz[i];
      p.shape = shapes_in_plane[i];
      out.push_back(p);
    }
    return out;
  };
  auto model_at = [&](const Unknowns& x, model::ModalResult* r, int modes) {
    ++ctx.calls;
    return ctx.model->Solve(ctx.Params(x), modes, r);
  };

  // Pairing point and first start: the regression's N and EI with mid-range
  // fixities, the force corrected by one Newton step (pinned-beam slope
  // d(f^2)/dN = n^2 / (4 m L^2), the closed form of pairing.h) so that the
  // model reproduces the lowest hypothesised mode; the regression itself
  // assumed pinned ends, which elastic ends contradict.
  const double f2_per_n = 1.0 / (4.0 * osi.mass_per_length_kg_m * length * length);
  Unknowns x_pair = x_reg;
  if (ctx.free_left) x_pair[2] = kFixityOffset + kMidFixity;
  if (ctx.free_right) x_pair[3] = kFixityOffset + kMidFixity;
  {
    int i0 = -1;
    for (size_t i = 0; i < hyp.order.size(); ++i) {
      if (hyp.order[i] > 0 && (i0 < 0 || hyp.order[i] < hyp.order[i0])) i0 = static_cast<int>(i);
    }
    model::ModalResult r;
    if (i0 >= 0 && hyp.order[i0] <= pairing_modes && model_at(x_pair, &r, pairing_modes).ok()) {
      const int n0 = hyp.order[i0];
      const double f_model = r.modes[n0 - 1].frequency_hz, f = measured[i0].frequency_hz;
      const double n_new = ctx.N(x_pair.data()) + (f * f - f_model * f_model) / (n0 * n0 * f2_per_n);
      x_pair[0] = std::max(n_new, -0.5 * n_euler_pinned) / ctx.n_scale;
    }
  }
  model::ModalResult start_modes;
  if (!model_at(x_pair, &start_modes, pairing_modes).ok()) {
    x_pair = x_reg;
    if (Status s = model_at(x_reg, &start_modes, pairing_modes); !s.ok()) {
      return Status::InvalidArgument(
          "the member model cannot be evaluated at the pinned-beam regression start (N = " +
          FormatNumber(ctx.N(x_reg.data())) + " N): " + s.message);
    }
  }
  std::vector<double> f_measured;
  for (const auto& m : measured) f_measured.push_back(m.frequency_hz);
  std::vector<ModePair> pairing =
      PairModes(f_measured, shapes_in_plane, model_index, start_modes, options.pairing);
  ctx.pairs = pairs_from(pairing);
  ctx.Reset();
  set_fit_modes();
  if (ctx.pairs.empty()) {
    return Status::InvalidArgument(
        "none of the " + std::to_string(measured.size()) +
        " identified modes pairs with a bending mode of the member model (lowest " +
        FormatNumber(measured[0].frequency_hz) + " Hz, model fundamental " +
        FormatNumber(start_modes.modes[0].frequency_hz) + " Hz at the regression start)");
  }

  // Mesh check: the frequency change of every paired mode on doubling the
  // mesh must stay below max_mesh_error_sigma of its std. Refines (doubling,
  // at most kMaxMeshRefinements times) and returns true when the mesh changed.
  bool mesh_caution = false;
  auto check_mesh = [&](const Unknowns& at) {
    bool changed = false;
    for (int refine = 0;; ++refine) {
      model::ModalModel fine(member, plane, model::ModalOptions{2 * elements});
      model::ModalResult coarse_r, fine_r;
      const auto params = ctx.Params(at);
      ctx.calls += 2;
      if (!ctx.model->Solve(params, ctx.num_modes, &coarse_r).ok() ||
          !fine.Solve(params, ctx.num_modes, &fine_r).ok()) {
        return changed;
      }
      double worst = 0.0;
      for (const PairData& p : ctx.pairs) {
        worst = std::max(worst, std::abs(coarse_r.modes[p.order - 1].frequency_hz -
                                         fine_r.modes[p.order - 1].frequency_hz) /
                                    p.sigma_hz);
      }
      if (worst <= options.max_mesh_error_sigma) return changed;
      if (refine == kMaxMeshRefinements) {
        if (!mesh_caution) {
          est.cautions.push_back({"mesh-error", "The finite-element discretisation error (" +
                                                    FormatNumber(worst, 2) +
                                                    " frequency stds) could not be brought below " +
                                                    FormatNumber(options.max_mesh_error_sigma, 2) + " std."});
        }
        mesh_caution = true;
        return changed;
      }
      elements *= 2;
      model = std::make_unique<model::ModalModel>(member, plane, model::ModalOptions{elements});
      ctx.model = model.get();
      ctx.Reset();
      pairing_modes = std::min(expected_highest + kPairingExtraModes, model->mesh().FreeDofs() / 2);
      changed = true;
    }
  };
  check_mesh(x_pair);

  // Axial support stiffness: an unknown where the member declares a support
  // spring (its stiffness is then an engineer's estimate; `fixed` declares
  // rigid supports and `free` no stretching) in the vertical plane, and
  // where the sag coupling it controls matters: switching the stretching
  // off (rho = 0) and making the supports rigid (rho = 1) moves the lowest
  // paired mode by more than its frequency std. Elsewhere the data cannot
  // tell it from N and the declared ends hold.
  if (options.estimate_axial_support && plane == model::Direction::kVertical &&
      member.axial.kind == model::AxialEnds::Kind::kSpring && !ctx.pairs.empty()) {
    const PairData* low = &ctx.pairs.front();
    for (const PairData& p : ctx.pairs) {
      if (p.order < low->order) low = &p;
    }
    ctx.free_axial = true;  // so that Params sets the ratio
    Unknowns rigid = x_pair, none = x_pair;
    rigid[kAxial] = kFixityOffset + 1.0;
    none[kAxial] = kFixityOffset + 0.0;
    model::ModalResult a, b;
    const bool ok = model_at(rigid, &a, low->order).ok() && model_at(none, &b, low->order).ok();
    est.axial_support_sag_shift_hz =
        ok ? std::abs(a.modes[low->order - 1].frequency_hz - b.modes[low->order - 1].frequency_hz) : 0.0;
    ctx.free_axial = ok && est.axial_support_sag_shift_hz > low->sigma_hz;
    ctx.Reset();
  }

  // --- Starts ----------------------------------------------------------------
  // Start 1: the pairing point (regression N and EI, mid-range fixities, N
  // corrected). A start at the regression's own pinned ends would sit on
  // the bound r = 0, where the reflected differences cost extra model calls.
  std::vector<Unknowns> starts = {x_pair};
  {
    std::vector<double> grid_l = ctx.free_left ? options.start_fixities : std::vector<double>{0.0};
    std::vector<double> grid_r = ctx.free_right ? options.start_fixities : std::vector<double>{0.0};
    if (ctx.free_left || ctx.free_right) {
      for (double rl : grid_l) {
        for (double rr : grid_r) {
          Unknowns x = x_reg;
          if (ctx.free_left) x[2] = kFixityOffset + rl;
          if (ctx.free_right) x[3] = kFixityOffset + rr;
          starts.push_back(x);
        }
      }
    }
  }

  // Each start's force is corrected by one Newton step on the lowest paired
  // mode, using the pinned-beam slope d(f^2)/dN = n^2 / (4 m L^2) (the
  // closed form of pairing.h): the grid fixities raise the frequencies the
  // regression force was fitted to, and a start near the right force saves
  // Levenberg-Marquardt iterations.
  for (Unknowns& st : starts) {
    const PairData* low = &ctx.pairs.front();
    for (const PairData& p : ctx.pairs) {
      if (p.order < low->order) low = &p;
    }
    model::ModalResult r;
    if (!model_at(st, &r, ctx.num_modes).ok()) continue;
    const double f_model = r.modes[low->order - 1].frequency_hz;
    const double slope = low->order * low->order * f2_per_n;
    const double n_new =
        ctx.N(st.data()) + (low->frequency_hz * low->frequency_hz - f_model * f_model) / slope;
    st[0] = std::max(n_new, -0.5 * n_euler_pinned) / ctx.n_scale;
  }

  std::vector<FitOutcome> outcomes;
  FitOutcome best;
  auto run_starts = [&]() {
    outcomes.clear();
    best = FitOutcome{};
    for (const Unknowns& s : starts) {
      FitOutcome o = RunFit(ctx, s, false, options, best.usable ? &best : nullptr);
      outcomes.push_back(o);
      if (o.usable && !o.arrived && o.cost < best.cost) best = o;
    }
  };
  run_starts();
  if (!best.usable) {
    return Status::Numerical("model updating failed from all " + std::to_string(starts.size()) +
                             " starts (the model could not be evaluated near them)");
  }

  FitOutcome best_start = best;  // the minimum the starts are compared with
  // Re-pair at the estimate; when the pairing changed, run all starts again
  // with the new pairing.
  for (int round = 0; round < kMaxPairingRounds; ++round) {
    model::ModalResult at_best;
    if (!model_at(best.x, &at_best, pairing_modes).ok()) break;
    std::vector<ModePair> again =
        PairModes(f_measured, shapes_in_plane, model_index, at_best, options.pairing);
    bool same = true;
    for (size_t i = 0; i < again.size(); ++i) same = same && again[i].order == pairing[i].order;
    if (same) break;
    std::vector<PairData> candidate = pairs_from(again);
    if (candidate.empty()) break;
    // Only modes added (none dropped or re-ordered): polish from the estimate;
    // the starts' verdict stands for the pairs they shared.
    bool superset = true;
    for (size_t i = 0; i < again.size(); ++i)
      superset = superset && (!pairing[i].order || again[i].order == pairing[i].order);
    if (superset) {
      pairing = again;
      ctx.pairs = candidate;
      ctx.Reset();
      set_fit_modes();
      check_mesh(best.x);
      FitOutcome o = RunFit(ctx, best.x, false, options);
      if (!o.usable) break;
      best = o;
      continue;
    }
    const FitOutcome previous = best;
    const std::vector<PairData> previous_pairs = ctx.pairs;
    pairing = again;
    ctx.pairs = candidate;
    ctx.Reset();
    set_fit_modes();
    check_mesh(best.x);
    run_starts();
    best_start = best;
    if (!best.usable) {  // keep the first pairing's result
      ctx.pairs = previous_pairs;
      ctx.Reset();
      set_fit_modes();
      best = previous;
      best_start = previous;
      break;
    }
  }

  // Mesh check at the estimate; a refined mesh is polished from the estimate.
  if (check_mesh(best.x)) {
    FitOutcome o = RunFit(ctx, best.x, false, options);
    if (o.usable) best = o;
  }

  // --- Degrees of freedom, reduced chi-square --------------------------------
  const int n_free = 2 + ctx.free_left + ctx.free_right + ctx.free_axial;
  int n_data = 1;  // prior
  for (const auto& p : ctx.pairs) n_data += 1 + (ctx.UseShapes() ? static_cast<int>(p.shape.size()) - 1 : 0);
  const int dof = n_data - n_free;
  const double chi2 = 2.0 * best.cost;
  const double reduced_chi2 = dof > 0 ? chi2 / dof : 0.0;
  const double cov_scale = std::max(1.0, reduced_chi2);

  // --- Identifiability --------------------------------------------------------
  const Unknowns& x = best.x;
  const double n_hat = ctx.N(x.data());
  Blocks free_block{}, unidentified{};
  for (int j = 0; j < kUnknowns; ++j) free_block[j] = ctx.Free(j);
  Eigen::MatrixXd jac;
  if (JacobianAt(ctx, x, &jac)) {
    // Natural units (see kMaxIdentifiableStd): x0 in units of max(|N|, 0.1 N_scale).
    Eigen::Matrix<double, kUnknowns, 1> unit = Eigen::Matrix<double, kUnknowns, 1>::Ones();
    unit[0] = std::max(std::abs(x[0]), 0.1);
    std::vector<int> cols;
    for (int j = 0; j < kUnknowns; ++j) {
      if (free_block[j]) cols.push_back(j);
    }
    Eigen::MatrixXd js(jac.rows(), cols.size());
    for (size_t k = 0; k < cols.size(); ++k) js.col(k) = jac.col(cols[k]) * unit[cols[k]];
    Eigen::SelfAdjointEigenSolver<Eigen::MatrixXd> es(js.transpose() * js);
    for (int e = 0; e < static_cast<int>(cols.size()); ++e) {
      const double lambda = es.eigenvalues()[e];
      const double std_dir =
          lambda > 0.0 ? 1.0 / std::sqrt(lambda / cov_scale) : std::numeric_limits<double>::infinity();
      if (std_dir <= kMaxIdentifiableStd) continue;
      for (size_t k = 0; k < cols.size(); ++k) {
        if (std::abs(es.eigenvectors()(k, e)) >= kParticipation) unidentified[cols[k]] = true;
      }
    }
  }
  {
    static const char* names[kUnknowns] = {"axial force", "bending stiffness", "left fixity", "right fixity",
                                           "axial support stiffness"};
    std::string list;
    for (int j = 0; j < kUnknowns; ++j) {
      if (unidentified[j]) list += (list.empty() ? "" : ", ") + std::string(names[j]);
    }
    est.identifiability =
        list.empty() ? "all unknowns separated by the data" : "the data cannot separate: " + list;
    if (!list.empty()) {
      est.cautions.push_back(
          {"not-identifiable", "The identified modes cannot separate " + list +
                                   "; the intervals of these quantities span what the data allow, not a "
                                   "precise value."});
    }
  }

  // --- Covariance (Wald) -------------------------------------------------------
  // Unidentified fixities enter the covariance with a range prior (see
  // CovarianceAt) and are reported with the whole range [0, 1]; the profile
  // likelihood of N re-optimises them within their bounds.
  Blocks held{}, range_prior{};
  for (int j = 0; j < kUnknowns; ++j) {
    held[j] = !free_block[j];
    range_prior[j] = j >= kLeft && unidentified[j];
  }
  CovarianceMatrix cov;
  const bool have_cov = CovarianceAt(ctx, x, held, range_prior, &cov);
  if (have_cov) cov *= cov_scale;
  auto std_of = [&](int j) {
    return have_cov ? std::sqrt(std::max(0.0, cov(j, j))) : std::numeric_limits<double>::infinity();
  };

  // N: Wald, then profile.
  double n_std = std_of(0) * ctx.n_scale;
  double n_lo = n_hat - kZ95 * n_std, n_hi = n_hat + kZ95 * n_std;
  std::string n_method = "wald";
  bool profile_open = false;
  // Starts that reached the best minimum: the same cost and a force that
  // differs by less than a tenth of its Wald std (a flat minimum ends at
  // slightly different forces from different starts) or kSameMinimumForce.
  int at_best = 0;
  {
    const double force_tol = std::max(kSameMinimumForce * std::max(1.0, std::abs(x[0])),
                                      std::isfinite(n_std) ? 0.1 * std_of(0) : 0.0);
    for (const auto& o : outcomes) {
      if (!o.usable) continue;
      const bool same_cost =
          std::abs(o.cost - best_start.cost) <= kSameMinimumCost * std::max(1.0, best_start.cost);
      at_best += (same_cost && std::abs(o.x[0] - best_start.x[0]) <= force_tol);
    }
  }
  const long calls_before_profile = ctx.calls;
  if (options.profile_axial_force) {
    const double target = kChi2Dof1At95 * cov_scale;  // in chi-square units
    double sides[2] = {n_lo, n_hi};
    for (int side = 0; side < 2; ++side) {
      const double sign = side == 0 ? -1.0 : 1.0;
      double step =
          std::isfinite(n_std) && n_std > 0.0 ? kZ95 * std_of(0) : 0.1 * std::max(std::abs(x[0]), 1.0);
      step = std::max(step, 1e-3 * std::max(std::abs(x[0]), 0.1));
      Unknowns xa = x;
      double da = 0.0;
      bool closed = false;
      double boundary = x[0];
      for (int it = 0; it < kMaxProfileSteps; ++it) {
        Unknowns xs = xa;
        xs[0] = xa[0] + sign * step;
        // Start the others at their conditional mean given N under the
        // Gauss-Newton (Wald) approximation, x_j + cov(j, N) / cov(N, N) dN
        // (the regression of x_j on N): near the profile's optimum, so the
        // held-N fit needs few iterations; fixities stay in their range.
        if (have_cov && cov(0, 0) > 0.0) {
          for (int j = 1; j < kUnknowns; ++j) {
            if (!free_block[j]) continue;
            xs[j] += cov(j, 0) / cov(0, 0) * (xs[0] - xa[0]);
            if (j >= kLeft) xs[j] = std::clamp(xs[j], kFixityOffset, kFixityOffset + 1.0);
          }
        }
        FitOutcome o = RunFit(ctx, xs, true, options);
        if (!o.usable) {
          step *= 0.5;
          continue;
        }
        const double db = 2.0 * (o.cost - best.cost);
        if (db >= target) {
          // sqrt(delta chi2) is close to linear in N near the optimum.
          const double sa = std::sqrt(std::max(0.0, da)), sb = std::sqrt(db), st = std::sqrt(target);
          boundary = xa[0] + (xs[0] - xa[0]) * (st - sa) / std::max(sb - sa, 1e-12);
          closed = true;
          break;
        }
        xa = o.x;
        da = std::max(0.0, db);
        boundary = xa[0];
        step *= 2.0;
      }
      if (!closed) profile_open = true;
      sides[side] = boundary * ctx.n_scale;
    }
    const double p_lo = sides[0], p_hi = sides[1];
    if (!std::isfinite(n_std) || p_hi - p_lo > n_hi - n_lo) n_method = "profile";
    if (!std::isfinite(n_std)) {
      n_lo = p_lo;
      n_hi = p_hi;
    } else {
      n_lo = std::min(n_lo, p_lo);
      n_hi = std::max(n_hi, p_hi);
    }
    n_std = std::max(std::isfinite(n_std) ? n_std : 0.0, (n_hi - n_lo) / (2.0 * kZ95));
  }
  est.fit.profile_model_calls = ctx.calls - calls_before_profile;
  est.axial_force_n = {n_hat, n_std, n_lo, n_hi, false, !unidentified[0] && !profile_open};
  if (profile_open || !std::isfinite(n_std)) {
    est.cautions.push_back({"force-interval-open",
                            "The data do not bound the axial force on at least one side within the range "
                            "searched; the interval shown is only the searched range."});
  }

  // EI: log-normal interval from the std of ln EI.
  {
    const double ei = ctx.EI(x.data());
    // Without a covariance the prior's std is an upper bound of the
    // posterior std of ln EI (data only add information to a Gaussian prior).
    const double s = have_cov ? std_of(1) : options.ei_prior_sigma_ln;
    est.bending_stiffness_nm2 = {ei,    ei * s,          ei * std::exp(-kZ95 * s), ei * std::exp(kZ95 * s),
                                 false, !unidentified[1]};
    if (s > kPriorDominatedShare * options.ei_prior_sigma_ln) {
      est.cautions.push_back(
          {"stiffness-from-prior",
           "The bending stiffness is determined mainly by its prior (nominal " + FormatNumber(ei_nominal) +
               " N m^2 +- " + FormatNumber(100 * options.ei_prior_sigma_ln, 2) + " %), not by the record."});
    }
  }

  // Fixities.
  model::ModalResult final_modes;
  const bool final_ok = model_at(x, &final_modes, ctx.num_modes).ok();
  auto fixity = [&](int j, bool free_end, double resolved) {
    EstimatedQuantity q;
    if (!free_end) {
      q.value = resolved;
      q.fixed = true;
      return q;
    }
    q.value = std::clamp(x[j] - kFixityOffset, 0.0, 1.0);
    if (unidentified[j] || !have_cov) {
      q.std = kUniformUnitStd;
      q.ci95_low = 0.0;
      q.ci95_high = 1.0;
      q.identifiable = false;
      return q;
    }
    q.std = std_of(j);
    q.ci95_low = std::clamp(q.value - kZ95 * q.std, 0.0, 1.0);
    q.ci95_high = std::clamp(q.value + kZ95 * q.std, 0.0, 1.0);
    return q;
  };
  est.fixity_left = fixity(2, ctx.free_left, final_ok ? final_modes.fixity_left : 0.0);
  est.fixity_right = fixity(3, ctx.free_right, final_ok ? final_modes.fixity_right : 0.0);
  est.axial_support_ratio = fixity(kAxial, ctx.free_axial, rho_declared);
  est.axial_support_stiffness_n_per_m = SupportStiffness(est.axial_support_ratio.value, ctx.ea_over_l);

  // Modes with pairing and model values at the estimate.
  for (size_t i = 0; i < measured.size(); ++i) {
    EstimatedMode em;
    em.measured = measured[i];
    em.measured.order.reset();
    for (const PairData& p : ctx.pairs) {
      if (p.measured != static_cast<int>(i)) continue;
      em.paired = true;
      em.measured.order = p.order;
      if (final_ok) {
        const model::Mode& mode = final_modes.modes[p.order - 1];
        em.model_frequency_hz = mode.frequency_hz;
        std::vector<double> psi;
        for (int k : model_index) psi.push_back(mode.shape_at_sensors[k]);
        em.mac = model_index.size() >= 2 ? Mac(p.shape, psi) : 1.0;
      }
    }
    est.modes.push_back(em);
  }

  {
    const model::ModalParameters p = ctx.Params(x);
    double n_cr = 0.0;
    if (ctx.model->CriticalCompression(p, &n_cr).ok()) est.critical_compression_n = n_cr;
  }

  // --- Fit summary ---------------------------------------------------------------
  est.fit.converged = best.converged;
  est.fit.cost = best.cost;
  est.fit.reduced_chi2 = reduced_chi2;
  est.fit.degrees_of_freedom = dof;
  est.fit.iterations = best.iterations;
  est.fit.starts = static_cast<int>(starts.size());
  est.fit.starts_at_best = at_best;
  est.fit.elements = elements;
  est.fit.axial_force_interval = n_method;

  // --- Cautions ---------------------------------------------------------------------
  const int paired = static_cast<int>(ctx.pairs.size());
  if (paired == 1) {
    est.cautions.push_back({"single-mode",
                            "Only one mode pairs with the member model; force, stiffness and end restraint "
                            "trade off against each other and the intervals are correspondingly wide."});
  }
  if (record_index.size() == 1) {
    est.cautions.push_back({"single-sensor", "Only one sensor in the " + std::string(model::ToString(plane)) +
                                                 " plane: mode shapes cannot confirm the mode orders."});
  }
  for (size_t i = 0; i < est.modes.size(); ++i) {
    if (est.modes[i].paired) continue;
    est.cautions.push_back({"unpaired-mode", "The mode at " +
                                                 FormatNumber(est.modes[i].measured.frequency_hz) +
                                                 " Hz pairs with no bending mode of the member model and was "
                                                 "not used."});
  }
  auto at_bound = [&](const EstimatedQuantity& q, const char* side) {
    if (q.fixed || !q.identifiable) return;
    if (q.value <= kFixityBoundDistance || q.value >= 1.0 - kFixityBoundDistance) {
      est.cautions.push_back({"fixity-at-bound", std::string("The ") + side + " end fixity sits at " +
                                                     (q.value < 0.5 ? "0 (pinned)" : "1 (clamped)") +
                                                     ", the bound of its range; its interval is one-sided."});
    }
  };
  at_bound(est.fixity_left, "left");
  at_bound(est.fixity_right, "right");
  if (ctx.free_axial && est.axial_support_ratio.identifiable) {
    const double rho = est.axial_support_ratio.value;
    if (rho <= kFixityBoundDistance || rho >= 1.0 - kFixityBoundDistance) {
      est.cautions.push_back({"axial-support-at-bound",
                              std::string("The axial support stiffness sits at ") +
                                  (rho < 0.5 ? "0 (supports free to move axially)" : "rigid supports") +
                                  ", the bound of its range; its interval is one-sided."});
    }
  }
  if (n_hi - n_lo > kWideIntervalShare * std::abs(n_hat)) {
    est.cautions.push_back({"wide-interval", "The 95 % interval of the axial force [" + FormatKn(n_lo) +
                                                 ", " + FormatKn(n_hi) + "] is wider than " +
                                                 FormatNumber(100 * kWideIntervalShare, 2) +
                                                 " % of the estimate " + FormatKn(n_hat) + "."});
  }
  if (reduced_chi2 > kPoorFitReducedChi2) {
    est.cautions.push_back({"poor-fit", "The model reproduces the modes poorly (reduced chi-square " +
                                            FormatNumber(reduced_chi2, 3) +
                                            "); the intervals were widened accordingly, "
                                            "but the beam model may not describe this member."});
  }
  if (!best.converged) {
    est.cautions.push_back(
        {"not-converged", "The best fit stopped at its iteration limit before converging."});
  }
  AppendForceCautions(member, plane, n_hat, est.critical_compression_n, &est.cautions);

  est.fit.forward_model_calls = ctx.calls;
  est.fit.seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
  *estimate = std::move(est);
  return Status::Ok();
}

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
    for (const auto& c : est->cautions) {
      if (c.code == "stiffness-off-nominal") alt.cautions.push_back(c);
    }
    *est = std::move(alt);
    return;
  }
  if (alt_score > score + threshold) return;
  EstimatedQuantity& n = est->axial_force_n;
  n.ci95_low = std::min(n.ci95_low, alt.axial_force_n.ci95_low);
  n.ci95_high = std::max(n.ci95_high, alt.axial_force_n.ci95_high);
  n.std = std::max(n.std, (n.ci95_high - n.ci95_low) / (2.0 * kZ95));
  est->fit.axial_force_interval = "hypotheses";
  est->cautions.push_back(
      {"order-hypotheses-disagree",
       "Two numberings of the modes fit the record about equally well: lowest paired order " +
           std::to_string(lowest(*est)) + " gives " + FormatKn(n.value) + ", lowest paired order " +
           std::to_string(lowest(alt)) + " gives " + FormatKn(alt.axial_force_n.value) +
           "; the interval covers both. A record with more modes or sensors away from the nodes decides."});
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

}  // namespace

Status IdentifyFromModes(const model::Member& member, const ModalIdentification& ident,
                         const IdentifyOptions& options, Estimate* estimate) {
  Estimate est;
  OrderHypothesis search;
  if (Status s = IdentifyWithPrior(member, ident, options, &est, nullptr, &search); !s.ok()) return s;
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
        search = relaxed_search;
      } else {
        est.fit.forward_model_calls += relaxed.fit.forward_model_calls;
      }
    }
  }
  CompareRivalNumbering(member, ident, options, search, &est);
  AppendRefusals(member, &est);
  est.verdict = MakeVerdict(est.cautions);
  *estimate = std::move(est);
  return Status::Ok();
}

}  // namespace taut::estimation
