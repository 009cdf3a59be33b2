#include "model/modal.h"

#include <Spectra/SymEigsSolver.h>

#include <Eigen/Dense>
#include <Eigen/SparseCholesky>
#include <algorithm>
#include <cmath>
#include <limits>
#include <numbers>
#include <sstream>

namespace taut::model {

namespace {

// The mesh is banded in its natural DOF order (half-bandwidth 3), so no
// fill-reducing permutation is needed and the factor has no fill outside
// the band.
using BandedLdlt = Eigen::SimplicialLDLT<SparseMatrix, Eigen::Lower, Eigen::NaturalOrdering<int>>;

// y = L^T K_T^{-1} L x for K_T = K_0 + c g g^T (L the Cholesky factor of
// M), K_T^{-1} by Sherman-Morrison:
//   K_T^{-1} u = K_0^{-1} u - z (c g^T K_0^{-1} u) / (1 + c g^T z),  z = K_0^{-1} g.
// Implements the operator interface of Spectra's standard solver (rows,
// cols, perform_op).
class InverseStiffnessInMassMetric {
 public:
  using Scalar = double;
  // Not owned; must outlive this object.
  InverseStiffnessInMassMetric(const BandedLdlt* k0, const SparseMatrix* l, const Eigen::VectorXd* g,
                               double c)
      : k0_(k0), l_(l), g_(g), c_(c), u_(k0->rows()) {
    if (c_ != 0.0) {
      z_ = k0_->solve(*g_);
      denom_ = 1.0 + c_ * g_->dot(z_);
    }
  }
  Eigen::Index rows() const { return k0_->rows(); }
  Eigen::Index cols() const { return k0_->cols(); }
  void perform_op(const double* x_in, double* y_out) const {
    Eigen::Map<const Eigen::VectorXd> x(x_in, rows());
    Eigen::Map<Eigen::VectorXd> y(y_out, rows());
    u_.noalias() = *l_ * x;
    u_ = k0_->solve(u_);
    if (c_ != 0.0) u_ -= z_ * (c_ * g_->dot(u_) / denom_);
    y.noalias() = l_->transpose() * u_;
  }

 private:
  const BandedLdlt* k0_;
  const SparseMatrix* l_;
  const Eigen::VectorXd* g_;
  double c_;
  Eigen::VectorXd z_;
  double denom_ = 1.0;
  mutable Eigen::VectorXd u_;  // scratch: K_T^{-1} L x
};

// Below this many DOFs (or when the Krylov space would span most of the
// problem) a dense generalised eigen-decomposition is both simpler and
// faster than Lanczos.
constexpr int kDenseDofLimit = 24;
// Lanczos: relative residual tolerance and restart cap. 1e-11 gives
// eigenvalues to ~1e-14 relative (the error is quadratic in the residual
// for symmetric problems); the cap is never reached on beam problems.
constexpr double kLanczosTolerance = 1e-11;
constexpr int kLanczosMaxRestarts = 1000;

}  // namespace

ModalModel::ModalModel(const Member& member, Direction direction, ModalOptions options)
    : member_(member), direction_(direction), mesh_(BuildMesh(member, options.target_elements)) {
  matrices_ = AssembleBeam(member_, mesh_);
  // M is symmetric positive definite (consistent mass plus point masses)
  // and banded like K: its natural-order Cholesky factor has no fill.
  Eigen::SimplicialLLT<SparseMatrix, Eigen::Lower, Eigen::NaturalOrdering<int>> llt(matrices_.M);
  if (llt.info() == Eigen::Success) mass_factor_ = llt.matrixL();
}

Status ModalModel::CriticalCompression(const ModalParameters& params, double* n_cr) const {
  ResolvedParameters r;
  if (Status s = ResolveParameters(member_, direction_, params, &r); !s.ok()) return s;
  const SparseMatrix a = r.ei_nm2 * matrices_.K_b + r.k_left_nm_per_rad * matrices_.S_left +
                         r.k_right_nm_per_rad * matrices_.S_right;
  // G is positive definite on the free DOFs (w' = 0 with w = 0 at the ends
  // forces w = 0), so (A, G) is a definite pencil.
  Eigen::GeneralizedSelfAdjointEigenSolver<Eigen::MatrixXd> es(
      Eigen::MatrixXd(a), Eigen::MatrixXd(matrices_.G), Eigen::EigenvaluesOnly);
  if (es.info() != Eigen::Success) return Status::Numerical("buckling eigenproblem did not converge");
  *n_cr = es.eigenvalues()[0];
  return Status::Ok();
}

Status ModalModel::Solve(const ModalParameters& params, int num_modes, ModalResult* result) const {
  const int n = mesh_.FreeDofs();
  if (num_modes < 1 || num_modes > n / 2) {
    return Status::InvalidArgument("number of modes = " + std::to_string(num_modes) + ": must be in [1, " +
                                   std::to_string(n / 2) + "] for this mesh");
  }
  ResolvedParameters r;
  if (Status s = ResolveParameters(member_, direction_, params, &r); !s.ok()) return s;

  // K_0: tangent stiffness without the sag term.
  const SparseMatrix k0 = r.ei_nm2 * matrices_.K_b + params.axial_force_n * matrices_.G +
                          r.k_left_nm_per_rad * matrices_.S_left + r.k_right_nm_per_rad * matrices_.S_right;
  BandedLdlt ldlt(k0);
  const bool factor_ok = ldlt.info() == Eigen::Success;
  // Sylvester's law of inertia: K_0 is positive definite iff every pivot of
  // its LDL^T factor is positive. A pivot that is zero to round-off (relative
  // to the largest) means the member sits at its buckling load.
  const double d_max = factor_ok ? ldlt.vectorD().cwiseAbs().maxCoeff() : 0.0;
  if (!factor_ok || ldlt.vectorD().minCoeff() <= 1e-13 * d_max) {
    double n_cr = 0.0;
    std::ostringstream os;
    os << "axial force N = " << params.axial_force_n << " N is at or beyond the buckling load";
    if (CriticalCompression(params, &n_cr).ok()) os << " (critical compression " << n_cr << " N)";
    os << " for EI = " << r.ei_nm2 << " N m^2, fixities " << r.fixity_left << " / " << r.fixity_right
       << ": no real vibration frequencies";
    return Status::Buckled(os.str());
  }

  // Static sag w_s and its work-equivalent slope g = G w_s (see modal.h).
  Eigen::VectorXd g = Eigen::VectorXd::Zero(n);
  Eigen::VectorXd w_s = Eigen::VectorXd::Zero(n);
  double c = 0.0;
  if (r.k_axial_n_per_m > 0.0 && r.gravity_normal_m_s2 > 0.0) {
    w_s = ldlt.solve(matrices_.weight * r.gravity_normal_m_s2);
    g = matrices_.G * w_s;
    c = r.k_axial_n_per_m;
  }

  Eigen::VectorXd eigenvalues;
  Eigen::MatrixXd vectors;
  const int ncv = std::min(n, std::max(2 * num_modes + 1, num_modes + 8));
  if (n <= kDenseDofLimit || ncv >= n) {
    Eigen::MatrixXd kt = Eigen::MatrixXd(k0) + c * g * g.transpose();
    Eigen::GeneralizedSelfAdjointEigenSolver<Eigen::MatrixXd> es(kt, Eigen::MatrixXd(matrices_.M));
    if (es.info() != Eigen::Success) return Status::Numerical("dense eigen-decomposition did not converge");
    eigenvalues = es.eigenvalues().head(num_modes);
    vectors = es.eigenvectors().leftCols(num_modes);
  } else {
    if (mass_factor_.rows() != n) return Status::Numerical("the mass matrix is not positive definite");
    InverseStiffnessInMassMetric op(&ldlt, &mass_factor_, &g, c);
    Spectra::SymEigsSolver<InverseStiffnessInMassMetric> eigs(op, num_modes, ncv);
    eigs.init();
    eigs.compute(Spectra::SortRule::LargestAlge, kLanczosMaxRestarts, kLanczosTolerance,
                 Spectra::SortRule::LargestAlge);
    if (eigs.info() != Spectra::CompInfo::Successful) {
      return Status::Numerical("Lanczos eigen-solver did not converge for " + std::to_string(num_modes) +
                               " modes");
    }
    // mu = 1 / omega^2 in descending order = omega^2 ascending; phi = L^{-T} y.
    eigenvalues = eigs.eigenvalues().cwiseInverse();
    vectors = mass_factor_.transpose().triangularView<Eigen::Upper>().solve(eigs.eigenvectors());
  }

  ModalResult out;
  out.direction = direction_;
  out.node_x_m = mesh_.x_m;
  out.fixity_left = r.fixity_left;
  out.fixity_right = r.fixity_right;
  out.bending_stiffness_nm2 = r.ei_nm2;
  for (size_t i = 0; i < member_.sensors.size(); ++i) {
    if (member_.sensors[i].direction != direction_) continue;
    out.channels.push_back(member_.sensors[i].channel);
    out.sensor_index.push_back(static_cast<int>(i));
  }
  const int nodes = mesh_.Nodes();
  {
    int mid = 0;
    for (int i = 0; i < nodes; ++i) {
      if (std::abs(mesh_.x_m[i] - 0.5 * member_.length_m) <
          std::abs(mesh_.x_m[mid] - 0.5 * member_.length_m)) {
        mid = i;
      }
    }
    const int d = WDof(mid, nodes);
    out.sag_midspan_m = d >= 0 ? 0.0 - w_s[d] : 0.0;  // 0.0 - x: no "-0" in output
  }
  for (int k = 0; k < num_modes; ++k) {
    const double lambda = eigenvalues[k];
    if (!(lambda > 0.0)) {
      return Status::Buckled("mode " + std::to_string(k + 1) + " has omega^2 = " + std::to_string(lambda) +
                             " <= 0: the member is at its buckling load");
    }
    Eigen::VectorXd phi = vectors.col(k);
    phi /= std::sqrt(phi.dot(matrices_.M * phi));
    Mode mode;
    mode.order = k + 1;
    mode.eigenvalue = lambda;
    mode.frequency_hz = std::sqrt(lambda) / (2.0 * std::numbers::pi);
    mode.w_nodes = Eigen::VectorXd::Zero(nodes);
    for (int i = 0; i < nodes; ++i) {
      const int d = WDof(i, nodes);
      if (d >= 0) mode.w_nodes[i] = phi[d];
    }
    Eigen::Index imax = 0;
    mode.w_nodes.cwiseAbs().maxCoeff(&imax);
    if (mode.w_nodes[imax] < 0.0) mode.w_nodes = -mode.w_nodes;
    for (int si : out.sensor_index) mode.shape_at_sensors.push_back(mode.w_nodes[mesh_.sensor_node[si]]);
    out.modes.push_back(std::move(mode));
  }
  *result = std::move(out);
  return Status::Ok();
}

Status ComputeModes(const Member& member, Direction direction, const ModalParameters& params, int num_modes,
                    ModalResult* result, ModalOptions options) {
  if (Status s = ValidateMember(member); !s.ok()) return s;
  ModalModel model(member, direction, options);
  return model.Solve(params, num_modes, result);
}

}  // namespace taut::model
