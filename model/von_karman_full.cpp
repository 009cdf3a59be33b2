#include "model/von_karman_full.h"

#include <Eigen/SparseLU>
#include <array>
#include <cmath>

namespace taut::model {

namespace {

// 5-point Gauss-Legendre rule mapped to [0, 1] (Abramowitz and Stegun,
// Handbook of Mathematical Functions, 1964, Table 25.4).
constexpr std::array<double, 5> kGaussX = {0.04691007703066800, 0.2307653449471585, 0.5, 0.7692346550528415,
                                           0.9530899229693320};
constexpr std::array<double, 5> kGaussW = {0.1184634425280945, 0.2393143352496832, 0.2844444444444444,
                                           0.2393143352496832, 0.1184634425280945};

constexpr int kMaxNewton = 30;
constexpr double kNewtonRelTol = 1e-13;

struct Shapes {
  Eigen::Vector4d n, dn, ddn;  // Hermite w shape functions and x-derivatives
  Eigen::Vector3d l, dl;       // quadratic Lagrange u shape functions and x-derivatives
};

Shapes ShapesAt(double s, double h) {
  Shapes f;
  const double s2 = s * s, s3 = s2 * s;
  f.n << 1 - 3 * s2 + 2 * s3, h * (s - 2 * s2 + s3), 3 * s2 - 2 * s3, h * (s3 - s2);
  f.dn << (-6 * s + 6 * s2) / h, 1 - 4 * s + 3 * s2, (6 * s - 6 * s2) / h, 3 * s2 - 2 * s;
  f.ddn << (-6 + 12 * s) / (h * h), (-4 + 6 * s) / h, (6 - 12 * s) / (h * h), (6 * s - 2) / h;
  f.l << (1 - s) * (1 - 2 * s), 4 * s * (1 - s), s * (2 * s - 1);
  f.dl << (-3 + 4 * s) / h, (4 - 8 * s) / h, (4 * s - 1) / h;
  return f;
}

}  // namespace

FullVonKarman::FullVonKarman(const Member& member, Direction direction, const ModalParameters& params,
                             int elements)
    : member_(member), mesh_(BuildMesh(member, elements)) {
  ResolvedParameters r;
  status_ = ResolveParameters(member_, direction, params, &r);
  if (!status_.ok()) return;
  ei_ = r.ei_nm2;
  ea_ = member_.AxialRigidity_n();
  mass_ = member_.MassPerLength_kg_m();
  prestrain_ = params.axial_force_n / ea_;
  nw_ = mesh_.FreeDofs();
  nu_ = (mesh_.Nodes() - 2) + mesh_.Elements();

  std::vector<Eigen::Triplet<double>> mt, kt;
  const Eigen::Matrix3d axial_mass = (Eigen::Matrix3d() << 4, 2, -1, 2, 16, 2, -1, 2, 4).finished() / 30.0;
  for (int e = 0; e < mesh_.Elements(); ++e) {
    const double h = mesh_.x_m[e + 1] - mesh_.x_m[e];
    int wd[4], ud[3];
    ElementDofs(e, wd, ud);
    const Eigen::Matrix4d me = HermiteMass(h) * mass_;
    const Eigen::Matrix4d ke = HermiteBendingStiffness(h) * ei_;
    for (int a = 0; a < 4; ++a) {
      for (int b = 0; b < 4; ++b) {
        if (wd[a] < 0 || wd[b] < 0) continue;
        mt.emplace_back(wd[a], wd[b], me(a, b));
        kt.emplace_back(wd[a], wd[b], ke(a, b));
      }
    }
    for (int a = 0; a < 3; ++a) {
      for (int b = 0; b < 3; ++b) {
        if (ud[a] >= 0 && ud[b] >= 0) mt.emplace_back(ud[a], ud[b], axial_mass(a, b) * mass_ * h);
      }
    }
  }
  for (size_t i = 0; i < member_.sensors.size(); ++i) {
    const int node = mesh_.sensor_node[i];
    mt.emplace_back(WDof(node, mesh_.Nodes()), WDof(node, mesh_.Nodes()), member_.sensors[i].mass_kg);
    mt.emplace_back(nw_ + node - 1, nw_ + node - 1, member_.sensors[i].mass_kg);
  }
  kt.emplace_back(ThetaDof(0, mesh_.Nodes()), ThetaDof(0, mesh_.Nodes()), r.k_left_nm_per_rad);
  kt.emplace_back(ThetaDof(mesh_.Nodes() - 1, mesh_.Nodes()), ThetaDof(mesh_.Nodes() - 1, mesh_.Nodes()),
                  r.k_right_nm_per_rad);
  M_.resize(Dofs(), Dofs());
  M_.setFromTriplets(mt.begin(), mt.end());
  K_.resize(Dofs(), Dofs());
  K_.setFromTriplets(kt.begin(), kt.end());
}

void FullVonKarman::ElementDofs(int e, int w_dofs[4], int u_dofs[3]) const {
  const int nodes = mesh_.Nodes();
  w_dofs[0] = WDof(e, nodes);
  w_dofs[1] = ThetaDof(e, nodes);
  w_dofs[2] = WDof(e + 1, nodes);
  w_dofs[3] = ThetaDof(e + 1, nodes);
  auto end_u = [&](int node) { return (node == 0 || node == nodes - 1) ? -1 : nw_ + node - 1; };
  u_dofs[0] = end_u(e);
  u_dofs[1] = nw_ + (nodes - 2) + e;
  u_dofs[2] = end_u(e + 1);
}

Eigen::VectorXd FullVonKarman::Interpolate(const std::function<double(double)>& w,
                                           const std::function<double(double)>& dw,
                                           const std::function<double(double)>& u) const {
  Eigen::VectorXd q = Eigen::VectorXd::Zero(Dofs());
  const int nodes = mesh_.Nodes();
  for (int i = 0; i < nodes; ++i) {
    const double x = mesh_.x_m[i];
    if (WDof(i, nodes) >= 0) q[WDof(i, nodes)] = w(x);
    q[ThetaDof(i, nodes)] = dw(x);
    if (i > 0 && i < nodes - 1) q[nw_ + i - 1] = u(x);
  }
  for (int e = 0; e < mesh_.Elements(); ++e)
    q[nw_ + (nodes - 2) + e] = u(0.5 * (mesh_.x_m[e] + mesh_.x_m[e + 1]));
  return q;
}

Eigen::VectorXd FullVonKarman::LoadVector(double t, const BodyForce& force) const {
  Eigen::VectorXd f = Eigen::VectorXd::Zero(Dofs());
  if (!force) return f;
  for (int e = 0; e < mesh_.Elements(); ++e) {
    const double h = mesh_.x_m[e + 1] - mesh_.x_m[e];
    int wd[4], ud[3];
    ElementDofs(e, wd, ud);
    for (size_t g = 0; g < kGaussX.size(); ++g) {
      const Shapes s = ShapesAt(kGaussX[g], h);
      double qw = 0.0, qu = 0.0;
      force(mesh_.x_m[e] + kGaussX[g] * h, t, &qw, &qu);
      const double jw = kGaussW[g] * h;
      for (int a = 0; a < 4; ++a) {
        if (wd[a] >= 0) f[wd[a]] += jw * qw * s.n[a];
      }
      for (int a = 0; a < 3; ++a) {
        if (ud[a] >= 0) f[ud[a]] += jw * qu * s.l[a];
      }
    }
  }
  return f;
}

namespace {

// Gathers element values of q.
double Gather(const Eigen::VectorXd& q, int dof) { return dof >= 0 ? q[dof] : 0.0; }

}  // namespace

double FullVonKarman::IntegrateStrain(const Eigen::VectorXd& q,
                                      const std::function<double(double)>& f) const {
  double integral = 0.0;
  for (int e = 0; e < mesh_.Elements(); ++e) {
    const double h = mesh_.x_m[e + 1] - mesh_.x_m[e];
    int wd[4], ud[3];
    ElementDofs(e, wd, ud);
    for (size_t g = 0; g < kGaussX.size(); ++g) {
      const Shapes s = ShapesAt(kGaussX[g], h);
      double du = 0.0, dw = 0.0;
      for (int a = 0; a < 3; ++a) du += s.dl[a] * Gather(q, ud[a]);
      for (int a = 0; a < 4; ++a) dw += s.dn[a] * Gather(q, wd[a]);
      integral += kGaussW[g] * h * f(du + 0.5 * dw * dw + prestrain_);
    }
  }
  return integral;
}

double FullVonKarman::Energy(const Eigen::VectorXd& q, const Eigen::VectorXd& v) const {
  const double membrane = IntegrateStrain(q, [this](double eps) { return 0.5 * ea_ * eps * eps; });
  return 0.5 * v.dot(M_ * v) + 0.5 * q.dot(K_ * q) + membrane;
}

double FullVonKarman::MeanAxialForce(const Eigen::VectorXd& q) const {
  return IntegrateStrain(q, [this](double eps) { return ea_ * eps; }) / member_.length_m;
}

double FullVonKarman::W(const Eigen::VectorXd& q, double x_m) const {
  return InterpolateW(mesh_, q.head(nw_), x_m);
}

double FullVonKarman::WErrorL2(const Eigen::VectorXd& q, const std::function<double(double)>& w_exact) const {
  double sum = 0.0;
  for (int e = 0; e < mesh_.Elements(); ++e) {
    const double h = mesh_.x_m[e + 1] - mesh_.x_m[e];
    int wd[4], ud[3];
    ElementDofs(e, wd, ud);
    for (size_t g = 0; g < kGaussX.size(); ++g) {
      const Shapes s = ShapesAt(kGaussX[g], h);
      double w = 0.0;
      for (int a = 0; a < 4; ++a) w += s.n[a] * Gather(q, wd[a]);
      const double d = w - w_exact(mesh_.x_m[e] + kGaussX[g] * h);
      sum += kGaussW[g] * h * d * d;
    }
  }
  return std::sqrt(sum);
}

Status FullVonKarman::Step(double h, double t, const BodyForce& force, Eigen::VectorXd* q_io,
                           Eigen::VectorXd* v_io, int* newton_iterations) const {
  if (!status_.ok()) return status_;
  const Eigen::VectorXd& q0 = *q_io;
  const Eigen::VectorXd& v0 = *v_io;
  const Eigen::VectorXd f_mid = LoadVector(t + 0.5 * h, force);
  const Eigen::VectorXd mv0 = M_ * v0;
  Eigen::VectorXd q1 = q0 + h * v0;
  Eigen::SparseLU<SparseMatrix> lu;
  const int n = Dofs();
  for (int it = 0; it < kMaxNewton; ++it) {
    if (newton_iterations != nullptr) ++*newton_iterations;
    const Eigen::VectorXd qm = 0.5 * (q0 + q1);
    Eigen::VectorXd r = (2.0 / (h * h)) * (M_ * (q1 - q0)) - (2.0 / h) * mv0 + K_ * qm - f_mid;
    std::vector<Eigen::Triplet<double>> jt;
    jt.reserve(static_cast<size_t>(mesh_.Elements()) * 49 * 2);
    for (int e = 0; e < mesh_.Elements(); ++e) {
      const double he = mesh_.x_m[e + 1] - mesh_.x_m[e];
      int wd[4], ud[3];
      ElementDofs(e, wd, ud);
      int dof[7] = {wd[0], wd[1], wd[2], wd[3], ud[0], ud[1], ud[2]};
      for (size_t g = 0; g < kGaussX.size(); ++g) {
        const Shapes s = ShapesAt(kGaussX[g], he);
        auto strain = [&](const Eigen::VectorXd& q, double* dw_out) {
          double du = 0.0, dw = 0.0;
          for (int a = 0; a < 3; ++a) du += s.dl[a] * Gather(q, ud[a]);
          for (int a = 0; a < 4; ++a) dw += s.dn[a] * Gather(q, wd[a]);
          *dw_out = dw;
          return du + 0.5 * dw * dw + prestrain_;
        };
        double dw0, dw1, dwm;
        const double e0 = strain(q0, &dw0), e1 = strain(q1, &dw1);
        strain(qm, &dwm);
        const double ebar = 0.5 * (e0 + e1);
        // grad e at q: u entries dl, w entries (w') dn.
        Eigen::Matrix<double, 7, 1> grad_m, grad_1;
        grad_m << dwm * s.dn, s.dl;
        grad_1 << dw1 * s.dn, s.dl;
        const double jw = kGaussW[g] * he * ea_;
        for (int a = 0; a < 7; ++a) {
          if (dof[a] >= 0) r[dof[a]] += jw * ebar * grad_m[a];
        }
        // d/dq1 [ebar grad_m] = (1/2) grad_m grad_1^T + ebar (1/2) dn dn^T (w block).
        for (int a = 0; a < 7; ++a) {
          if (dof[a] < 0) continue;
          for (int b = 0; b < 7; ++b) {
            if (dof[b] < 0) continue;
            double v = 0.5 * grad_m[a] * grad_1[b];
            if (a < 4 && b < 4) v += 0.5 * ebar * s.dn[a] * s.dn[b];
            jt.emplace_back(dof[a], dof[b], jw * v);
          }
        }
      }
    }
    SparseMatrix jac = (2.0 / (h * h)) * M_ + 0.5 * K_;
    SparseMatrix jm(n, n);
    jm.setFromTriplets(jt.begin(), jt.end());
    jac += jm;
    jac.makeCompressed();
    lu.compute(jac);
    if (lu.info() != Eigen::Success) return Status::Numerical("full von Karman step: singular Jacobian");
    const Eigen::VectorXd dq = lu.solve(r);
    q1 -= dq;
    if (dq.norm() <= kNewtonRelTol * (q1.norm() + h * v0.norm() + 1e-300)) {
      *v_io = (2.0 / h) * (q1 - q0) - v0;
      *q_io = q1;
      return Status::Ok();
    }
  }
  return Status::Numerical("full von Karman step: Newton did not converge in " + std::to_string(kMaxNewton) +
                           " iterations at t = " + std::to_string(t) + " s");
}

}  // namespace taut::model
