#include "estimation/identify_uncertainty.h"

#include <ceres/normal_prior.h>

#include <algorithm>

namespace taut::estimation::fit {

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

Blocks UnidentifiedUnknowns(const FitContext& ctx, const Unknowns& x, const Blocks& free_block,
                            double cov_scale) {
  Blocks unidentified{};
  Eigen::MatrixXd jac;
  if (!JacobianAt(ctx, x, &jac)) return unidentified;
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
  return unidentified;
}

ProfileInterval Profile(const FitContext& ctx, const FitOutcome& best, const Blocks& free_block,
                        const ProfileInput& in, const IdentifyOptions& options) {
  const int u = in.unknown;
  const Unknowns& x = best.x;
  const CovarianceMatrix* cov = in.cov;
  const double wald_std = cov != nullptr ? std::sqrt(std::max(0.0, (*cov)(u, u))) : 0.0;
  const double target = kChi2Dof1At95 * in.cov_scale;  // in chi-square units
  ProfileInterval out;
  double sides[2] = {x[u], x[u]};
  for (int side = 0; side < 2; ++side) {
    const double sign = side == 0 ? -1.0 : 1.0;
    double step = std::isfinite(wald_std) && wald_std > 0.0 ? kZ95 * wald_std : in.fallback_step;
    step = std::max(step, in.min_step);
    Unknowns xa = x;
    double da = 0.0;
    bool closed = false;
    double boundary = x[u];
    for (int it = 0; it < kMaxProfileSteps; ++it) {
      Unknowns xs = xa;
      xs[u] = xa[u] + sign * step;
      if (cov != nullptr && (*cov)(u, u) > 0.0) {
        for (int j = 0; j < kUnknowns; ++j) {
          if (j == u || !free_block[j]) continue;
          xs[j] += (*cov)(j, u) / (*cov)(u, u) * (xs[u] - xa[u]);
          if (j >= kLeft) xs[j] = std::clamp(xs[j], kFixityOffset, kFixityOffset + 1.0);
        }
      }
      FitOutcome o = RunFit(ctx, xs, u, options);
      if (!o.usable) {
        step *= 0.5;
        continue;
      }
      const double db = 2.0 * (o.cost - best.cost);
      if (db >= target) {
        const double sa = std::sqrt(std::max(0.0, da)), sb = std::sqrt(db), st = std::sqrt(target);
        boundary = xa[u] + (xs[u] - xa[u]) * (st - sa) / std::max(sb - sa, 1e-12);
        closed = true;
        break;
      }
      xa = o.x;
      da = std::max(0.0, db);
      boundary = xa[u];
      step *= 2.0;
    }
    if (!closed) out.open = true;
    sides[side] = boundary;
  }
  out.low = sides[0];
  out.high = sides[1];
  return out;
}

}  // namespace taut::estimation::fit
