// The full u-w von Karman beam with axial inertia: the verification form of
// the nonlinear model (transient.h holds the quasi-static-axial form used for
// fitting). Both share the Hermite element library of beam_fe.h for w.
//
// Kinematics (von Karman): membrane strain e = u' + w'^2 / 2 + e_0, with
// e_0 = N_0 / EA a prestrain that carries the preload N_0 between axially
// immovable ends; bending curvature w''. Potential and kinetic energy
//   V = int [ (1/2) EI w''^2 + (1/2) EA e^2 ] dx + (k_l theta_0^2 + k_r theta_L^2)/2 - int q w dx,
//   T = int (1/2) m (u_t^2 + w_t^2) dx.
// Discretisation: Hermite cubics for w (beam_fe.h), quadratic Lagrange
// elements for u (end nodes shared, one interior node per element), so u'
// is linear and the membrane strain is represented with one polynomial
// degree more than linear u would give (less membrane locking). The
// membrane energy is integrated with 5-point Gauss-Legendre quadrature,
// exact for the degree-8 integrand e^2.
// Supports: w = 0 and u = 0 at both ends (axially immovable), rotational
// springs as in parameters.h. (Axial springs and free ends exist only in
// the quasi-static form; this form verifies it.)
//
// Time integration: implicit midpoint with the discrete gradient of the
// membrane energy, EA e_bar grad e(q_mid) with e_bar the mean of the strains
// at the two ends of the step; exact because e is quadratic in q, so the
// discrete energy is conserved (Gonzalez 1996). Newton iterations with the
// exact (non-symmetric) Jacobian, sparse LU.
#pragma once

#include <Eigen/Core>
#include <functional>

#include "model/beam_fe.h"
#include "model/member.h"
#include "model/parameters.h"
#include "model/status.h"

namespace taut::model {

// Distributed loads per unit length [N/m] at (x, t): transverse and axial.
using BodyForce = std::function<void(double x_m, double t_s, double* q_w, double* q_u)>;

class FullVonKarman {
 public:
  // `params`: axial_force_n is the preload N_0 of the straight member
  // (gravity is not applied by this verification form; give it as a body
  // force). Precondition: ValidateMember(member).ok(), elements >= 1.
  FullVonKarman(const Member& member, Direction direction, const ModalParameters& params, int elements);

  const Status& status() const { return status_; }
  const Mesh& mesh() const { return mesh_; }

  // DOF vector q = (free w DOFs of beam_fe.h, then u DOFs). u DOFs: the
  // interior end nodes 1..n-2 and one mid node per element, u at the two
  // ends being zero. Size Dofs().
  int Dofs() const { return nw_ + nu_; }
  int WDofs() const { return nw_; }

  // Sets q from functions w(x), w'(x), u(x) (Hermite interpolation of w,
  // nodal interpolation of u).
  Eigen::VectorXd Interpolate(const std::function<double(double)>& w, const std::function<double(double)>& dw,
                              const std::function<double(double)>& u) const;

  // One step of size h from (q, v) at time t under `force` (may be empty).
  // Returns kNumerical when Newton does not converge; q, v unchanged then.
  Status Step(double h, double t, const BodyForce& force, Eigen::VectorXd* q, Eigen::VectorXd* v,
              int* newton_iterations = nullptr) const;

  // E = T + V (body force work excluded).
  double Energy(const Eigen::VectorXd& q, const Eigen::VectorXd& v) const;

  // Mean axial force (1/L) int EA e dx [N].
  double MeanAxialForce(const Eigen::VectorXd& q) const;

  // L2 norm over the member of w_h - w_exact(x) [m * sqrt(m)], 5-point
  // Gauss per element.
  double WErrorL2(const Eigen::VectorXd& q, const std::function<double(double)>& w_exact) const;

  // w at x from q (Hermite interpolation).
  double W(const Eigen::VectorXd& q, double x_m) const;

 private:
  // Element DOF maps: 4 w DOFs (beam_fe order) and 3 u DOFs (a, mid, b);
  // -1 marks a constrained DOF.
  void ElementDofs(int e, int w_dofs[4], int u_dofs[3]) const;
  Eigen::VectorXd LoadVector(double t, const BodyForce& force) const;
  // int f(e(x)) dx over the member, e the membrane strain of q, by the
  // 5-point Gauss rule per element.
  double IntegrateStrain(const Eigen::VectorXd& q, const std::function<double(double)>& f) const;

  Member member_;
  Status status_;
  Mesh mesh_;
  int nw_ = 0, nu_ = 0;
  double ei_ = 0.0, ea_ = 0.0, mass_ = 0.0, prestrain_ = 0.0;
  SparseMatrix M_;  // transverse and axial consistent mass
  SparseMatrix K_;  // bending stiffness and rotational springs (linear part)
};

}  // namespace taut::model
