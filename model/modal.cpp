#include "model/modal.h"

#include <Spectra/SymEigsSolver.h>

#include <Eigen/Dense>
#include <algorithm>
#include <cmath>
#include <limits>
#include <numbers>
#include <sstream>

namespace taut::model {

namespace {

// Symmetric banded matrices in their natural DOF order (beam_fe.h: the
// Hermite DOFs of an element are consecutive, so the half-bandwidth is 3)
// and the LDL^T factorisation without pivoting (Golub and Van Loan, Matrix
// Computations, 4th ed., 2013, alg. 4.3.5 for the band version). A banded
// factor has no fill outside the band: factorisation O(n b^2), solves and
// products O(n b). Written out because the general sparse LDL^T (Eigen's
// SimplicialLDLT) spent most of a modal solve on symbolic analysis,
// permutations and temporaries at these sizes (callgrind: 14,000
// instructions per solve with n = 80, against about 1,500 here).
// Half-bandwidth of the Hermite beam matrices in their natural DOF order.
constexpr int kHermiteHalfBandwidth = 3;

struct Band {
  int n = 0;
  int b = 0;              // half-bandwidth
  std::vector<double> a;  // a[j (b + 1) + k] = A(j + k, j), k = 0..b (lower band, by column)
  double& at(int i, int j) { return a[static_cast<size_t>(j) * (b + 1) + (i - j)]; }
  double at(int i, int j) const { return a[static_cast<size_t>(j) * (b + 1) + (i - j)]; }
};

// The lower band of a symmetric sparse matrix (both triangles stored) with
// half-bandwidth b (entries outside it must be zero).
Band ToBand(const SparseMatrix& m, int b) {
  Band out;
  out.n = static_cast<int>(m.rows());
  out.b = b;
  out.a.assign(static_cast<size_t>(out.n) * (b + 1), 0.0);
  for (int j = 0; j < m.outerSize(); ++j) {
    for (SparseMatrix::InnerIterator it(m, j); it; ++it) {
      if (it.row() >= j && it.row() - j <= b) out.at(static_cast<int>(it.row()), j) = it.value();
    }
  }
  return out;
}

int HalfBandwidth(const SparseMatrix& m) {
  int b = 0;
  for (int j = 0; j < m.outerSize(); ++j) {
    for (SparseMatrix::InnerIterator it(m, j); it; ++it)
      b = std::max(b, static_cast<int>(std::abs(it.row() - j)));
  }
  return b;
}

// y = A x for the symmetric band A.
void BandProduct(const Band& m, const double* x, double* y) {
  for (int i = 0; i < m.n; ++i) y[i] = 0.0;
  for (int j = 0; j < m.n; ++j) {
    y[j] += m.at(j, j) * x[j];
    const int last = std::min(m.n - 1, j + m.b);
    for (int i = j + 1; i <= last; ++i) {
      const double v = m.at(i, j);
      y[i] += v * x[j];
      y[j] += v * x[i];
    }
  }
}

// A = L D L^T, L unit lower triangular (stored in the band, diagonal
// unused), D diagonal.
class BandLdlt {
 public:
  explicit BandLdlt(Band a) : f_(std::move(a)), d_(f_.n) {
    const int n = f_.n, b = f_.b;
    for (int j = 0; j < n; ++j) {
      // d_j = a_jj - sum_k l_jk^2 d_k;  l_ij = (a_ij - sum_k l_ik l_jk d_k) / d_j.
      double dj = f_.at(j, j);
      for (int k = std::max(0, j - b); k < j; ++k) dj -= f_.at(j, k) * f_.at(j, k) * d_[k];
      d_[j] = dj;
      const int last = std::min(n - 1, j + b);
      for (int i = j + 1; i <= last; ++i) {
        double v = f_.at(i, j);
        for (int k = std::max(0, i - b); k < j; ++k) v -= f_.at(i, k) * f_.at(j, k) * d_[k];
        f_.at(i, j) = dj != 0.0 ? v / dj : 0.0;
      }
    }
  }
  const Eigen::VectorXd& D() const { return d_; }
  const Band& L() const { return f_; }  // strictly lower part; the diagonal holds A's
  int rows() const { return f_.n; }
  // x = A^{-1} x in place (forward, diagonal, backward substitution).
  void SolveInPlace(double* x) const {
    if (f_.b == kHermiteHalfBandwidth) {
      SolveFixed<kHermiteHalfBandwidth>(x);
      return;
    }
    const int n = f_.n, b = f_.b;
    for (int i = 0; i < n; ++i) {
      for (int k = std::max(0, i - b); k < i; ++k) x[i] -= f_.at(i, k) * x[k];
    }
    for (int i = 0; i < n; ++i) x[i] /= d_[i];
    for (int i = n - 1; i >= 0; --i) {
      const int last = std::min(n - 1, i + b);
      for (int k = i + 1; k <= last; ++k) x[i] -= f_.at(k, i) * x[k];
    }
  }
  Eigen::VectorXd Solve(const Eigen::VectorXd& r) const {
    Eigen::VectorXd x = r;
    SolveInPlace(x.data());
    return x;
  }

 private:
  // The same substitutions with the half-bandwidth known at compile time
  // (unrolled inner loops; the first and last B rows keep their bounds).
  template <int B>
  void SolveFixed(double* x) const {
    const int n = f_.n;
    const double* a = f_.a.data();
    for (int i = 0; i < std::min(n, B); ++i) {
      for (int k = 0; k < i; ++k) x[i] -= a[k * (B + 1) + (i - k)] * x[k];
    }
    for (int i = B; i < n; ++i) {
      double v = x[i];
      for (int k = 1; k <= B; ++k) v -= a[(i - k) * (B + 1) + k] * x[i - k];
      x[i] = v;
    }
    for (int i = 0; i < n; ++i) x[i] /= d_[i];
    for (int i = n - 1; i >= std::max(0, n - B); --i) {
      for (int k = i + 1; k < n; ++k) x[i] -= a[i * (B + 1) + (k - i)] * x[k];
    }
    for (int i = n - B - 1; i >= 0; --i) {
      double v = x[i];
      for (int k = 1; k <= B; ++k) v -= a[i * (B + 1) + k] * x[i + k];
      x[i] = v;
    }
  }

  Band f_;
  Eigen::VectorXd d_;
};

// The Cholesky factor C = L D^{1/2} of a positive definite band (lower,
// with its diagonal), products C x, C^T x and the solve C^T x = y.
class BandCholesky {
 public:
  BandCholesky() = default;
  // ok() is false when the band is not positive definite.
  explicit BandCholesky(const BandLdlt& f) : c_(f.L()) {
    ok_ = f.D().minCoeff() > 0.0;
    if (!ok_) return;
    const int n = c_.n, b = c_.b;
    for (int j = 0; j < n; ++j) {
      const double sd = std::sqrt(f.D()[j]);
      c_.at(j, j) = sd;
      for (int i = j + 1; i <= std::min(n - 1, j + b); ++i) c_.at(i, j) *= sd;
    }
  }
  bool ok() const { return ok_; }
  void Product(const double* x, double* y) const {  // y = C x
    if (c_.b == kHermiteHalfBandwidth && c_.n > kHermiteHalfBandwidth) {
      constexpr int B = kHermiteHalfBandwidth;
      const double* a = c_.a.data();
      for (int i = 0; i < B; ++i) {
        double v = 0.0;
        for (int k = 0; k <= i; ++k) v += a[k * (B + 1) + (i - k)] * x[k];
        y[i] = v;
      }
      for (int i = B; i < c_.n; ++i) {
        double v = a[i * (B + 1)] * x[i];
        for (int k = 1; k <= B; ++k) v += a[(i - k) * (B + 1) + k] * x[i - k];
        y[i] = v;
      }
      return;
    }
    const int n = c_.n, b = c_.b;
    for (int i = 0; i < n; ++i) {
      double v = 0.0;
      for (int k = std::max(0, i - b); k <= i; ++k) v += c_.at(i, k) * x[k];
      y[i] = v;
    }
  }
  void TransposeProduct(const double* x, double* y) const {  // y = C^T x
    if (c_.b == kHermiteHalfBandwidth && c_.n > kHermiteHalfBandwidth) {
      constexpr int B = kHermiteHalfBandwidth;
      const double* a = c_.a.data();
      const int n = c_.n;
      for (int k = 0; k < n - B; ++k) {
        double v = 0.0;
        for (int j = 0; j <= B; ++j) v += a[k * (B + 1) + j] * x[k + j];
        y[k] = v;
      }
      for (int k = n - B; k < n; ++k) {
        double v = 0.0;
        for (int i = k; i < n; ++i) v += a[k * (B + 1) + (i - k)] * x[i];
        y[k] = v;
      }
      return;
    }
    const int n = c_.n, b = c_.b;
    for (int k = 0; k < n; ++k) {
      double v = 0.0;
      for (int i = k; i <= std::min(n - 1, k + b); ++i) v += c_.at(i, k) * x[i];
      y[k] = v;
    }
  }
  void TransposeSolveInPlace(double* x) const {  // x = C^{-T} x
    const int n = c_.n, b = c_.b;
    for (int i = n - 1; i >= 0; --i) {
      for (int k = i + 1; k <= std::min(n - 1, i + b); ++k) x[i] -= c_.at(k, i) * x[k];
      x[i] /= c_.at(i, i);
    }
  }

 private:
  Band c_;
  bool ok_ = false;
};

// y = C^T K_T^{-1} C x for K_T = K_0 + c g g^T (C the Cholesky factor of
// M), K_T^{-1} by Sherman-Morrison:
//   K_T^{-1} u = K_0^{-1} u - z (c g^T K_0^{-1} u) / (1 + c g^T z),  z = K_0^{-1} g.
// Implements the operator interface of Spectra's standard solver (rows,
// cols, perform_op).
class InverseStiffnessInMassMetric {
 public:
  using Scalar = double;
  // Not owned; must outlive this object.
  InverseStiffnessInMassMetric(const BandLdlt* k0, const BandCholesky* m, const Eigen::VectorXd* g, double c)
      : k0_(k0), m_(m), g_(g), c_(c), u_(k0->rows()) {
    if (c_ != 0.0) {
      z_ = k0_->Solve(*g_);
      denom_ = 1.0 + c_ * g_->dot(z_);
    }
  }
  Eigen::Index rows() const { return k0_->rows(); }
  Eigen::Index cols() const { return k0_->rows(); }
  void perform_op(const double* x_in, double* y_out) const {
    m_->Product(x_in, u_.data());
    k0_->SolveInPlace(u_.data());
    if (c_ != 0.0) u_ -= z_ * (c_ * g_->dot(u_) / denom_);
    m_->TransposeProduct(u_.data(), y_out);
  }

 private:
  const BandLdlt* k0_;
  const BandCholesky* m_;
  const Eigen::VectorXd* g_;
  double c_;
  Eigen::VectorXd z_;
  double denom_ = 1.0;
  mutable Eigen::VectorXd u_;  // scratch: K_T^{-1} C x
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

struct ModalModel::Bands {
  Band K_b, G;
  BandCholesky mass;                // M = C C^T
  int left_dof = 0, right_dof = 0;  // theta at the ends (the unit springs S_left, S_right)
};

ModalModel::ModalModel(const Member& member, Direction direction, ModalOptions options)
    : member_(member), direction_(direction), mesh_(BuildMesh(member, options.target_elements)) {
  matrices_ = AssembleBeam(member_, mesh_);
  auto bands = std::make_shared<Bands>();
  const int b =
      std::max({HalfBandwidth(matrices_.K_b), HalfBandwidth(matrices_.G), HalfBandwidth(matrices_.M)});
  bands->K_b = ToBand(matrices_.K_b, b);
  bands->G = ToBand(matrices_.G, b);
  // M is symmetric positive definite (consistent mass plus point masses)
  // and banded like K: its Cholesky factor has no fill.
  bands->mass = BandCholesky(BandLdlt(ToBand(matrices_.M, b)));
  bands->left_dof = ThetaDof(0, mesh_.Nodes());
  bands->right_dof = ThetaDof(mesh_.Nodes() - 1, mesh_.Nodes());
  bands_ = std::move(bands);
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
  return Solve(params, num_modes, result, nullptr);
}

Status ModalModel::Solve(const ModalParameters& params, int num_modes, ModalResult* result,
                         const ModalResult* near) const {
  const int n = mesh_.FreeDofs();
  if (num_modes < 1 || num_modes > n / 2) {
    return Status::InvalidArgument("number of modes = " + std::to_string(num_modes) + ": must be in [1, " +
                                   std::to_string(n / 2) + "] for this mesh");
  }
  ResolvedParameters r;
  if (Status s = ResolveParameters(member_, direction_, params, &r); !s.ok()) return s;

  // K_0: tangent stiffness without the sag term, as a band.
  const Bands& bd = *bands_;
  Band k0 = bd.K_b;
  for (size_t i = 0; i < k0.a.size(); ++i)
    k0.a[i] = r.ei_nm2 * bd.K_b.a[i] + params.axial_force_n * bd.G.a[i];
  k0.at(bd.left_dof, bd.left_dof) += r.k_left_nm_per_rad;
  k0.at(bd.right_dof, bd.right_dof) += r.k_right_nm_per_rad;
  const BandLdlt ldlt(k0);
  // Sylvester's law of inertia: K_0 is positive definite iff every pivot of
  // its LDL^T factor is positive. A pivot that is zero to round-off (relative
  // to the largest) means the member sits at its buckling load.
  const double d_max = ldlt.D().cwiseAbs().maxCoeff();
  if (!(ldlt.D().minCoeff() > 1e-13 * d_max)) {
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
    w_s = ldlt.Solve(matrices_.weight * r.gravity_normal_m_s2);
    BandProduct(bd.G, w_s.data(), g.data());
    c = r.k_axial_n_per_m;
  }

  Eigen::VectorXd eigenvalues;
  Eigen::MatrixXd vectors;
  const int ncv = std::min(n, std::max(2 * num_modes + 1, num_modes + 8));
  if (n <= kDenseDofLimit || ncv >= n) {
    const SparseMatrix k0s = r.ei_nm2 * matrices_.K_b + params.axial_force_n * matrices_.G +
                             r.k_left_nm_per_rad * matrices_.S_left +
                             r.k_right_nm_per_rad * matrices_.S_right;
    Eigen::MatrixXd kt = Eigen::MatrixXd(k0s) + c * g * g.transpose();
    Eigen::GeneralizedSelfAdjointEigenSolver<Eigen::MatrixXd> es(kt, Eigen::MatrixXd(matrices_.M));
    if (es.info() != Eigen::Success) return Status::Numerical("dense eigen-decomposition did not converge");
    eigenvalues = es.eigenvalues().head(num_modes);
    vectors = es.eigenvectors().leftCols(num_modes);
  } else {
    if (!bd.mass.ok()) return Status::Numerical("the mass matrix is not positive definite");
    InverseStiffnessInMassMetric op(&ldlt, &bd.mass, &g, c);
    Spectra::SymEigsSolver<InverseStiffnessInMassMetric> eigs(op, num_modes, ncv);
    // Start vector: the sum of the near modes in the metric coordinates
    // y = C^T phi (their Ritz space is then nearly invariant), or Spectra's
    // default (a fixed pseudo-random vector).
    Eigen::VectorXd start;
    if (near != nullptr && static_cast<int>(near->modes.size()) >= num_modes) {
      Eigen::VectorXd phi_sum = Eigen::VectorXd::Zero(n);
      for (int k = 0; k < num_modes; ++k) {
        if (near->modes[k].dofs.size() == n) phi_sum += near->modes[k].dofs;
      }
      start.resize(n);
      bd.mass.TransposeProduct(phi_sum.data(), start.data());
    }
    if (start.size() == n && start.squaredNorm() > 0.0) {
      eigs.init(start.data());
    } else {
      eigs.init();
    }
    eigs.compute(Spectra::SortRule::LargestAlge, kLanczosMaxRestarts, kLanczosTolerance,
                 Spectra::SortRule::LargestAlge);
    if (eigs.info() != Spectra::CompInfo::Successful) {
      return Status::Numerical("Lanczos eigen-solver did not converge for " + std::to_string(num_modes) +
                               " modes");
    }
    // mu = 1 / omega^2 in descending order = omega^2 ascending; phi = C^{-T} y.
    eigenvalues = eigs.eigenvalues().cwiseInverse();
    vectors = eigs.eigenvectors();
    for (int k = 0; k < vectors.cols(); ++k) bd.mass.TransposeSolveInPlace(vectors.col(k).data());
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
    mode.dofs = phi;
    mode.w_nodes = Eigen::VectorXd::Zero(nodes);
    for (int i = 0; i < nodes; ++i) {
      const int d = WDof(i, nodes);
      if (d >= 0) mode.w_nodes[i] = phi[d];
    }
    Eigen::Index imax = 0;
    mode.w_nodes.cwiseAbs().maxCoeff(&imax);
    if (mode.w_nodes[imax] < 0.0) {
      mode.w_nodes = -mode.w_nodes;
      mode.dofs = -mode.dofs;
    }
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
