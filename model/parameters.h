// The parameters a forward model run takes (axial force, bending stiffness,
// end restraint, axial support, gravity) and their resolution against the
// member's declared ends. Shared by the modal (modal.h) and transient
// (transient.h) models.
#pragma once

#include <optional>

#include "model/member.h"
#include "model/status.h"

namespace taut::model {

// The quantities the estimation varies. Unset optionals take the member's
// declared values (see ResolveParameters).
struct ModalParameters {
  double axial_force_n = 0.0;                   // N, tension > 0
  std::optional<double> bending_stiffness_nm2;  // EI > 0; default nominal E I
  // Fixity factors r in [0, 1] (member.h). When set they override the
  // declared end; when unset: pinned 0, clamped 1, known spring from its
  // stiffness, elastic kDefaultElasticFixity.
  std::optional<double> fixity_left;
  std::optional<double> fixity_right;
  // Series axial stiffness of the supports [N/m], overriding ends.axial
  // (identify may estimate it). +inf = fixed, 0 = free.
  std::optional<double> axial_support_stiffness_n_per_m;
  // Axial rigidity EA [N] of the member itself, overriding the member's
  // E A (identify takes it from the fitted E = EI / I_nominal, issue 12).
  // Enters only the series axial stiffness k_axial (sag and stretching).
  std::optional<double> axial_rigidity_n;
  // Standard gravity [m/s^2]; 0 switches the sag coupling off.
  double gravity_m_s2 = 9.80665;
};

inline constexpr double kDefaultElasticFixity = 0.5;

// Parameters resolved to the numbers the element matrices need.
struct ResolvedParameters {
  double ei_nm2 = 0.0;       // EI used
  double fixity_left = 0.0;  // r of each end as used, in [0, 1]
  double fixity_right = 0.0;
  double k_left_nm_per_rad = 0.0;  // rotational springs (clamp: 3e9 EI/L)
  double k_right_nm_per_rad = 0.0;
  // Series axial stiffness of member and supports, k_ax = 1/(L/EA + 1/k_s)
  // [N/m]: what resists the member's length change (EA/L for `fixed`, 0 for
  // `free`). Independent of the plane: large-amplitude stretching acts in
  // both planes; only the sag term is confined to the vertical one.
  double k_axial_n_per_m = 0.0;
  // Gravity component normal to the member in the analysed plane [m/s^2]:
  // g cos(inclination) for vertical vibration, 0 for lateral.
  double gravity_normal_m_s2 = 0.0;
};

// Validates `params` (EI > 0 and finite, fixities in [0, 1], finite N) and
// resolves them against `member`. Errors: kInvalidArgument naming the value.
Status ResolveParameters(const Member& member, Direction direction, const ModalParameters& params,
                         ResolvedParameters* out);

}  // namespace taut::model
