// The uncertainty of model updating (issue 4 and 12; docs/DESIGN.md
// "Estimation" step 4): the Gauss-Newton covariance, the identifiability
// of the unknowns, and profile-likelihood intervals of any one unknown.
// Internal to estimation/ (see identify_problem.h for the unknowns).
//
// Units: everything here is in the internal unknowns x0..x4 of
// identify_problem.h (x0 = N / N_scale, x1 = ln(EI / EI_nominal) + offset,
// x2..x4 fixities / axial support ratio + offset); covariances are of those
// unknowns. Intervals are 95 %: Wald z = 1.96, profile at a rise of the
// chi-square by 3.841 (the 95 % point of chi-square with one degree of
// freedom; Pawitan, In All Likelihood, 2001, ch. 3 and 9), both scaled by
// the reduced chi-square when above 1.
#pragma once

#include <array>

#include "estimation/identify_problem.h"

namespace taut::estimation::fit {

// 95 % two-sided normal quantile and the 95 % quantile of chi-square with
// one degree of freedom (scipy.stats.norm.ppf(0.975), scipy.stats.chi2.ppf(0.95, 1)).
constexpr double kZ95 = 1.959963984540054;
constexpr double kChi2Dof1At95 = 3.841458820694124;
// Std of a uniform distribution on [0, 1]: what "unknown fixity" means.
constexpr double kUniformUnitStd = 0.28867513459481287;  // 1 / sqrt(12)

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
                  CovarianceMatrix* cov);

// Identifiability: the weighted Jacobian's columns are scaled to natural
// units (N: its own magnitude, ln EI: 1, r: the whole range 1). A direction
// of J^T J whose std 1/sqrt(lambda) exceeds kMaxIdentifiableStd natural
// units is not determined by the data; parameters with a component of at
// least kParticipation in it are named.
constexpr double kMaxIdentifiableStd = 0.5;
constexpr double kParticipation = 0.3;

// The unknowns (among `free_block`) the data cannot determine at x:
// the eigen-decomposition of J^T J (J the weighted Jacobian, columns in
// natural units: N relative to itself, ln EI, r over its range) names every
// unknown with a component >= kParticipation in a direction whose std
// (scaled by cov_scale) exceeds kMaxIdentifiableStd natural units. All false
// when the Jacobian cannot be evaluated.
Blocks UnidentifiedUnknowns(const FitContext& ctx, const Unknowns& x, const Blocks& free_block,
                            double cov_scale);

// Profile likelihood: at most this many steps outward per side, the first
// of 1.96 Wald stds (or `fallback_step`), doubling after each step that
// stays inside the interval, halving after a failed evaluation.
constexpr int kMaxProfileSteps = 10;

struct ProfileInput {
  int unknown = 0;                        // 0 (N) or 1 (ln EI)
  const CovarianceMatrix* cov = nullptr;  // Wald covariance (scaled), null when none
  double cov_scale = 1.0;                 // max(1, reduced chi-square)
  double fallback_step = 0.1;             // first step without a Wald std [internal units]
  double min_step = 1e-3;                 // smallest first step [internal units]
};
struct ProfileInterval {
  double low = 0.0, high = 0.0;  // internal units of the unknown
  bool open = false;             // a side not closed within kMaxProfileSteps
};

// The 95 % profile-likelihood interval of one unknown around the best fit:
// the unknown is held on a growing grid outward from the estimate, the
// others re-optimised (RunFit with it held, started at their conditional
// mean under the Wald approximation, x_j + cov(j, u) / cov(u, u) du, the
// regression of x_j on u); the boundary is where the chi-square rises by
// 3.841 cov_scale, interpolated linearly in sqrt(delta chi-square) (close
// to linear in the unknown near the optimum).
ProfileInterval Profile(const FitContext& ctx, const FitOutcome& best, const Blocks& free_block,
                        const ProfileInput& in, const IdentifyOptions& options);

}  // namespace taut::estimation::fit
