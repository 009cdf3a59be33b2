// The member description: geometry, section, material, end conditions and
// sensors of one slender member (tie-rod, hanger, truss diagonal, strut).
//
// This is the in-memory form of the docs/FORMATS.md section 1 JSON document; the
// JSON mapping and its validation live in server/member_json.h. model/ only
// states the preconditions its functions need (see ValidateMember).
//
// Units: SI throughout, suffix on every field. Coordinates: x runs along the
// member from the left end (x = 0) to the right end (x = length_m). The
// transverse displacement w is positive upwards for vertical vibration and
// towards the observer's right-hand side for lateral vibration (the sign of a
// mode shape is a normalisation choice, see modal.h).
// Sign convention: axial force N is positive in tension.
#pragma once

#include <optional>
#include <string>
#include <vector>

#include "model/status.h"

namespace taut::model {

// Plane of the sensed vibration.
enum class Direction {
  kVertical,  // in the vertical plane containing the member: sag couples
  kLateral,   // out of that plane: no sag term
};

const char* ToString(Direction d);

struct Section {
  enum class Shape { kCircle, kRectangle, kGeneral };
  Shape shape = Shape::kCircle;
  double diameter_m = 0.0;        // kCircle
  double width_m = 0.0;           // kRectangle: out of the vertical plane
  double depth_m = 0.0;           // kRectangle: in the vertical plane
  double area_m2 = 0.0;           // kGeneral
  double second_moment_m4 = 0.0;  // kGeneral: same for both planes

  // Cross-section area A [m^2].
  double Area() const;
  // Second moment of area I [m^4] for bending in the plane `d`. For a
  // rectangle, depth_m is the dimension in the vertical plane (docs/FORMATS.md:
  // "in the plane of the sensed vibration"; when a member has sensors in
  // both planes, depth is taken in the vertical one), so
  // I_vertical = width depth^3 / 12 and I_lateral = depth width^3 / 12.
  double SecondMoment(Direction d) const;
};

// Rotational restraint of one end.
struct RotationEnd {
  enum class Kind {
    kPinned,   // no restraint
    kClamped,  // full restraint
    kElastic,  // unknown restraint, described by a fixity factor r in [0, 1]
    kSpring,   // known rotational spring of stiffness_nm_per_rad
  };
  Kind kind = Kind::kElastic;
  double stiffness_nm_per_rad = 0.0;  // kSpring only, > 0
};

// Axial restraint of the two ends together (what the member's length change
// works against when it stretches).
struct AxialEnds {
  enum class Kind {
    kFixed,   // immovable ends: the member's own EA/L resists stretching
    kFree,    // no membrane stretching: the axial force stays constant
    kSpring,  // supports of series stiffness stiffness_n_per_m
  };
  Kind kind = Kind::kFixed;
  double stiffness_n_per_m = 0.0;  // kSpring only, > 0
};

struct Sensor {
  std::string channel;      // column name in the record CSV
  double position_m = 0.0;  // from the left end, strictly inside (0, L)
  double mass_kg = 0.0;     // sensor and mount, a point mass
  Direction direction = Direction::kVertical;
  // Calibration as the field knows it (every field optional; default member
  // initializers keep brace-initialised sensors valid). The record reader
  // applies them: sensitivity to records in V or mV, polarity to every
  // record. They describe the instrument, not the member: changing them
  // changes no model quantity.
  std::string serial = {};                                    // "" = not given
  std::optional<double> sensitivity_mv_per_g = std::nullopt;  // > 0, mV per g (9.80665 m/s^2)
  std::string calibrated_on = {};                             // ISO 8601 date "YYYY-MM-DD", "" = not given
  int polarity = 1;  // +1, or -1: the sensor's axis points against w (docs/FORMATS.md section 1)
  // One standard deviation of position_m [m] (docs/FORMATS.md section 1);
  // unset: kDefaultPositionTolerance_m; 0: measured precisely.
  std::optional<double> position_tolerance_m = std::nullopt;
};

// What the engineer does not know exactly about the member (docs/FORMATS.md
// section 1, issue 17). Every value is ONE STANDARD DEVIATION of the
// declared quantity, in its unit; unset takes the default below
// (ResolveTolerances); an explicit 0 declares the quantity measured
// precisely. The estimation propagates them into the intervals
// (estimation/tolerance_budget.h).
struct Tolerances {
  std::optional<double> length_m;                  // of length_m
  std::optional<double> section_dimension_m;       // of each dimension of a circle or rectangle
  std::optional<double> section_area_m2;           // general section: of area_m2
  std::optional<double> section_second_moment_m4;  // general section: of second_moment_m4
  std::optional<double> elastic_modulus_pa;        // of material.elastic_modulus_pa
  std::optional<double> density_kg_m3;             // of material.density_kg_m3
};

// Defaults when a tolerance is absent. Values of common practice, recalled
// (not taken from a published table or a code):
//  - length: a free length between anchor plates or pin centres is rarely
//    known better than about a centimetre (tape, and where a fixing's free
//    length really starts), and about 0.2 % on long members read from
//    drawings: std = max(0.01 m, 0.002 L);
//  - section dimensions: 0.5 % of each dimension (the order of rolling
//    tolerances of hot-rolled bar and flat); general sections 1 % of the
//    area and 2 % of the second moment;
//  - elastic modulus: 5 % (structural steels 195-210 GPa; wrought and cast
//    iron scatter far more: declare a larger value for them);
//  - density: 1 % (steels 7800-7870 kg/m3; wrought iron with slag lower);
//  - sensor position: 0.02 m (a mount placed by tape on site).
inline constexpr double kDefaultLengthToleranceMin_m = 0.01;
inline constexpr double kDefaultLengthToleranceShare = 0.002;
inline constexpr double kDefaultDimensionToleranceShare = 0.005;
inline constexpr double kDefaultAreaToleranceShare = 0.01;
inline constexpr double kDefaultSecondMomentToleranceShare = 0.02;
inline constexpr double kDefaultElasticModulusToleranceShare = 0.05;
inline constexpr double kDefaultDensityToleranceShare = 0.01;
inline constexpr double kDefaultPositionTolerance_m = 0.02;
// A tolerance is at most this share of its quantity (of the length for a
// sensor position): beyond it the linearised propagation does not hold and
// the description is better re-measured than declared so uncertain.
inline constexpr double kMaxToleranceShare = 0.1;

struct Member {
  std::string id;
  double length_m = 0.0;         // free length between the end supports
  double inclination_deg = 0.0;  // axis to the horizontal, 0..90
  Section section;
  double elastic_modulus_pa = 0.0;  // nominal E
  double density_kg_m3 = 0.0;
  // Yield (or proof) strength [Pa], optional: the plausibility bound of the
  // estimated stress |N| / A (estimation/refusal.h; a default by material
  // class applies when absent).
  std::optional<double> yield_strength_pa;
  RotationEnd left;
  RotationEnd right;
  AxialEnds axial;
  std::vector<Sensor> sensors;
  std::optional<double> design_axial_force_n;  // tension > 0
  Tolerances tolerances;                       // of the nominal values above

  // m = density A [kg/m].
  double MassPerLength_kg_m() const;
  // Nominal EI [N m^2] in the plane `d`, from E and the section.
  double NominalBendingStiffness_nm2(Direction d) const;
  // EA [N].
  double AxialRigidity_n() const;
  // Slenderness L / r_g with r_g = sqrt(I/A) in the plane `d`.
  double Slenderness(Direction d) const;
  // Number of sensors in the plane `d`.
  int SensorCount(Direction d) const;
  // The plane most of the sensors lie in (vertical on a tie, on a tie
  // between the planes, and when there are none).
  Direction MajorityPlane() const;
};

// One uncertain input of the member, resolved: its one-sigma tolerance as
// declared or by default. `key` is the JSON path of the tolerance in the
// member description (docs/FORMATS.md section 1), e.g. "length_tolerance_m"
// or "sensors[2].position_tolerance_m" (without "$.").
struct ResolvedTolerance {
  enum class Kind {
    kLength,
    kDiameter,      // circle
    kWidth,         // rectangle
    kDepth,         // rectangle
    kArea,          // general
    kSecondMoment,  // general
    kElasticModulus,
    kDensity,
    kSensorPosition,  // `sensor` is the index into Member::sensors
  };
  Kind kind = Kind::kLength;
  int sensor = -1;
  std::string key;
  double nominal = 0.0;  // the declared value the tolerance is of
  double std = 0.0;      // one standard deviation, same unit, >= 0
  bool is_default = false;
};

// Every uncertain input of `member` with its tolerance (declared or the
// default above), in the order of the Kind enumeration, sensors last.
// Precondition: ValidateMember(member).ok().
std::vector<ResolvedTolerance> ResolveTolerances(const Member& member);

// Declares every input of `member` measured precisely (all tolerances 0):
// for members whose description is exact by construction (simulated
// records in tests) or where the engineer has measured everything.
void DeclareMeasuredPrecisely(Member* member);

// `member` with the input `t` moved by `delta` (in the unit of t.nominal).
// A length change scales the sensor positions with it (sensors keep their
// share of the span; their own tolerances are separate entries).
Member PerturbMember(const Member& member, const ResolvedTolerance& t, double delta);

// Checks the preconditions every model function relies on (positive length,
// section and material, sensors strictly inside the span, springs > 0,
// tolerances finite, >= 0 and at most kMaxToleranceShare of their quantity).
// Returns kInvalidArgument naming the field and its value. The JSON reader
// checks the same rules with JSON paths; this is the guard for callers that
// build a Member in code.
Status ValidateMember(const Member& member);

// Fixity factor of a rotational end spring (Monforton and Wu, 1963):
//   r = 1 / (1 + 3 EI / (k L)),  0 = pinned, 1 = clamped.
// Preconditions: k >= 0, EI > 0, L > 0. k = +inf gives 1.
double FixityFromStiffness(double k_nm_per_rad, double ei_nm2, double length_m);

// Inverse of FixityFromStiffness: k = 3 EI r / (L (1 - r)).
// r is clamped to [0, 1 - kMaxFixityGap] so that r = 1 maps to a large but
// finite spring (3e9 EI/L): the frequency error against a true clamp is of
// order EI/(kL) ~ 3e-10, far below any test tolerance, and the stiffness
// matrix stays well conditioned (ratio to element stiffness < 1e7).
inline constexpr double kMaxFixityGap = 1e-9;
double StiffnessFromFixity(double r, double ei_nm2, double length_m);

}  // namespace taut::model
