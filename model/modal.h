// Tangent modal analysis of a member: the lowest bending frequencies and
// mode shapes in one plane, about the static state under axial force and
// (for vertical vibration) self-weight sag.
//
// Equation solved (generalised symmetric eigenproblem on the free DOFs of
// beam_fe.h):
//   K_T phi = omega^2 M phi,
//   K_T = EI K_b + N G + k_l S_l + k_r S_r + k_ax g g^T,
// with
//   N    axial force [N], tension > 0 (the force in the member in its
//        static, sagged state: it is the unknown the estimation seeks),
//   k_l, k_r  rotational end springs [N m/rad] from the fixity factors,
//   g = G w_s  the work-equivalent of the static sag slope w_s', where w_s
//        solves (EI K_b + N G + k_l S_l + k_r S_r) w_s = f_weight g cos(theta),
//   k_ax = 1 / (L/EA + 1/k_support)  the series axial stiffness of member
//        and supports (EA/L for `fixed` ends, 0 for `free`).
// The rank-one term is the linearised membrane stretching about the sagged
// state (the beam form of Irvine and Caughey, 1974): the extra tension of a
// vibration delta is k_ax * (1/2) d/d(delta) int (w_s' + delta')^2 dx
// = k_ax g^T delta. It stiffens the symmetric vertical modes and leaves the
// lateral ones alone (lateral vibration uses k_ax = 0).
//
// The lowest modes are found by shift-invert Lanczos (Spectra) with shift 0
// on the banded LDL^T factor of K_0 = K_T - k_ax g g^T and the rank-one term
// applied by the Sherman-Morrison formula, so a solve costs O(n) rather than
// the O(n^3) of a dense decomposition. The pencil is brought to standard
// form with the banded Cholesky factor M = L L^T (computed once per model):
// the operator is L^T K_T^{-1} L, whose eigenvalues are 1/omega^2 and whose
// orthonormal eigenvectors y give phi = L^{-T} y with phi^T M phi = 1
// (Parlett, The Symmetric Eigenvalue Problem, 1998, sec. 15.2). Unlike the
// generalised Lanczos it needs no M-inner products, which cost most of a
// solve (two sparse products per Lanczos step). Positive definiteness of K_0 (all
// pivots of the LDL^T factor > 0) is the stability check: a member at or
// beyond its buckling load returns Status::kBuckled, never NaN frequencies.
#pragma once

#include <Eigen/Core>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "model/beam_fe.h"
#include "model/member.h"
#include "model/parameters.h"
#include "model/status.h"

namespace taut::model {

struct ModalOptions {
  int target_elements = 40;  // mesh density, see BuildMesh
};

struct Mode {
  int order = 0;              // 1 = lowest frequency in the plane
  double frequency_hz = 0.0;  // f = omega / (2 pi)
  double eigenvalue = 0.0;    // omega^2 [rad^2/s^2]
  // w at the sensors of the analysed plane, in the order of
  // ModalResult::channels, from the mass-normalised vector (phi^T M phi = 1,
  // units 1/sqrt(kg)); sign chosen so that the largest |w| along the member
  // is positive.
  std::vector<double> shape_at_sensors;
  Eigen::VectorXd w_nodes;  // w at every mesh node (zeros at the ends), same normalisation
  Eigen::VectorXd dofs;     // the whole vector on the free DOFs (beam_fe.h order), same normalisation
};

struct ModalResult {
  Direction direction = Direction::kVertical;
  std::vector<std::string> channels;  // sensors in the plane, member order
  std::vector<int> sensor_index;      // their indices in member.sensors
  std::vector<double> node_x_m;       // mesh node positions
  std::vector<Mode> modes;            // ascending frequency
  double sag_midspan_m = 0.0;         // static sag at the node nearest mid-span (>0 down)
  double fixity_left = 0.0;           // as resolved and used
  double fixity_right = 0.0;
  double bending_stiffness_nm2 = 0.0;
};

// The model of one member in one plane, with the mesh and unit matrices
// assembled once; Solve() can then be called many times (the estimation
// does) at the cost of one sparse factorisation and a few Lanczos steps.
// Solve() is const and keeps no mutable state: one ModalModel may be shared
// by threads.
class ModalModel {
 public:
  // Precondition: ValidateMember(member).ok(). The member is copied.
  ModalModel(const Member& member, Direction direction, ModalOptions options = {});

  // Computes the lowest `num_modes` modes (1 <= num_modes <= DOFs / 2).
  // Errors: kInvalidArgument for EI <= 0, fixity outside [0, 1] or a bad
  // num_modes; kBuckled when K_0 is not positive definite; kNumerical when
  // the eigen-solver does not converge.
  Status Solve(const ModalParameters& params, int num_modes, ModalResult* result) const;
  // As above, with the Lanczos iteration started from the modes of `near`
  // (a result of this model at nearby parameters, e.g. the previous point
  // of a fit; null = the default start). The modes agree with those of a
  // cold start to the solver tolerance; a near start saves restarts.
  Status Solve(const ModalParameters& params, int num_modes, ModalResult* result,
               const ModalResult* near) const;

  // Critical compression [N, > 0]: the smallest P for which
  // EI K_b + k_l S_l + k_r S_r - P G is singular (Euler load of the member
  // with its end springs, sag ignored). Same parameter resolution as Solve.
  Status CriticalCompression(const ModalParameters& params, double* n_cr) const;

  const Mesh& mesh() const { return mesh_; }
  const Member& member() const { return member_; }
  Direction direction() const { return direction_; }

 private:
  Member member_;
  Direction direction_;
  Mesh mesh_;
  BeamMatrices matrices_;
  // The unit matrices as bands and the Cholesky factor of M (modal.cpp);
  // immutable after construction, shared by copies.
  struct Bands;
  std::shared_ptr<const Bands> bands_;
};

// One-shot convenience: builds a ModalModel and solves it.
Status ComputeModes(const Member& member, Direction direction, const ModalParameters& params, int num_modes,
                    ModalResult* result, ModalOptions options = {});

}  // namespace taut::model
