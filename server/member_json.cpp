#include "server/member_json.h"

#include <algorithm>
#include <cctype>
#include <cmath>
#include <cstring>
#include <fstream>
#include <set>
#include <sstream>

#include "server/iso_time.h"
#include "server/json_limits.h"
#include "server/json_path.h"
#include "server/safe_text.h"

namespace taut::server {

namespace {

using model::AxialEnds;
using model::Direction;
using model::Member;
using model::RotationEnd;
using model::Section;
using nlohmann::json;

// The JSON-path helpers (json_path.h) under this file's short names.
[[noreturn]] void Fail(const std::string& path, const std::string& rule) { FailAt(path, rule); }

std::string Show(const json& v) { return ShowJson(v); }

double Number(const json& v, const std::string& path) { return NumberAt(v, path); }

std::string Str(const json& v, const std::string& path) { return StringAt(v, path); }

// True when `s` has 1..max_len characters, each alphanumeric, '_' or one
// of `extra`. (Hand-written rather than std::regex: GCC 12 warns inside
// <regex> under the sanitizers, and these two patterns are trivial.)
bool IsToken(const std::string& s, size_t max_len, const char* extra) {
  if (s.empty() || s.size() > max_len) return false;
  for (char c : s) {
    const bool ok =
        std::isalnum(static_cast<unsigned char>(c)) || c == '_' || std::strchr(extra, c) != nullptr;
    if (!ok || c == '\0') return false;
  }
  return true;
}

std::string Fmt(double x) { return FormatJsonNumber(x); }

double Positive(const json& v, const std::string& path) {
  const double x = Number(v, path);
  if (!(x > 0.0)) Fail(path, "= " + Fmt(x) + ": must be > 0");
  return x;
}

// A tolerance (docs/FORMATS.md section 1): one standard deviation of
// `of_value`, >= 0 (0: measured precisely) and at most
// kMaxToleranceShare of it (`of_what` names it in the message).
double Tolerance(const json& v, const std::string& path, double of_value, const std::string& of_what) {
  const double x = Number(v, path);
  if (x < 0.0) Fail(path, "= " + Fmt(x) + ": must be >= 0 (one standard deviation; 0 = measured precisely)");
  if (x > model::kMaxToleranceShare * of_value) {
    Fail(path, "= " + Fmt(x) + ": more than " + Fmt(model::kMaxToleranceShare) + " of " + of_what + " (" +
                   Fmt(of_value) + "); re-measure rather than declare it so uncertain");
  }
  return x;
}

// The optional tolerance `key` of object `j` at `path` into `out`.
void OptionalTolerance(const json& j, const std::string& path, const char* key, double of_value,
                       const std::string& of_what, std::optional<double>* out) {
  if (auto it = j.find(key); it != j.end()) *out = Tolerance(*it, path + "." + key, of_value, of_what);
}

Section ReadSection(const json& j, const std::string& path, model::Tolerances* tol) {
  RequireObject(j, path);
  const std::string shape = Str(Required(j, path, "shape"), path + ".shape");
  Section s;
  if (shape == "circle") {
    OnlyKeys(j, path, {"shape", "diameter_m", "dimension_tolerance_m"});
    s.shape = Section::Shape::kCircle;
    s.diameter_m = Positive(Required(j, path, "diameter_m"), path + ".diameter_m");
    OptionalTolerance(j, path, "dimension_tolerance_m", s.diameter_m, "the diameter",
                      &tol->section_dimension_m);
  } else if (shape == "rectangle") {
    OnlyKeys(j, path, {"shape", "width_m", "depth_m", "dimension_tolerance_m"});
    s.shape = Section::Shape::kRectangle;
    s.width_m = Positive(Required(j, path, "width_m"), path + ".width_m");
    s.depth_m = Positive(Required(j, path, "depth_m"), path + ".depth_m");
    OptionalTolerance(j, path, "dimension_tolerance_m", std::min(s.width_m, s.depth_m),
                      "the smaller dimension", &tol->section_dimension_m);
  } else if (shape == "general") {
    OnlyKeys(j, path,
             {"shape", "area_m2", "second_moment_m4", "area_tolerance_m2", "second_moment_tolerance_m4"});
    s.shape = Section::Shape::kGeneral;
    s.area_m2 = Positive(Required(j, path, "area_m2"), path + ".area_m2");
    s.second_moment_m4 = Positive(Required(j, path, "second_moment_m4"), path + ".second_moment_m4");
    OptionalTolerance(j, path, "area_tolerance_m2", s.area_m2, "the area", &tol->section_area_m2);
    OptionalTolerance(j, path, "second_moment_tolerance_m4", s.second_moment_m4, "the second moment",
                      &tol->section_second_moment_m4);
  } else {
    Fail(path + ".shape",
         "unknown section shape \"" + Excerpt(shape) + "\" (use circle, rectangle or general)");
  }
  return s;
}

RotationEnd ReadRotation(const json& j, const std::string& path) {
  RotationEnd e;
  if (j.is_string()) {
    const std::string k = j.get<std::string>();
    if (k == "pinned") {
      e.kind = RotationEnd::Kind::kPinned;
    } else if (k == "clamped") {
      e.kind = RotationEnd::Kind::kClamped;
    } else if (k == "elastic") {
      e.kind = RotationEnd::Kind::kElastic;
    } else {
      Fail(path, "unknown rotation \"" + Excerpt(k) +
                     "\" (use pinned, clamped, elastic or {\"stiffness_nm_per_rad\": k})");
    }
    return e;
  }
  if (!j.is_object()) Fail(path, "must be a string or an object, got " + Show(j));
  OnlyKeys(j, path, {"stiffness_nm_per_rad"});
  e.kind = RotationEnd::Kind::kSpring;
  e.stiffness_nm_per_rad =
      Positive(Required(j, path, "stiffness_nm_per_rad"), path + ".stiffness_nm_per_rad");
  return e;
}

RotationEnd ReadEnd(const json& j, const std::string& path) {
  RequireObject(j, path);
  OnlyKeys(j, path, {"rotation"});
  auto it = j.find("rotation");
  return it == j.end() ? RotationEnd{} : ReadRotation(*it, path + ".rotation");
}

AxialEnds ReadAxial(const json& j, const std::string& path) {
  AxialEnds a;
  if (j.is_string()) {
    const std::string k = j.get<std::string>();
    if (k == "fixed") {
      a.kind = AxialEnds::Kind::kFixed;
    } else if (k == "free") {
      a.kind = AxialEnds::Kind::kFree;
    } else {
      Fail(path, "unknown axial end \"" + Excerpt(k) + "\" (use fixed, free or {\"stiffness_n_per_m\": k})");
    }
    return a;
  }
  if (!j.is_object()) Fail(path, "must be a string or an object, got " + Show(j));
  OnlyKeys(j, path, {"stiffness_n_per_m"});
  a.kind = AxialEnds::Kind::kSpring;
  a.stiffness_n_per_m = Positive(Required(j, path, "stiffness_n_per_m"), path + ".stiffness_n_per_m");
  return a;
}

// The calibration of a sensor entry (docs/FORMATS.md section 1): serial,
// sensitivity_mv_per_g (> 0), calibrated_on (an ISO 8601 date that exists),
// polarity (+1 or -1).
void ReadCalibration(const json& s, const std::string& path, model::Sensor* sensor) {
  if (auto it = s.find("serial"); it != s.end()) {
    sensor->serial = Str(*it, path + ".serial");
    if (sensor->serial.empty() || sensor->serial.size() > 64)
      Fail(path + ".serial", "must hold 1 to 64 characters");
  }
  if (auto it = s.find("sensitivity_mv_per_g"); it != s.end()) {
    const double v = Number(*it, path + ".sensitivity_mv_per_g");
    if (!(v > 0.0)) Fail(path + ".sensitivity_mv_per_g", "= " + Fmt(v) + ": must be > 0");
    sensor->sensitivity_mv_per_g = v;
  }
  if (auto it = s.find("calibrated_on"); it != s.end()) {
    sensor->calibrated_on = Str(*it, path + ".calibrated_on");
    IsoTime t;
    if (sensor->calibrated_on.size() != 10 || !ParseIsoTime(sensor->calibrated_on, &t))
      Fail(path + ".calibrated_on", "\"" + sensor->calibrated_on + "\" must be a date YYYY-MM-DD");
  }
  if (auto it = s.find("polarity"); it != s.end()) {
    if (!it->is_number_integer() || (it->get<long long>() != 1 && it->get<long long>() != -1))
      Fail(path + ".polarity", "must be 1 or -1, got " + Show(*it));
    sensor->polarity = it->get<int>();
  }
}

// Values that pass the format's types but describe no member this service
// can monitor: refused with the path, so that a typo (a diameter in mm
// given as m, a modulus with three extra zeros) is not stored.
void CheckPlausible(const Member& m, const MemberReadOptions& options) {
  if (m.length_m > kMaxLength_m) {
    Fail("$.length_m", "= " + Fmt(m.length_m) + ": longer than " + Fmt(kMaxLength_m) + " m");
  }
  if (m.elastic_modulus_pa < kMinElasticModulus_pa || m.elastic_modulus_pa > kMaxElasticModulus_pa) {
    Fail("$.material.elastic_modulus_pa", "= " + Fmt(m.elastic_modulus_pa) + ": outside " +
                                              Fmt(kMinElasticModulus_pa) + ".." + Fmt(kMaxElasticModulus_pa) +
                                              " Pa (structural materials)");
  }
  if (m.density_kg_m3 < kMinDensity_kg_m3 || m.density_kg_m3 > kMaxDensity_kg_m3) {
    Fail("$.material.density_kg_m3", "= " + Fmt(m.density_kg_m3) + ": outside " + Fmt(kMinDensity_kg_m3) +
                                         ".." + Fmt(kMaxDensity_kg_m3) + " kg/m3");
  }
  // The beam model is for slender members: the section's largest
  // dimension at most kMaxSectionShareOfLength of the length.
  const double limit = kMaxSectionShareOfLength * m.length_m;
  const auto too_big = [&](double value, const char* path) {
    if (value > limit) {
      Fail(path, "= " + Fmt(value) + ": more than " + Fmt(kMaxSectionShareOfLength) + " of the length (" +
                     Fmt(m.length_m) + " m); not a slender member (is the unit m?)");
    }
  };
  switch (m.section.shape) {
    case Section::Shape::kCircle:
      too_big(m.section.diameter_m, "$.section.diameter_m");
      break;
    case Section::Shape::kRectangle:
      too_big(m.section.width_m, "$.section.width_m");
      too_big(m.section.depth_m, "$.section.depth_m");
      break;
    case Section::Shape::kGeneral:
      // A solid square of the same area: its side is the size compared.
      too_big(std::sqrt(m.section.area_m2), "$.section.area_m2");
      break;
  }
  if (m.sensors.size() > static_cast<std::size_t>(kMaxSensors)) {
    Fail("$.sensors", std::to_string(m.sensors.size()) + " sensors: at most " + std::to_string(kMaxSensors) +
                          " (a record's channel limit)");
  }
  if (options.require_sensors && m.sensors.empty()) {
    Fail("$.sensors", "at least one sensor is needed to monitor the member");
  }
  for (std::size_t a = 0; a < m.sensors.size(); ++a) {
    for (std::size_t b = 0; b < a; ++b) {
      if (std::abs(m.sensors[a].position_m - m.sensors[b].position_m) < kMinSensorSpacing_m &&
          m.sensors[a].direction == m.sensors[b].direction) {
        Fail("$.sensors[" + std::to_string(a) + "].position_m",
             "= " + Fmt(m.sensors[a].position_m) + ": the same position and direction as $.sensors[" +
                 std::to_string(b) + "] (two sensors cannot share one point)");
      }
    }
  }
}

void ReadMember(const json& j, Member* m, const MemberReadOptions& options) {
  const std::string root = "$";
  RequireObject(j, root);
  OnlyKeys(j, root,
           {"id", "length_m", "length_tolerance_m", "inclination_deg", "section", "material", "ends",
            "sensors", "design_axial_force_n"});
  *m = Member{};
  if (auto it = j.find("id"); it != j.end()) {
    m->id = Str(*it, "$.id");
    if (!IsToken(m->id, 64, ".-")) Fail("$.id", "\"" + Excerpt(m->id) + "\" must match [A-Za-z0-9._-]{1,64}");
  } else if (options.require_id) {
    Fail("$.id", "required key is missing");
  }
  m->length_m = Positive(Required(j, root, "length_m"), "$.length_m");
  OptionalTolerance(j, root, "length_tolerance_m", m->length_m, "the length", &m->tolerances.length_m);
  if (auto it = j.find("inclination_deg"); it != j.end()) {
    m->inclination_deg = Number(*it, "$.inclination_deg");
    if (m->inclination_deg < 0.0 || m->inclination_deg > 90.0) {
      Fail("$.inclination_deg", "= " + Fmt(m->inclination_deg) + ": must be in [0, 90]");
    }
  }
  m->section = ReadSection(Required(j, root, "section"), "$.section", &m->tolerances);
  {
    const json& mat = Required(j, root, "material");
    RequireObject(mat, "$.material");
    OnlyKeys(mat, "$.material",
             {"elastic_modulus_pa", "density_kg_m3", "yield_strength_pa", "elastic_modulus_tolerance_pa",
              "density_tolerance_kg_m3"});
    m->elastic_modulus_pa =
        Positive(Required(mat, "$.material", "elastic_modulus_pa"), "$.material.elastic_modulus_pa");
    m->density_kg_m3 = Positive(Required(mat, "$.material", "density_kg_m3"), "$.material.density_kg_m3");
    OptionalTolerance(mat, "$.material", "elastic_modulus_tolerance_pa", m->elastic_modulus_pa,
                      "the elastic modulus", &m->tolerances.elastic_modulus_pa);
    OptionalTolerance(mat, "$.material", "density_tolerance_kg_m3", m->density_kg_m3, "the density",
                      &m->tolerances.density_kg_m3);
    if (auto it = mat.find("yield_strength_pa"); it != mat.end()) {
      m->yield_strength_pa = Positive(*it, "$.material.yield_strength_pa");
    }
  }
  if (auto it = j.find("ends"); it != j.end()) {
    RequireObject(*it, "$.ends");
    OnlyKeys(*it, "$.ends", {"left", "right", "axial"});
    if (auto e = it->find("left"); e != it->end()) m->left = ReadEnd(*e, "$.ends.left");
    if (auto e = it->find("right"); e != it->end()) m->right = ReadEnd(*e, "$.ends.right");
    if (auto e = it->find("axial"); e != it->end()) m->axial = ReadAxial(*e, "$.ends.axial");
  }
  if (auto it = j.find("sensors"); it != j.end()) {
    if (!it->is_array()) Fail("$.sensors", "must be an array, got " + Show(*it));
    std::set<std::string> seen;
    for (size_t i = 0; i < it->size(); ++i) {
      const json& s = (*it)[i];
      const std::string path = "$.sensors[" + std::to_string(i) + "]";
      RequireObject(s, path);
      OnlyKeys(s, path,
               {"channel", "position_m", "position_tolerance_m", "mass_kg", "direction", "serial",
                "sensitivity_mv_per_g", "calibrated_on", "polarity"});
      model::Sensor sensor;
      sensor.channel = Str(Required(s, path, "channel"), path + ".channel");
      if (!IsToken(sensor.channel, 32, "")) {
        Fail(path + ".channel", "\"" + Excerpt(sensor.channel) + "\" must match [A-Za-z0-9_]{1,32}");
      }
      if (!seen.insert(sensor.channel).second) {
        Fail(path + ".channel", "\"" + Excerpt(sensor.channel) + "\" is used by an earlier sensor");
      }
      sensor.position_m = Number(Required(s, path, "position_m"), path + ".position_m");
      if (!(sensor.position_m > 0.0 && sensor.position_m < m->length_m)) {
        Fail(path + ".position_m", "= " + Fmt(sensor.position_m) +
                                       ": must lie strictly inside the span (0, " + Fmt(m->length_m) + ") m");
      }
      OptionalTolerance(s, path, "position_tolerance_m", m->length_m, "the length",
                        &sensor.position_tolerance_m);
      if (auto mk = s.find("mass_kg"); mk != s.end()) {
        sensor.mass_kg = Number(*mk, path + ".mass_kg");
        if (sensor.mass_kg < 0.0) Fail(path + ".mass_kg", "= " + Fmt(sensor.mass_kg) + ": must be >= 0");
      }
      if (auto d = s.find("direction"); d != s.end()) {
        const std::string dir = Str(*d, path + ".direction");
        if (dir == "vertical") {
          sensor.direction = Direction::kVertical;
        } else if (dir == "lateral") {
          sensor.direction = Direction::kLateral;
        } else {
          Fail(path + ".direction", "unknown direction \"" + Excerpt(dir) + "\" (use vertical or lateral)");
        }
      }
      ReadCalibration(s, path, &sensor);
      m->sensors.push_back(sensor);
    }
  }
  if (auto it = j.find("design_axial_force_n"); it != j.end()) {
    m->design_axial_force_n = Number(*it, "$.design_axial_force_n");
    if (!(*m->design_axial_force_n > 0.0)) {
      Fail("$.design_axial_force_n",
           "= " + Fmt(*m->design_axial_force_n) + ": must be > 0 (the design tension, N)");
    }
  }
  if (options.check_plausible) CheckPlausible(*m, options);
}

}  // namespace

Status MemberFromJson(const json& j, Member* member, MemberReadOptions options) {
  try {
    ReadMember(j, member, options);
  } catch (const JsonPathError& e) {
    return Status::InvalidArgument(e.message);
  }
  // Belt and braces: the model's own preconditions must hold for anything
  // the reader accepted.
  return model::ValidateMember(*member);
}

Status ParseMember(const std::string& text, Member* member, MemberReadOptions options) {
  json j;
  if (Status s = ParseJsonBounded(text, &j); !s.ok()) return s;
  return MemberFromJson(j, member, options);
}

Status LoadMemberFile(const std::string& path, Member* member, MemberReadOptions options) {
  std::ifstream in(path, std::ios::binary);
  if (!in) return Status::InvalidArgument(path + ": cannot open member file");
  std::ostringstream buf;
  buf << in.rdbuf();
  Status s = ParseMember(buf.str(), member, options);
  if (!s.ok()) s.message = path + ": " + s.message;
  return s;
}

json MemberToJson(const Member& m) {
  json j;
  if (!m.id.empty()) j["id"] = m.id;
  j["length_m"] = m.length_m;
  const model::Tolerances& tol = m.tolerances;
  if (tol.length_m) j["length_tolerance_m"] = *tol.length_m;
  j["inclination_deg"] = m.inclination_deg;
  switch (m.section.shape) {
    case Section::Shape::kCircle:
      j["section"] = {{"shape", "circle"}, {"diameter_m", m.section.diameter_m}};
      break;
    case Section::Shape::kRectangle:
      j["section"] = {{"shape", "rectangle"}, {"width_m", m.section.width_m}, {"depth_m", m.section.depth_m}};
      break;
    case Section::Shape::kGeneral:
      j["section"] = {{"shape", "general"},
                      {"area_m2", m.section.area_m2},
                      {"second_moment_m4", m.section.second_moment_m4}};
      break;
  }
  if (tol.section_dimension_m) j["section"]["dimension_tolerance_m"] = *tol.section_dimension_m;
  if (tol.section_area_m2) j["section"]["area_tolerance_m2"] = *tol.section_area_m2;
  if (tol.section_second_moment_m4)
    j["section"]["second_moment_tolerance_m4"] = *tol.section_second_moment_m4;
  j["material"] = {{"elastic_modulus_pa", m.elastic_modulus_pa}, {"density_kg_m3", m.density_kg_m3}};
  if (tol.elastic_modulus_pa) j["material"]["elastic_modulus_tolerance_pa"] = *tol.elastic_modulus_pa;
  if (tol.density_kg_m3) j["material"]["density_tolerance_kg_m3"] = *tol.density_kg_m3;
  if (m.yield_strength_pa) j["material"]["yield_strength_pa"] = *m.yield_strength_pa;
  auto rotation = [](const RotationEnd& e) -> json {
    switch (e.kind) {
      case RotationEnd::Kind::kPinned:
        return "pinned";
      case RotationEnd::Kind::kClamped:
        return "clamped";
      case RotationEnd::Kind::kElastic:
        return "elastic";
      case RotationEnd::Kind::kSpring:
        return {{"stiffness_nm_per_rad", e.stiffness_nm_per_rad}};
    }
    return "elastic";
  };
  json axial = "fixed";
  if (m.axial.kind == AxialEnds::Kind::kFree) axial = "free";
  if (m.axial.kind == AxialEnds::Kind::kSpring) axial = {{"stiffness_n_per_m", m.axial.stiffness_n_per_m}};
  j["ends"] = {{"left", {{"rotation", rotation(m.left)}}},
               {"right", {{"rotation", rotation(m.right)}}},
               {"axial", axial}};
  j["sensors"] = json::array();
  for (const auto& s : m.sensors) {
    json sensor = {{"channel", s.channel},
                   {"position_m", s.position_m},
                   {"mass_kg", s.mass_kg},
                   {"direction", model::ToString(s.direction)}};
    if (!s.serial.empty()) sensor["serial"] = s.serial;
    if (s.sensitivity_mv_per_g) sensor["sensitivity_mv_per_g"] = *s.sensitivity_mv_per_g;
    if (!s.calibrated_on.empty()) sensor["calibrated_on"] = s.calibrated_on;
    if (s.polarity != 1) sensor["polarity"] = s.polarity;
    if (s.position_tolerance_m) sensor["position_tolerance_m"] = *s.position_tolerance_m;
    j["sensors"].push_back(sensor);
  }
  if (m.design_axial_force_n) j["design_axial_force_n"] = *m.design_axial_force_n;
  return j;
}

}  // namespace taut::server
