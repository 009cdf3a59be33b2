#include "model/parameters.h"

#include <cmath>
#include <numbers>
#include <string>

namespace taut::model {

namespace {

double ResolveFixity(const std::optional<double>& override_r, const RotationEnd& end, double ei,
                     double length, double* k) {
  double r = 0.0;
  if (override_r) {
    r = *override_r;
    *k = StiffnessFromFixity(r, ei, length);
    return r;
  }
  switch (end.kind) {
    case RotationEnd::Kind::kPinned:
      r = 0.0;
      break;
    case RotationEnd::Kind::kClamped:
      r = 1.0;
      break;
    case RotationEnd::Kind::kElastic:
      r = kDefaultElasticFixity;
      break;
    case RotationEnd::Kind::kSpring:
      *k = end.stiffness_nm_per_rad;
      return FixityFromStiffness(end.stiffness_nm_per_rad, ei, length);
  }
  *k = StiffnessFromFixity(r, ei, length);
  return r;
}

// Springs in series: 1/k = L/EA + 1/k_support; k_support = +inf is a rigid
// support, 0 a free end.
double SeriesAxialStiffness(double ea_over_l, double k_support) {
  if (std::isinf(k_support)) return ea_over_l;
  if (k_support <= 0.0) return 0.0;
  return 1.0 / (1.0 / ea_over_l + 1.0 / k_support);
}

}  // namespace

Status ResolveParameters(const Member& member, Direction direction, const ModalParameters& p,
                         ResolvedParameters* out) {
  const double length = member.length_m;
  out->ei_nm2 = p.bending_stiffness_nm2.value_or(member.NominalBendingStiffness_nm2(direction));
  if (!(std::isfinite(out->ei_nm2) && out->ei_nm2 > 0.0)) {
    return Status::InvalidArgument("bending stiffness EI = " + std::to_string(out->ei_nm2) +
                                   " N m^2: must be > 0");
  }
  if (!std::isfinite(p.axial_force_n)) return Status::InvalidArgument("axial force must be finite");
  for (const auto* r : {&p.fixity_left, &p.fixity_right}) {
    if (*r && !(**r >= 0.0 && **r <= 1.0)) {
      return Status::InvalidArgument(std::string(r == &p.fixity_left ? "fixity_left" : "fixity_right") +
                                     " = " + std::to_string(**r) + ": must be in [0, 1]");
    }
  }
  if (p.axial_support_stiffness_n_per_m && !(*p.axial_support_stiffness_n_per_m >= 0.0)) {
    return Status::InvalidArgument("axial support stiffness = " +
                                   std::to_string(*p.axial_support_stiffness_n_per_m) + " N/m: must be >= 0");
  }
  out->fixity_left = ResolveFixity(p.fixity_left, member.left, out->ei_nm2, length, &out->k_left_nm_per_rad);
  out->fixity_right =
      ResolveFixity(p.fixity_right, member.right, out->ei_nm2, length, &out->k_right_nm_per_rad);

  if (p.axial_rigidity_n && !(std::isfinite(*p.axial_rigidity_n) && *p.axial_rigidity_n > 0.0)) {
    return Status::InvalidArgument("axial rigidity EA = " + std::to_string(*p.axial_rigidity_n) +
                                   " N: must be > 0");
  }
  const double ea_over_l = p.axial_rigidity_n.value_or(member.AxialRigidity_n()) / length;
  out->k_axial_n_per_m = 0.0;
  if (p.axial_support_stiffness_n_per_m) {
    out->k_axial_n_per_m = SeriesAxialStiffness(ea_over_l, *p.axial_support_stiffness_n_per_m);
  } else if (member.axial.kind == AxialEnds::Kind::kFixed) {
    out->k_axial_n_per_m = ea_over_l;
  } else if (member.axial.kind == AxialEnds::Kind::kSpring) {
    out->k_axial_n_per_m = SeriesAxialStiffness(ea_over_l, member.axial.stiffness_n_per_m);
  }
  out->gravity_normal_m_s2 =
      direction == Direction::kVertical
          ? p.gravity_m_s2 * std::cos(member.inclination_deg * std::numbers::pi / 180.0)
          : 0.0;
  return Status::Ok();
}

}  // namespace taut::model
