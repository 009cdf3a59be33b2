#include "model/transient.h"

#include <Eigen/Dense>
#include <Eigen/SparseCholesky>
#include <cmath>
#include <limits>
#include <memory>
#include <numbers>

#include "model/modal.h"  // linear modes for the Rayleigh coefficients

namespace taut::model {

namespace {

using BandedLdlt = Eigen::SimplicialLDLT<SparseMatrix, Eigen::Lower, Eigen::NaturalOrdering<int>>;

// Scalar Newton: iteration cap and relative tolerance on Nbar. The scalar
// equation is smooth and nearly linear (F' = 1 + O(k_ax |w|^2 / lambda)),
// so a handful of iterations reach round-off; 30 failing means the step is
// too long for the stretching nonlinearity.
constexpr int kMaxScalarNewton = 30;
constexpr double kScalarNewtonRelTol = 1e-15;
constexpr int kMaxHalvings = 10;

}  // namespace

TransientModel::TransientModel(const Member& member, Direction direction, const ModalParameters& params,
                               TransientOptions options)
    : member_(member),
      direction_(direction),
      params_(params),
      options_(options),
      mesh_(BuildMesh(member, options.target_elements)) {
  if (!(options_.output_rate_hz > 0.0) || !(options_.duration_s > 0.0) || options_.substeps < 1) {
    status_ = Status::InvalidArgument(
        "transient options: output_rate_hz and duration_s must be > 0, substeps >= 1");
    return;
  }
  if (!(options_.damping_ratio >= 0.0 && options_.damping_ratio < 1.0)) {
    status_ = Status::InvalidArgument("damping ratio = " + std::to_string(options_.damping_ratio) +
                                      ": must be in [0, 1)");
    return;
  }
  status_ = ResolveParameters(member_, direction_, params_, &resolved_);
  if (!status_.ok()) return;
  matrices_ = AssembleBeam(member_, mesh_);
  const ResolvedParameters& r = resolved_;
  K_ = r.ei_nm2 * matrices_.K_b + r.k_left_nm_per_rad * matrices_.S_left +
       r.k_right_nm_per_rad * matrices_.S_right;
  const SparseMatrix k0 = K_ + params_.axial_force_n * matrices_.G;
  BandedLdlt ldlt(k0);
  if (ldlt.info() != Eigen::Success ||
      ldlt.vectorD().minCoeff() <= 1e-13 * ldlt.vectorD().cwiseAbs().maxCoeff()) {
    status_ = Status::Buckled(
        "axial force N = " + std::to_string(params_.axial_force_n) +
        " N is at or beyond the buckling load: no static equilibrium about the straight line");
    return;
  }
  // Static state. With N_s (the force in the sagged state) given, the
  // equilibrium K w + N(w) G w = f_g with N(w_s) = N_s is linear in w_s:
  // (K + N_s G) w_s = f_g, one banded solve (a Newton iteration on the
  // nonlinear statics converges in this single step).
  f_g_ = matrices_.weight * r.gravity_normal_m_s2;
  w_s_ = ldlt.solve(f_g_);
  e_s_ = 0.5 * w_s_.dot(matrices_.G * w_s_);
  {
    int mid = 0;
    for (int i = 0; i < mesh_.Nodes(); ++i) {
      if (std::abs(mesh_.x_m[i] - 0.5 * member_.length_m) <
          std::abs(mesh_.x_m[mid] - 0.5 * member_.length_m)) {
        mid = i;
      }
    }
    const int d = WDof(mid, mesh_.Nodes());
    sag_midspan_m_ = d >= 0 ? 0.0 - w_s_[d] : 0.0;
  }
  v_static_ = 0.5 * w_s_.dot(K_ * w_s_) - f_g_.dot(w_s_);  // e(w_s) = 0

  C_ = SparseMatrix(K_.rows(), K_.cols());
  if (options_.damping_ratio > 0.0) {
    ModalResult modes;
    Status s = ComputeModes(member_, direction_, params_, 2, &modes, {options_.target_elements});
    if (!s.ok()) {
      status_ = s;
      return;
    }
    const double w1 = std::sqrt(modes.modes[0].eigenvalue), w2 = std::sqrt(modes.modes[1].eigenvalue);
    const double zeta = options_.damping_ratio;
    const double alpha = 2.0 * zeta * w1 * w2 / (w1 + w2);
    const double beta = 2.0 * zeta / (w1 + w2);
    C_ = alpha * matrices_.M + beta * k0;
  }
}

Eigen::VectorXd TransientModel::ModeShape(int order, double amplitude_m) const {
  if (!status_.ok() || order < 1 || order > mesh_.FreeDofs()) return {};
  // The full free-DOF eigenvector (rotations included) of the tangent
  // problem of modal.h, by a dense decomposition: called once per run, so
  // the O(n^3) cost does not matter here.
  Eigen::MatrixXd kt = Eigen::MatrixXd(K_ + params_.axial_force_n * matrices_.G);
  if (resolved_.gravity_normal_m_s2 > 0.0 && resolved_.k_axial_n_per_m > 0.0) {
    const Eigen::VectorXd g = matrices_.G * w_s_;
    kt += resolved_.k_axial_n_per_m * g * g.transpose();
  }
  Eigen::GeneralizedSelfAdjointEigenSolver<Eigen::MatrixXd> es(kt, Eigen::MatrixXd(matrices_.M));
  if (es.info() != Eigen::Success) return {};
  const Eigen::VectorXd phi = es.eigenvectors().col(order - 1);
  int imax = -1;
  for (int i = 0; i < mesh_.Nodes(); ++i) {
    const int d = WDof(i, mesh_.Nodes());
    if (d >= 0 && (imax < 0 || std::abs(phi[d]) > std::abs(phi[imax]))) imax = d;
  }
  return phi * (amplitude_m / phi[imax]);
}

double TransientModel::Energy(const Eigen::VectorXd& w_dyn, const Eigen::VectorXd& v) const {
  const Eigen::VectorXd w = w_s_ + w_dyn;
  const double e = 0.5 * w.dot(matrices_.G * w) - e_s_;
  const double kinetic = 0.5 * v.dot(matrices_.M * v);
  const double potential =
      0.5 * w.dot(K_ * w) + params_.axial_force_n * e + 0.5 * resolved_.k_axial_n_per_m * e * e - f_g_.dot(w);
  return kinetic + potential - v_static_;
}

Status TransientModel::Run(const TransientLoads& loads, TransientResult* result) const {
  if (!status_.ok()) return status_;
  const int n = mesh_.FreeDofs();
  const double n_s = params_.axial_force_n;
  const double k_ax = resolved_.k_axial_n_per_m;
  const SparseMatrix& M = matrices_.M;
  const SparseMatrix& G = matrices_.G;

  // Initial state in physical DOFs.
  Eigen::VectorXd w = w_s_;
  Eigen::VectorXd v = Eigen::VectorXd::Zero(n);
  if (loads.initial_displacement.size() != 0) {
    if (loads.initial_displacement.size() != n)
      return Status::InvalidArgument("initial displacement has wrong size");
    w += loads.initial_displacement;
  }
  if (loads.initial_velocity.size() != 0) {
    if (loads.initial_velocity.size() != n) return Status::InvalidArgument("initial velocity has wrong size");
    v += loads.initial_velocity;
  }
  if (!loads.impulses.empty()) {
    BandedLdlt mass_ldlt(M);
    if (mass_ldlt.info() != Eigen::Success) return Status::Numerical("mass matrix factorisation failed");
    Eigen::VectorXd j = Eigen::VectorXd::Zero(n);
    for (const PointImpulse& p : loads.impulses) {
      if (!(p.position_m > 0.0 && p.position_m < member_.length_m)) {
        return Status::InvalidArgument("impulse position " + std::to_string(p.position_m) +
                                       " m: must lie strictly inside the span");
      }
      j += p.impulse_ns * PointLoadVector(mesh_, p.position_m);
    }
    v += mass_ldlt.solve(j);  // M dv = J
  }
  std::vector<Eigen::VectorXd> force_shapes;
  for (const PointForce& f : loads.forces) {
    if (!(f.position_m >= 0.0 && f.position_m <= member_.length_m) || !f.force_n) {
      return Status::InvalidArgument("point force position " + std::to_string(f.position_m) +
                                     " m must lie on the member and the force must be set");
    }
    force_shapes.push_back(PointLoadVector(mesh_, f.position_m));
  }

  // Output layout.
  TransientResult out;
  out.sample_rate_hz = options_.output_rate_hz;
  std::vector<int> sensor_dofs;
  for (size_t i = 0; i < member_.sensors.size(); ++i) {
    if (member_.sensors[i].direction != direction_) continue;
    out.channels.push_back(member_.sensors[i].channel);
    sensor_dofs.push_back(WDof(mesh_.sensor_node[i], mesh_.Nodes()));
  }
  const int samples = static_cast<int>(std::floor(options_.duration_s * options_.output_rate_hz + 1e-9)) + 1;
  const int channels = static_cast<int>(sensor_dofs.size());
  out.acceleration_m_s2.resize(samples, channels);
  out.displacement_m.resize(samples, channels);
  out.axial_force_n.resize(samples);
  out.energy_j.resize(samples);
  out.midspan_m.resize(samples);

  // Everything is integrated in the coordinates of the pencil (S, G) of
  // each step size: w = Phi y, v = Phi z, where Phi^T G Phi = I makes the
  // stretching measure w^T G w = y^T y and the step solve diagonal. The
  // projected matrices below are dense n x n (n ~ 2 x elements), built
  // once per step size.
  struct Basis {
    double h;
    Eigen::MatrixXd phi;      // w = phi y
    Eigen::MatrixXd phi_inv;  // y = phi_inv w = phi^T G w
    Eigen::VectorXd lambda;   // phi^T S phi
    Eigen::MatrixXd k_hat;    // phi^T K phi
    Eigen::MatrixXd m_hat;    // phi^T M phi
    Eigen::MatrixXd c_hat;    // phi^T C phi
    // The step's right-hand side p = a_y y + a_z z + phi^T f(t + h/2), with
    // a_y = (2/h^2) m_hat - k_hat / 2 + c_hat / h and a_z = (2/h) m_hat.
    Eigen::MatrixXd a_y, a_z;
    Eigen::VectorXd fg_hat;                  // phi^T f_g
    std::vector<Eigen::VectorXd> force_hat;  // phi^T (point force shapes)
  };
  const double h0 = 1.0 / (options_.output_rate_hz * options_.substeps);
  const bool damped = C_.nonZeros() > 0 && options_.damping_ratio > 0.0;
  std::vector<std::unique_ptr<Basis>> bases(kMaxHalvings + 1);
  auto basis = [&](int depth) -> const Basis& {
    auto& b = bases[depth];
    if (!b) {
      b = std::make_unique<Basis>();
      b->h = h0 / std::pow(2.0, depth);
      const double h = b->h;
      const Eigen::MatrixXd s = Eigen::MatrixXd((2.0 / (h * h)) * M + 0.5 * K_ + (1.0 / h) * C_);
      Eigen::GeneralizedSelfAdjointEigenSolver<Eigen::MatrixXd> es(s, Eigen::MatrixXd(G));
      b->phi = es.eigenvectors();
      b->lambda = es.eigenvalues();
      b->phi_inv = b->phi.transpose() * Eigen::MatrixXd(G);
      b->k_hat = b->phi.transpose() * (K_ * b->phi);
      b->m_hat = b->phi.transpose() * (M * b->phi);
      b->c_hat = b->phi.transpose() * (C_ * b->phi);
      b->a_y = (2.0 / (h * h)) * b->m_hat - 0.5 * b->k_hat + (1.0 / h) * b->c_hat;
      b->a_z = (2.0 / h) * b->m_hat;
      b->fg_hat = b->phi.transpose() * f_g_;
      for (const auto& f : force_shapes) b->force_hat.push_back(b->phi.transpose() * f);
    }
    return *b;
  };
  auto stretch_force = [&](const Eigen::VectorXd& y) { return n_s + k_ax * (0.5 * y.squaredNorm() - e_s_); };

  // One midpoint step of size b.h in b's coordinates (see the file comment
  // for the equations; in these coordinates S -> diag(lambda), G -> I,
  // the right-hand side b -> p, G w0 -> y0). Returns false when the scalar
  // Newton fails; y, z are then unchanged.
  Eigen::VectorXd p(n), y1(n);
  Eigen::ArrayXd denom(n);
  auto step = [&](const Basis& b, double t, Eigen::VectorXd& y, Eigen::VectorXd& z) -> bool {
    const double h = b.h;
    // p = phi^T [(2/h^2) M w + (2/h) M v - K w / 2 + C w / h + f(t + h/2)]
    p.noalias() = b.a_y * y;
    p.noalias() += b.a_z * z;
    p += b.fg_hat;
    for (size_t i = 0; i < loads.forces.size(); ++i)
      p += loads.forces[i].force_n(t + 0.5 * h) * b.force_hat[i];
    if (loads.distributed) {
      const double tm = t + 0.5 * h;
      p.noalias() += b.phi.transpose() *
                     DistributedLoadVector(mesh_, [&](double x) { return loads.distributed(x, tm); });
    }
    const double n0 = stretch_force(y);
    double nbar = n0;
    for (int it = 0; it < kMaxScalarNewton; ++it) {
      ++out.newton_iterations;
      denom = b.lambda.array() + 0.5 * nbar;
      if ((denom <= 0.0).any()) return false;
      y1.array() = (p.array() - 0.5 * nbar * y.array()) / denom;
      const double n1 = n_s + k_ax * (0.5 * y1.squaredNorm() - e_s_);
      const double f = nbar - 0.5 * (n0 + n1);
      const double df = 1.0 + 0.25 * k_ax * (y1.array() * (y.array() + y1.array()) / denom).sum();
      if (!(df > 0.0) || !std::isfinite(f)) return false;
      const double dn = f / df;
      nbar -= dn;
      if (std::abs(dn) <= kScalarNewtonRelTol * (std::abs(nbar) + std::abs(n_s) + k_ax * std::abs(e_s_)) ||
          dn == 0.0) {
        y1.array() = (p.array() - 0.5 * nbar * y.array()) / (b.lambda.array() + 0.5 * nbar);
        z = (2.0 / h) * (y1 - y) - z;
        y = y1;
        ++out.steps;
        return true;
      }
    }
    return false;
  };

  // Advances the physical state by h0 / 2^depth (depth > 0: after a
  // failed longer step), splitting again on failure.
  std::function<bool(int, double, Eigen::VectorXd&, Eigen::VectorXd&)> advance_split =
      [&](int depth, double t, Eigen::VectorXd& w_phys, Eigen::VectorXd& v_phys) -> bool {
    const Basis& b = basis(depth);
    Eigen::VectorXd y = b.phi_inv * w_phys, z = b.phi_inv * v_phys;
    if (step(b, t, y, z)) {
      w_phys = b.phi * y;
      v_phys = b.phi * z;
      return true;
    }
    if (depth >= kMaxHalvings) return false;
    ++out.halvings;
    return advance_split(depth + 1, t, w_phys, v_phys) &&
           advance_split(depth + 1, t + 0.5 * b.h, w_phys, v_phys);
  };

  // Output rows for the sensors and mid-span in basis-0 coordinates.
  const Basis& b0 = basis(0);
  Eigen::MatrixXd phi_sensors(channels, n);
  for (int c = 0; c < channels; ++c) phi_sensors.row(c) = b0.phi.row(sensor_dofs[c]);
  // Accelerations: M a = f - K w - N G w - C v, i.e. in coordinates
  // m_hat a_hat = phi^T f - k_hat y - N y - c_hat z, and a at the sensors
  // is phi_sensors a_hat = R (...), R = phi_sensors m_hat^{-1}.
  // (No solve with an empty right-hand side when the plane has no sensors:
  // Eigen's triangular solve indexes element (0, 0) of it.)
  const Eigen::MatrixXd accel_rows =
      channels > 0 ? Eigen::MatrixXd(b0.m_hat.ldlt().solve(phi_sensors.transpose()).transpose())
                   : Eigen::MatrixXd(0, n);
  const Eigen::MatrixXd accel_k = accel_rows * b0.k_hat;  // R k_hat
  const Eigen::MatrixXd accel_c = accel_rows * b0.c_hat;  // R c_hat
  const Eigen::VectorXd accel_g = accel_rows * b0.fg_hat;
  std::vector<Eigen::VectorXd> accel_f;
  for (const auto& fh : b0.force_hat) accel_f.push_back(accel_rows * fh);
  const Eigen::RowVectorXd mid_row = PointLoadVector(mesh_, 0.5 * member_.length_m).transpose() * b0.phi;
  const Eigen::VectorXd y_s = b0.phi_inv * w_s_;
  Eigen::VectorXd y = b0.phi_inv * w, z = b0.phi_inv * v;
  auto record = [&](int k, double t) {
    const double nw = stretch_force(y);
    Eigen::VectorXd a = accel_g - accel_k * y - nw * (accel_rows * y);
    for (size_t i = 0; i < loads.forces.size(); ++i) a += loads.forces[i].force_n(t) * accel_f[i];
    if (loads.distributed) {
      a.noalias() += accel_rows * (b0.phi.transpose() * DistributedLoadVector(mesh_, [&](double x) {
                                     return loads.distributed(x, t);
                                   }));
    }
    if (damped) a.noalias() -= accel_c * z;
    out.acceleration_m_s2.row(k) = a.transpose();
    out.displacement_m.row(k) = (phi_sensors * (y - y_s)).transpose();
    out.axial_force_n[k] = nw;
    out.midspan_m[k] = mid_row.dot(y - y_s);
    if (loads.observer) loads.observer(t, b0.phi * y);
    if (options_.record_energy) {
      // E = (1/2) v^T M v + (1/2) w^T K w + N_s e + (k_ax/2) e^2 - f_g^T w
      const double e = 0.5 * y.squaredNorm() - e_s_;
      out.energy_j[k] = 0.5 * z.dot(b0.m_hat * z) + 0.5 * y.dot(b0.k_hat * y) + n_s * e + 0.5 * k_ax * e * e -
                        b0.fg_hat.dot(y) - v_static_;
    } else {
      out.energy_j[k] = std::numeric_limits<double>::quiet_NaN();
    }
  };

  record(0, 0.0);
  for (int k = 1; k < samples; ++k) {
    for (int sub = 0; sub < options_.substeps; ++sub) {
      const double t = (k - 1) / options_.output_rate_hz + sub * h0;
      if (step(b0, t, y, z)) continue;
      ++out.halvings;
      Eigen::VectorXd w_phys = b0.phi * y, v_phys = b0.phi * z;
      if (!advance_split(1, t, w_phys, v_phys) || !advance_split(1, t + 0.5 * h0, w_phys, v_phys)) {
        return Status::Numerical("time step did not converge after " + std::to_string(kMaxHalvings) +
                                 " halvings at t = " + std::to_string(t) + " s");
      }
      y = b0.phi_inv * w_phys;
      z = b0.phi_inv * v_phys;
    }
    record(k, k / options_.output_rate_hz);
  }
  *result = std::move(out);
  return Status::Ok();
}

}  // namespace taut::model
