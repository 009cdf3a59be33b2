// Euler-Bernoulli beam finite elements: mesh, Hermite cubic element matrices
// and their assembly into the global matrices used by the modal analysis
// (modal.h) and, later, the nonlinear transient model.
//
// Degrees of freedom. Each node i carries the transverse displacement w_i [m]
// and the rotation theta_i = dw/dx [rad], interleaved as (w_0, theta_0, w_1,
// theta_1, ...). The ends are transversely fixed (w_0 = w_{n-1} = 0) and those
// two DOFs are removed; every rotation is kept, clamped ends included (a
// clamp is a stiff rotational spring, see member.h StiffnessFromFixity), so
// the sparsity pattern does not depend on the end conditions. The free DOF
// vector is therefore (theta_0, w_1, theta_1, ..., w_{n-2}, theta_{n-2},
// theta_{n-1}) of size 2n - 2.
//
// Element matrices on an element of length h with the Hermite shape
// functions N(x) of w (Przemieniecki, Theory of Matrix Structural Analysis,
// 1968, ch. 5 and 11; Cook et al., Concepts and Applications of FEA, 4th ed.,
// 2002, eqs. 2.3-5, 11.3-5, 18.3-3), element DOF order (w_a, theta_a, w_b,
// theta_b):
//   bending    K_b = EI int N''^T N'' dx = EI/h^3 [12 6h -12 6h; ...]
//   geometric  G   =    int N'^T  N'  dx = 1/(30h) [36 3h -36 3h; ...]
//   mass       M   =  m int N^T   N   dx = m h/420 [156 22h 54 -13h; ...]
//   load       f   =  q int N^T      dx = q h/12 [6 h 6 -h]
// The tangent stiffness about a straight member with axial force N is
// EI K_b + N G; rotational end springs add k to the theta diagonal.
#pragma once

#include <Eigen/Core>
#include <Eigen/SparseCore>
#include <functional>
#include <vector>

#include "model/member.h"

namespace taut::model {

using SparseMatrix = Eigen::SparseMatrix<double, Eigen::ColMajor, int>;

struct Mesh {
  std::vector<double> x_m;       // node positions, strictly increasing, x_m[0] = 0, back() = L
  std::vector<int> sensor_node;  // node index of member.sensors[i]
  int Elements() const { return static_cast<int>(x_m.size()) - 1; }
  int Nodes() const { return static_cast<int>(x_m.size()); }
  // Size of the free DOF vector, 2 * Nodes() - 2.
  int FreeDofs() const { return 2 * Nodes() - 2; }
};

// Places nodes at both ends and at every sensor position (sensors closer
// than 1e-9 L share a node) and subdivides each interval between them into
// max(1, round(length / (L / target_elements))) equal elements.
// Precondition: ValidateMember(member).ok(), target_elements >= 1.
Mesh BuildMesh(const Member& member, int target_elements);

// Index of node i's w (or theta) in the free DOF vector, or -1 for the two
// removed end displacements.
inline int WDof(int node, int nodes) { return (node == 0 || node == nodes - 1) ? -1 : 2 * node - 1; }
inline int ThetaDof(int node, int nodes) {
  return node == 0 ? 0 : (node == nodes - 1 ? 2 * node - 1 : 2 * node);
}

// Element matrices for unit EI, unit N, unit m and unit q (see the file
// comment), element DOF order (w_a, theta_a, w_b, theta_b). h > 0.
Eigen::Matrix4d HermiteBendingStiffness(double h_m);
Eigen::Matrix4d HermiteGeometricStiffness(double h_m);
Eigen::Matrix4d HermiteMass(double h_m);
Eigen::Vector4d HermiteUniformLoad(double h_m);

// Global matrices on the free DOFs, each with the same sparsity pattern
// (lower and upper triangles stored), so that linear combinations of them
// keep one pattern and one symbolic factorisation.
struct BeamMatrices {
  SparseMatrix K_b;      // bending stiffness for EI = 1 [1/m^3 ... per DOF pair]
  SparseMatrix G;        // geometric stiffness for N = 1
  SparseMatrix M;        // consistent mass [kg], sensor point masses included
  SparseMatrix S_left;   // unit rotational spring at theta_0 (pattern-complete)
  SparseMatrix S_right;  // unit rotational spring at theta_{n-1}
  // Work-equivalent nodal load of the member's self-weight per unit
  // gravity component [N per (m/s^2)]: consistent load of m plus the sensor
  // point masses, pointing in -w (downwards). Multiply by g cos(inclination).
  Eigen::VectorXd weight;
};

BeamMatrices AssembleBeam(const Member& member, const Mesh& mesh);

// Work-equivalent free-DOF load vector of a unit transverse point force at
// x_m (0 <= x_m <= L): the Hermite shape functions of the element holding
// x_m evaluated there, N = (1 - 3s^2 + 2s^3, h(s - 2s^2 + s^3), 3s^2 - 2s^3,
// h(s^3 - s^2)) with s = (x - x_a)/h (Cook et al. 2002, eq. 2.3-4).
Eigen::VectorXd PointLoadVector(const Mesh& mesh, double x_m);

// Work-equivalent free-DOF load vector of a distributed transverse load
// q(x) [N/m]: int q N dx per element by 5-point Gauss-Legendre quadrature.
Eigen::VectorXd DistributedLoadVector(const Mesh& mesh, const std::function<double(double x_m)>& q);

// Interpolated w at x_m from the free-DOF vector `q` (same shape functions).
double InterpolateW(const Mesh& mesh, const Eigen::VectorXd& q, double x_m);

}  // namespace taut::model
