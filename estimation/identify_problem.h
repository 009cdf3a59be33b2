// The fit problem of model updating (issue 4; docs/DESIGN.md "Estimation"
// step 4): the unknowns and their internal scaling, the residuals of one
// numbering of the modes (frequencies, shapes, EI prior), the bounds of the
// fixities and of the axial support ratio, and one Levenberg-Marquardt run
// from one start. Internal to estimation/ (identify.cpp and its units
// identify_hypotheses, identify_uncertainty, identify_cautions); the public
// contract is identify.h.
//
// Units: SI. N in newtons (tension > 0), EI in N m^2, fixities and the
// axial support ratio dimensionless in [0, 1], frequencies in Hz.
// Preconditions: FitContext::model is set and outlives every call; every
// PairData::order is <= num_modes; shapes have one entry per in-plane
// channel (model_index).
#pragma once

#include <ceres/ceres.h>

#include <Eigen/Dense>
#include <array>
#include <cmath>
#include <limits>
#include <vector>

#include "estimation/identify.h"
#include "model/modal.h"

namespace taut::estimation::fit {

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
inline double SupportStiffness(double rho, double ea_over_l) {
  return rho >= 1.0 ? std::numeric_limits<double>::infinity() : ea_over_l * rho / (1.0 - rho);
}

// 95 % two-sided normal quantile and the 95 % quantile of chi-square with

// Two starts reached the same minimum when their costs agree to this
// (relative, with an absolute floor of the same size in cost units) and
// their forces to kSameMinimumForce of N_scale.
constexpr double kSameMinimumCost = 1e-4;
constexpr double kSameMinimumForce = 1e-3;

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
  double ea_over_l = 1.0;  // nominal EA / L [N/m]
  double length_m = 1.0;
  // EA of the sag and stretching term from the fitted E (E = EI / I_nominal
  // of the plane, so EA = EA_nominal EI / EI_nominal; issue 12) rather than
  // from the nominal E: the sag coupling (Irvine, Cable Structures, 1981,
  // the parameter lambda^2 = (m g L / N)^2 L / (N L_e / EA)) grows with EA.
  bool ea_from_fitted_e = false;
  // EA / L at x [N/m].
  double EaOverL(const double* x) const {
    return ea_from_fitted_e ? ea_over_l * EI(x) / ei_nominal : ea_over_l;
  }
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
    if (ea_from_fitted_e) p.axial_rigidity_n = EaOverL(x.data()) * length_m;
    if (free_axial)
      p.axial_support_stiffness_n_per_m = SupportStiffness(x[kAxial] - kFixityOffset, EaOverL(x.data()));
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
  bool EvaluateInside(const Unknowns& x, double* res) const;

  bool EvaluateUncached(const Unknowns& x, double* res) const;

  // Residuals for any bounded unknown: outside [0, 1] the residual vector
  // is continued by odd reflection about the bound, R(-r) = 2 R(0) - R(r),
  // so that central differences at a bound (where Ceres' bounds allow the
  // iterate to sit) see a C1 function and give the one-sided derivative.
  bool Evaluate(const Unknowns& x, double* res) const;
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

// Adds the residual block on x and sets bounds and held blocks (x0 held
// when hold_force). Numeric derivatives by central differences, or forward
// ones when `forward` (profile points; identify_problem.cpp MakeCost).
void BuildProblem(const FitContext& ctx, Unknowns& x, bool hold_force, ceres::Problem* problem,
                  bool forward = false);

// Cost 1/2 |r|^2 at x (infinity when the model cannot be evaluated).
double CostAt(const FitContext& ctx, const Unknowns& x);

// One Levenberg-Marquardt run from `start`. `held` (-1: none) is an unknown
// held at its start value (a profile-likelihood point: looser tolerances,
// fewer iterations). `reference` (optional): an earlier start's minimum;
// the run stops on arriving there. A fixity stuck on a bound is held there
// for a second run; when a step inward from that result lowers the cost, a
// third run with it free again follows (an active set, Nocedal and Wright,
// Numerical Optimization, 2006, sec. 16.5).
FitOutcome RunFit(const FitContext& ctx, const Unknowns& start, int held, const IdentifyOptions& options,
                  const FitOutcome* reference = nullptr);

// Dense weighted Jacobian (rows residuals, columns x0..x4, zero columns for
// held blocks) at x.
bool JacobianAt(const FitContext& ctx, Unknowns x, Eigen::MatrixXd* jac);

}  // namespace taut::estimation::fit
