// Geometrically nonlinear (von Karman) transient response of a member, in
// the quasi-static-axial form: transverse w by Hermite cubic elements, axial
// inertia neglected so that the axial force is uniform along the member,
//   N(t) = N_s + k_ax e(w),  e(w) = (1/2) int (w'^2 - w_s'^2) dx
//        = (1/2) w^T G w - (1/2) w_s^T G w_s,
// with N_s the axial force in the static (sagged) state, w_s the static sag
// and k_ax the series axial stiffness of member and supports (parameters.h).
// This is the uniform-N reduction of the von Karman beam (membrane strain
// u' + w'^2/2; Woinowsky-Krieger 1950; docs/DESIGN.md "The physics").
//
// Equations of motion on the free DOFs of beam_fe.h (w total, measured from
// the straight line through the supports; positive up / right):
//   M w_tt + C w_t + K w + N(w) G w = f_g + f(t),
// K = EI K_b + k_l S_l + k_r S_r, f_g the self-weight load (vertical plane
// only). They derive from the potential
//   V(w) = (1/2) w^T K w + N_s e(w) + (k_ax/2) e(w)^2 - f_g^T w.
//
// Time integration: the implicit midpoint rule with the discrete gradient of
// V (Gonzalez, J. Nonlinear Sci. 6, 1996; Simo and Tarnow, ZAMP 43, 1992):
//   (w1 - w0)/h = (v0 + v1)/2,
//   M (v1 - v0)/h = -(K + Nbar G) (w0 + w1)/2 - C (v0 + v1)/2 + f_g + f(t + h/2),
//   Nbar = (N(w0) + N(w1)) / 2.
// Because e is quadratic, Nbar G (w0 + w1)/2 is an exact discrete gradient
// of the stretching energy, and the total energy
//   E = (1/2) v^T M v + V(w)
// is conserved to round-off without damping and external force, at any
// amplitude and step (the 1e-10 over 10,000 steps).
//
// The nonlinear step is solved exactly by reducing Newton's method to one
// scalar: for a given Nbar the step is linear,
//   (S + Nbar G / 2) w1 = b - Nbar G w0 / 2,   S = 2M/h^2 + K/2 + C/h,
// and in the basis Phi of the pencil (S, G) (Phi^T G Phi = I,
// Phi^T S Phi = Lambda, computed once per step size) it is diagonal:
//   w1 = Phi y,  y_i = (p_i - Nbar s_i / 2) / (lambda_i + Nbar / 2),
// p = Phi^T b, s = Phi^T G w0. Nbar must then satisfy the scalar equation
//   F(Nbar) = Nbar - (N(w0) + N_s + k_ax ((1/2) y^T y - e_s)) / 2 = 0,
// solved by Newton with the exact derivative. This is the consistent-
// tangent Newton iteration of the full system restricted to the one
// nonlinear quantity, at O(n) per iteration and two dense n x n products
// per step. Step-size control: when the scalar Newton does not converge in
// kMaxScalarNewton iterations (or the shifted pencil loses definiteness),
// the step is halved (recursively, up to kMaxHalvings times).
//
// Damping (optional): Rayleigh, C = alpha M + beta (K + N_s G), with alpha
// and beta giving the ratio zeta at the first two linear modes (Clough and
// Penzien, Dynamics of Structures, 1993, eq. 12-40).
#pragma once

#include <Eigen/Core>
#include <functional>
#include <string>
#include <vector>

#include "model/beam_fe.h"
#include "model/member.h"
#include "model/parameters.h"
#include "model/status.h"

namespace taut::model {

struct TransientOptions {
  int target_elements = 20;        // mesh density, see BuildMesh
  double output_rate_hz = 2000.0;  // samples per second of the result
  double duration_s = 10.0;        // length of the result (first sample at t = 0)
  int substeps = 1;                // integration steps per output interval (>= 1)
  double damping_ratio = 0.0;      // Rayleigh damping, ratio at modes 1 and 2
  // Fill TransientResult::energy_j (two extra dense products per sample;
  // NaN entries when off). Verification wants it, fitting does not.
  bool record_energy = false;
};

struct PointImpulse {
  double position_m = 0.0;  // 0 < x < L
  double impulse_ns = 0.0;  // transverse impulse [N s], positive up / right, applied at t = 0
};

struct PointForce {
  double position_m = 0.0;
  std::function<double(double t_s)> force_n;  // transverse force [N] in time
};

struct TransientLoads {
  // Initial dynamic displacement and velocity on the free DOFs (relative to
  // the static state); empty = zero.
  Eigen::VectorXd initial_displacement;
  Eigen::VectorXd initial_velocity;
  std::vector<PointImpulse> impulses;
  std::vector<PointForce> forces;
  // Distributed transverse load q(x, t) [N/m] (optional; used by the
  // manufactured-solution verification). Costs a quadrature and one dense
  // product per step.
  std::function<double(double x_m, double t_s)> distributed;
  // Called at every output sample with t and the total w on the free DOFs
  // (measured from the straight line), when set. For verification.
  std::function<void(double t_s, const Eigen::VectorXd& w)> observer;
};

struct TransientResult {
  double sample_rate_hz = 0.0;
  std::vector<std::string> channels;  // sensors in the plane, member order
  // Rows = samples (t = k / sample_rate_hz), cols = channels.
  Eigen::MatrixXd acceleration_m_s2;
  Eigen::MatrixXd displacement_m;  // dynamic part, relative to the static state
  Eigen::VectorXd axial_force_n;   // N(t) per sample
  Eigen::VectorXd energy_j;        // E - E_static per sample (record_energy; else NaN)
  Eigen::VectorXd midspan_m;       // dynamic w at mid-span per sample (interpolated)
  int steps = 0;                   // integration steps taken
  int halvings = 0;                // steps that had to be split
  int newton_iterations = 0;       // scalar Newton iterations in all
};

// The quasi-static-axial model of one member in one plane for one parameter
// set. Construct, then Run() any number of load cases (const, thread-safe).
class TransientModel {
 public:
  // Precondition: ValidateMember(member).ok(). Check status() after
  // construction: kBuckled when K + N_s G is not positive definite,
  // kInvalidArgument for bad parameters or options.
  TransientModel(const Member& member, Direction direction, const ModalParameters& params,
                 TransientOptions options = {});

  const Status& status() const { return status_; }
  const Mesh& mesh() const { return mesh_; }

  // Free-DOF displacement of linear mode `order` (1-based, from the tangent
  // modal analysis at the same parameters) scaled so that its largest |w|
  // along the member is amplitude_m. Empty vector when the mode cannot be
  // computed.
  Eigen::VectorXd ModeShape(int order, double amplitude_m) const;

  // Vibration energy E(w_s + w_dyn, v) - E(w_s, 0) [J].
  double Energy(const Eigen::VectorXd& w_dyn, const Eigen::VectorXd& v) const;

  // Integrates from t = 0 over options.duration_s.
  Status Run(const TransientLoads& loads, TransientResult* result) const;

  // Static sag at the node nearest mid-span [m, > 0 down].
  double sag_midspan_m() const { return sag_midspan_m_; }
  const ResolvedParameters& resolved() const { return resolved_; }

 private:
  Member member_;
  Direction direction_;
  ModalParameters params_;
  TransientOptions options_;
  Status status_;
  Mesh mesh_;
  BeamMatrices matrices_;
  ResolvedParameters resolved_;
  SparseMatrix K_;       // EI K_b + springs
  SparseMatrix C_;       // Rayleigh damping
  Eigen::VectorXd f_g_;  // self-weight load
  Eigen::VectorXd w_s_;  // static state
  double e_s_ = 0.0;     // (1/2) w_s^T G w_s
  double sag_midspan_m_ = 0.0;
  double v_static_ = 0.0;  // V(w_s)
};

}  // namespace taut::model
