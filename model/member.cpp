#include "model/member.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <numbers>
#include <sstream>

namespace taut::model {

const char* ToString(Direction d) { return d == Direction::kVertical ? "vertical" : "lateral"; }

double Section::Area() const {
  switch (shape) {
    case Shape::kCircle:
      return std::numbers::pi * diameter_m * diameter_m / 4.0;
    case Shape::kRectangle:
      return width_m * depth_m;
    case Shape::kGeneral:
      return area_m2;
  }
  return 0.0;
}

double Section::SecondMoment(Direction d) const {
  switch (shape) {
    case Shape::kCircle:
      return std::numbers::pi * std::pow(diameter_m, 4) / 64.0;
    case Shape::kRectangle:
      return d == Direction::kVertical ? width_m * std::pow(depth_m, 3) / 12.0
                                       : depth_m * std::pow(width_m, 3) / 12.0;
    case Shape::kGeneral:
      return second_moment_m4;
  }
  return 0.0;
}

double Member::MassPerLength_kg_m() const { return density_kg_m3 * section.Area(); }

double Member::NominalBendingStiffness_nm2(Direction d) const {
  return elastic_modulus_pa * section.SecondMoment(d);
}

double Member::AxialRigidity_n() const { return elastic_modulus_pa * section.Area(); }

double Member::Slenderness(Direction d) const {
  const double a = section.Area();
  const double i = section.SecondMoment(d);
  if (a <= 0.0 || i <= 0.0) return 0.0;
  return length_m / std::sqrt(i / a);
}

int Member::SensorCount(Direction d) const {
  int n = 0;
  for (const Sensor& s : sensors) n += (s.direction == d);
  return n;
}

Direction Member::MajorityPlane() const {
  return SensorCount(Direction::kLateral) > SensorCount(Direction::kVertical) ? Direction::kLateral
                                                                              : Direction::kVertical;
}

namespace {

bool PositiveFinite(double v) { return std::isfinite(v) && v > 0.0; }

Status Bad(const std::string& field, double value, const std::string& rule) {
  std::ostringstream os;
  os << field << " = " << value << ": " << rule;
  return Status::InvalidArgument(os.str());
}

}  // namespace

Status ValidateMember(const Member& m) {
  if (!PositiveFinite(m.length_m)) return Bad("length_m", m.length_m, "must be > 0");
  if (!(m.inclination_deg >= 0.0 && m.inclination_deg <= 90.0)) {
    return Bad("inclination_deg", m.inclination_deg, "must be in [0, 90]");
  }
  if (!PositiveFinite(m.section.Area())) return Bad("section area", m.section.Area(), "must be > 0");
  for (Direction d : {Direction::kVertical, Direction::kLateral}) {
    if (!PositiveFinite(m.section.SecondMoment(d))) {
      return Bad("section second moment", m.section.SecondMoment(d), "must be > 0");
    }
  }
  if (!PositiveFinite(m.elastic_modulus_pa)) {
    return Bad("material.elastic_modulus_pa", m.elastic_modulus_pa, "must be > 0");
  }
  if (!PositiveFinite(m.density_kg_m3)) {
    return Bad("material.density_kg_m3", m.density_kg_m3, "must be > 0");
  }
  for (const RotationEnd* e : {&m.left, &m.right}) {
    if (e->kind == RotationEnd::Kind::kSpring && !PositiveFinite(e->stiffness_nm_per_rad)) {
      return Bad(e == &m.left ? "ends.left.rotation.stiffness_nm_per_rad"
                              : "ends.right.rotation.stiffness_nm_per_rad",
                 e->stiffness_nm_per_rad, "must be > 0");
    }
  }
  if (m.axial.kind == AxialEnds::Kind::kSpring && !PositiveFinite(m.axial.stiffness_n_per_m)) {
    return Bad("ends.axial.stiffness_n_per_m", m.axial.stiffness_n_per_m, "must be > 0");
  }
  for (size_t i = 0; i < m.sensors.size(); ++i) {
    const Sensor& s = m.sensors[i];
    const std::string at = "sensors[" + std::to_string(i) + "]";
    if (!(s.position_m > 0.0 && s.position_m < m.length_m)) {
      return Bad(at + ".position_m", s.position_m,
                 "must lie strictly inside the span (0, " + std::to_string(m.length_m) + ")");
    }
    if (!(std::isfinite(s.mass_kg) && s.mass_kg >= 0.0)) {
      return Bad(at + ".mass_kg", s.mass_kg, "must be >= 0");
    }
  }
  // Tolerances: declared values only (the defaults are within the rule).
  for (const ResolvedTolerance& t : ResolveTolerances(m)) {
    if (!(std::isfinite(t.std) && t.std >= 0.0)) return Bad(t.key, t.std, "must be >= 0");
    const double of = t.kind == ResolvedTolerance::Kind::kSensorPosition ? m.length_m : t.nominal;
    if (t.std > kMaxToleranceShare * of) {
      return Bad(t.key, t.std,
                 "must be at most " + std::to_string(kMaxToleranceShare) + " of " +
                     (t.kind == ResolvedTolerance::Kind::kSensorPosition ? "the length" : "its value") +
                     " (" + std::to_string(of) + ")");
    }
  }
  return Status::Ok();
}

std::vector<ResolvedTolerance> ResolveTolerances(const Member& m) {
  using Kind = ResolvedTolerance::Kind;
  std::vector<ResolvedTolerance> out;
  const auto add = [&](Kind kind, const std::string& key, double nominal,
                       const std::optional<double>& declared, double fallback, int sensor = -1) {
    ResolvedTolerance t;
    t.kind = kind;
    t.sensor = sensor;
    t.key = key;
    t.nominal = nominal;
    t.std = declared.value_or(fallback);
    t.is_default = !declared.has_value();
    out.push_back(t);
  };
  const Tolerances& tol = m.tolerances;
  add(Kind::kLength, "length_tolerance_m", m.length_m, tol.length_m,
      std::max(kDefaultLengthToleranceMin_m, kDefaultLengthToleranceShare * m.length_m));
  switch (m.section.shape) {
    case Section::Shape::kCircle:
      add(Kind::kDiameter, "section.dimension_tolerance_m", m.section.diameter_m, tol.section_dimension_m,
          kDefaultDimensionToleranceShare * m.section.diameter_m);
      break;
    case Section::Shape::kRectangle:
      // One declared tolerance for both dimensions; the default is a share of each.
      add(Kind::kWidth, "section.dimension_tolerance_m", m.section.width_m, tol.section_dimension_m,
          kDefaultDimensionToleranceShare * m.section.width_m);
      add(Kind::kDepth, "section.dimension_tolerance_m", m.section.depth_m, tol.section_dimension_m,
          kDefaultDimensionToleranceShare * m.section.depth_m);
      break;
    case Section::Shape::kGeneral:
      add(Kind::kArea, "section.area_tolerance_m2", m.section.area_m2, tol.section_area_m2,
          kDefaultAreaToleranceShare * m.section.area_m2);
      add(Kind::kSecondMoment, "section.second_moment_tolerance_m4", m.section.second_moment_m4,
          tol.section_second_moment_m4, kDefaultSecondMomentToleranceShare * m.section.second_moment_m4);
      break;
  }
  add(Kind::kElasticModulus, "material.elastic_modulus_tolerance_pa", m.elastic_modulus_pa,
      tol.elastic_modulus_pa, kDefaultElasticModulusToleranceShare * m.elastic_modulus_pa);
  add(Kind::kDensity, "material.density_tolerance_kg_m3", m.density_kg_m3, tol.density_kg_m3,
      kDefaultDensityToleranceShare * m.density_kg_m3);
  for (size_t i = 0; i < m.sensors.size(); ++i) {
    add(Kind::kSensorPosition, "sensors[" + std::to_string(i) + "].position_tolerance_m",
        m.sensors[i].position_m, m.sensors[i].position_tolerance_m, kDefaultPositionTolerance_m,
        static_cast<int>(i));
  }
  return out;
}

void DeclareMeasuredPrecisely(Member* m) {
  m->tolerances = Tolerances{0.0, 0.0, 0.0, 0.0, 0.0, 0.0};
  for (Sensor& s : m->sensors) s.position_tolerance_m = 0.0;
}

Member PerturbMember(const Member& member, const ResolvedTolerance& t, double delta) {
  using Kind = ResolvedTolerance::Kind;
  Member m = member;
  switch (t.kind) {
    case Kind::kLength: {
      const double scale = (m.length_m + delta) / m.length_m;
      m.length_m += delta;
      for (Sensor& s : m.sensors) s.position_m *= scale;
      break;
    }
    case Kind::kDiameter:
      m.section.diameter_m += delta;
      break;
    case Kind::kWidth:
      m.section.width_m += delta;
      break;
    case Kind::kDepth:
      m.section.depth_m += delta;
      break;
    case Kind::kArea:
      m.section.area_m2 += delta;
      break;
    case Kind::kSecondMoment:
      m.section.second_moment_m4 += delta;
      break;
    case Kind::kElasticModulus:
      m.elastic_modulus_pa += delta;
      break;
    case Kind::kDensity:
      m.density_kg_m3 += delta;
      break;
    case Kind::kSensorPosition:
      if (t.sensor >= 0 && t.sensor < static_cast<int>(m.sensors.size()))
        m.sensors[t.sensor].position_m += delta;
      break;
  }
  return m;
}

double FixityFromStiffness(double k, double ei, double length) {
  if (std::isinf(k)) return 1.0;
  if (k <= 0.0) return 0.0;
  return 1.0 / (1.0 + 3.0 * ei / (k * length));
}

double StiffnessFromFixity(double r, double ei, double length) {
  if (r <= 0.0) return 0.0;
  const double gap = std::max(1.0 - r, kMaxFixityGap);
  return 3.0 * ei * (1.0 - gap) / (length * gap);
}

}  // namespace taut::model
