// The member description reader (docs/FORMATS.md section 1): every rule has a
// test that the error names the JSON path and the rule.
#include <gtest/gtest.h>

#include <fstream>

#include "server/member_json.h"

namespace taut::server {
namespace {

using nlohmann::json;

// A valid document in the shape of docs/FORMATS.md section 1 (invented member).
json Valid() {
  return json::parse(R"({
    "id": "test-tie-1",
    "length_m": 6.0,
    "inclination_deg": 10.0,
    "section": { "shape": "circle", "diameter_m": 0.03 },
    "material": { "elastic_modulus_pa": 2.0e11, "density_kg_m3": 7850 },
    "ends": { "left": { "rotation": "elastic" }, "right": { "rotation": "clamped" }, "axial": "fixed" },
    "sensors": [
      { "channel": "a1", "position_m": 1.5, "mass_kg": 0.03, "direction": "vertical" },
      { "channel": "a2", "position_m": 3.0 }
    ],
    "design_axial_force_n": 40000
  })");
}

// Expects MemberFromJson to fail with a message that contains both `path`
// and `rule`.
void ExpectError(const json& j, const std::string& path, const std::string& rule,
                 MemberReadOptions options = {}) {
  model::Member m;
  const Status s = MemberFromJson(j, &m, options);
  ASSERT_FALSE(s.ok()) << "accepted: " << j.dump();
  EXPECT_EQ(s.code, Status::Code::kInvalidArgument);
  EXPECT_NE(s.message.find(path), std::string::npos) << "message: " << s.message;
  EXPECT_NE(s.message.find(rule), std::string::npos) << "message: " << s.message;
}

TEST(MemberJson, ValidDocumentIsReadWithDefaults) {
  model::Member m;
  const Status s = MemberFromJson(Valid(), &m);
  ASSERT_TRUE(s.ok()) << s.message;
  EXPECT_EQ(m.id, "test-tie-1");
  EXPECT_DOUBLE_EQ(m.length_m, 6.0);
  EXPECT_EQ(m.left.kind, model::RotationEnd::Kind::kElastic);
  EXPECT_EQ(m.right.kind, model::RotationEnd::Kind::kClamped);
  EXPECT_EQ(m.axial.kind, model::AxialEnds::Kind::kFixed);
  ASSERT_EQ(m.sensors.size(), 2u);
  EXPECT_DOUBLE_EQ(m.sensors[1].mass_kg, 0.0);                     // default
  EXPECT_EQ(m.sensors[1].direction, model::Direction::kVertical);  // default
  EXPECT_DOUBLE_EQ(*m.design_axial_force_n, 40000.0);
  // Area of a 30 mm circle: pi d^2 / 4 = 7.0686e-4 m^2 (elementary geometry).
  EXPECT_NEAR(m.section.Area(), 7.0685835e-4, 1e-10);
}

TEST(MemberJson, DefaultsWhenOptionalBlocksAreAbsent) {
  json j = Valid();
  j.erase("ends");
  j.erase("inclination_deg");
  j.erase("sensors");
  j.erase("id");
  model::Member m;
  ASSERT_TRUE(MemberFromJson(j, &m).ok());
  EXPECT_EQ(m.left.kind, model::RotationEnd::Kind::kElastic);  // docs/FORMATS.md default
  EXPECT_EQ(m.axial.kind, model::AxialEnds::Kind::kFixed);
  EXPECT_DOUBLE_EQ(m.inclination_deg, 0.0);
  EXPECT_TRUE(m.sensors.empty());
}

TEST(MemberJson, RoundTripsThroughMemberToJson) {
  model::Member a, b;
  json j = Valid();
  j["ends"]["left"]["rotation"] = {{"stiffness_nm_per_rad", 12000.0}};
  j["ends"]["axial"] = {{"stiffness_n_per_m", 5e7}};
  j["section"] = {{"shape", "rectangle"}, {"width_m", 0.05}, {"depth_m", 0.02}};
  ASSERT_TRUE(MemberFromJson(j, &a).ok());
  ASSERT_TRUE(MemberFromJson(MemberToJson(a), &b).ok());
  EXPECT_EQ(MemberToJson(a), MemberToJson(b));
  EXPECT_DOUBLE_EQ(b.left.stiffness_nm_per_rad, 12000.0);
  EXPECT_DOUBLE_EQ(b.axial.stiffness_n_per_m, 5e7);
  // Rectangle: I_vertical = w d^3/12, I_lateral = d w^3/12 (depth in the
  // vertical plane, docs/FORMATS.md).
  EXPECT_NEAR(b.section.SecondMoment(model::Direction::kVertical), 0.05 * 8e-6 / 12, 1e-15);
  EXPECT_NEAR(b.section.SecondMoment(model::Direction::kLateral), 0.02 * 1.25e-4 / 12, 1e-15);
}

TEST(MemberJson, EveryRuleNamesItsPath) {
  json j;
  j = Valid(), j["length_m"] = -6.0, ExpectError(j, "$.length_m", "must be > 0");
  j = Valid(), j["length_m"] = "six", ExpectError(j, "$.length_m", "must be a number");
  j = Valid(), j.erase("length_m"), ExpectError(j, "$.length_m", "required key is missing");
  j = Valid(), j["lenght_m"] = 6.0, ExpectError(j, "$.lenght_m", "unknown key");
  j = Valid(), j["inclination_deg"] = 95.0, ExpectError(j, "$.inclination_deg", "[0, 90]");
  j = Valid(), j["id"] = "has space", ExpectError(j, "$.id", "must match");
  j = Valid(), j.erase("id"), ExpectError(j, "$.id", "required key is missing", {.require_id = true});
  j = Valid(), j["section"]["shape"] = "hexagon", ExpectError(j, "$.section.shape", "unknown section shape");
  j = Valid(), j["section"].erase("shape"), ExpectError(j, "$.section.shape", "required key is missing");
  j = Valid(), j["section"]["diameter_m"] = 0.0, ExpectError(j, "$.section.diameter_m", "must be > 0");
  j = Valid(), j["section"]["width_m"] = 0.1, ExpectError(j, "$.section.width_m", "unknown key");
  j = Valid(), j["section"] = {{"shape", "rectangle"}, {"width_m", 0.1}},
  ExpectError(j, "$.section.depth_m", "required key is missing");
  j = Valid(), j["section"] = {{"shape", "general"}, {"area_m2", 1e-4}, {"second_moment_m4", -1.0}},
  ExpectError(j, "$.section.second_moment_m4", "must be > 0");
  j = Valid(), j.erase("material"), ExpectError(j, "$.material", "required key is missing");
  j = Valid(), j["material"]["density_kg_m3"] = -1, ExpectError(j, "$.material.density_kg_m3", "must be > 0");
  j = Valid(), j["material"]["poisson"] = 0.3, ExpectError(j, "$.material.poisson", "unknown key");
  j = Valid(), j["material"]["elastic_modulus_pa"] = nullptr,
  ExpectError(j, "$.material.elastic_modulus_pa", "must be a number");
  j = Valid(), j["ends"]["left"]["rotation"] = "hinged",
  ExpectError(j, "$.ends.left.rotation", "unknown rotation");
  j = Valid(), j["ends"]["right"]["rotation"] = {{"stiffness_nm_per_rad", -5.0}},
  ExpectError(j, "$.ends.right.rotation.stiffness_nm_per_rad", "must be > 0");
  j = Valid(), j["ends"]["axial"] = "sliding", ExpectError(j, "$.ends.axial", "unknown axial end");
  j = Valid(), j["ends"]["axial"] = {{"k", 1.0}}, ExpectError(j, "$.ends.axial.k", "unknown key");
  j = Valid(), j["ends"]["middle"] = {}, ExpectError(j, "$.ends.middle", "unknown key");
  j = Valid(), j["sensors"] = "a1", ExpectError(j, "$.sensors", "must be an array");
  j = Valid(), j["sensors"][1]["position_m"] = 6.0,
  ExpectError(j, "$.sensors[1].position_m", "strictly inside the span");
  j = Valid(), j["sensors"][0]["position_m"] = -0.5,
  ExpectError(j, "$.sensors[0].position_m", "strictly inside the span");
  j = Valid(), j["sensors"][1]["channel"] = "a1", ExpectError(j, "$.sensors[1].channel", "earlier sensor");
  j = Valid(), j["sensors"][1]["channel"] = "a-2", ExpectError(j, "$.sensors[1].channel", "must match");
  j = Valid(), j["sensors"][1].erase("channel"),
  ExpectError(j, "$.sensors[1].channel", "required key is missing");
  j = Valid(), j["sensors"][0]["mass_kg"] = -0.1, ExpectError(j, "$.sensors[0].mass_kg", ">= 0");
  j = Valid(), j["sensors"][0]["direction"] = "up",
  ExpectError(j, "$.sensors[0].direction", "unknown direction");
  j = Valid(), j["sensors"][0]["gain"] = 1, ExpectError(j, "$.sensors[0].gain", "unknown key");
  j = Valid(), j["design_axial_force_n"] = "40 kN",
  ExpectError(j, "$.design_axial_force_n", "must be a number");
  ExpectError(json::array(), "$", "must be a JSON object");
}

// Sensor calibration entries (docs/FORMATS.md section 1): read, written
// back, and every rule named by its path. 2026-02-29 does not exist (2026
// is not a leap year: Gregorian rule, divisible by 4 but not by 100 unless
// by 400).
TEST(MemberJson, SensorCalibrationEntries) {
  json j = Valid();
  j["sensors"][0]["serial"] = "INV-0042";
  j["sensors"][0]["sensitivity_mv_per_g"] = 101.9;
  j["sensors"][0]["calibrated_on"] = "2026-06-01";
  j["sensors"][0]["polarity"] = -1;
  model::Member a, b;
  ASSERT_TRUE(MemberFromJson(j, &a).ok());
  EXPECT_EQ(a.sensors[0].serial, "INV-0042");
  EXPECT_EQ(*a.sensors[0].sensitivity_mv_per_g, 101.9);
  EXPECT_EQ(a.sensors[0].calibrated_on, "2026-06-01");
  EXPECT_EQ(a.sensors[0].polarity, -1);
  EXPECT_EQ(a.sensors[1].polarity, 1);  // default
  EXPECT_FALSE(a.sensors[1].sensitivity_mv_per_g.has_value());
  ASSERT_TRUE(MemberFromJson(MemberToJson(a), &b).ok());
  EXPECT_EQ(MemberToJson(a), MemberToJson(b));
  EXPECT_EQ(MemberToJson(a)["sensors"][0]["polarity"], -1);
  EXPECT_FALSE(MemberToJson(a)["sensors"][1].contains("polarity"));
  j = Valid(), j["sensors"][0]["polarity"] = 0, ExpectError(j, "$.sensors[0].polarity", "1 or -1");
  j = Valid(), j["sensors"][0]["polarity"] = 1.5, ExpectError(j, "$.sensors[0].polarity", "1 or -1");
  j = Valid(), j["sensors"][0]["sensitivity_mv_per_g"] = 0.0,
  ExpectError(j, "$.sensors[0].sensitivity_mv_per_g", "must be > 0");
  j = Valid(), j["sensors"][0]["calibrated_on"] = "2026-02-29",
  ExpectError(j, "$.sensors[0].calibrated_on", "YYYY-MM-DD");
  j = Valid(), j["sensors"][0]["calibrated_on"] = "2026-06-01T00:00:00Z",
  ExpectError(j, "$.sensors[0].calibrated_on", "YYYY-MM-DD");
  j = Valid(), j["sensors"][0]["serial"] = "", ExpectError(j, "$.sensors[0].serial", "1 to 64");
}

// Tolerances (docs/FORMATS.md section 1, issue 17): each one standard
// deviation; absent = the common-practice default (model/member.h), 0 =
// measured precisely; read, written back, and every rule named by its path.
TEST(MemberJson, TolerancesAreReadDefaultedAndChecked) {
  json j = Valid();
  j["length_tolerance_m"] = 0.03;
  j["section"]["dimension_tolerance_m"] = 0.0;  // measured precisely (calliper)
  j["material"]["elastic_modulus_tolerance_pa"] = 1.5e10;
  j["sensors"][1]["position_tolerance_m"] = 0.005;
  model::Member a, b;
  const Status s = MemberFromJson(j, &a);
  ASSERT_TRUE(s.ok()) << s.message;
  EXPECT_EQ(*a.tolerances.length_m, 0.03);
  EXPECT_EQ(*a.tolerances.section_dimension_m, 0.0);
  EXPECT_FALSE(a.tolerances.density_kg_m3.has_value());
  EXPECT_FALSE(a.sensors[0].position_tolerance_m.has_value());
  ASSERT_TRUE(MemberFromJson(MemberToJson(a), &b).ok());
  EXPECT_EQ(MemberToJson(a), MemberToJson(b));
  EXPECT_FALSE(MemberToJson(a)["material"].contains("density_tolerance_kg_m3"));  // a default is not written
  // Resolved: declared values as given, the others by the defaults of model/member.h.
  const auto tol = model::ResolveTolerances(a);
  ASSERT_EQ(tol.size(), 6u);  // length, diameter, E, density, two sensors
  EXPECT_EQ(tol[0].key, "length_tolerance_m");
  EXPECT_EQ(tol[0].std, 0.03);
  EXPECT_FALSE(tol[0].is_default);
  EXPECT_EQ(tol[1].std, 0.0);                 // declared 0: measured precisely
  EXPECT_DOUBLE_EQ(tol[3].std, 0.01 * 7850);  // density default: 1 %
  EXPECT_TRUE(tol[3].is_default);
  EXPECT_DOUBLE_EQ(tol[4].std, model::kDefaultPositionTolerance_m);
  EXPECT_EQ(tol[5].key, "sensors[1].position_tolerance_m");
  EXPECT_EQ(tol[5].std, 0.005);
  // Defaults of a bare description: length max(0.01 m, 0.2 % L) = 0.012 m at 6 m.
  ASSERT_TRUE(MemberFromJson(Valid(), &a).ok());
  EXPECT_DOUBLE_EQ(model::ResolveTolerances(a)[0].std, 0.012);
  j = Valid(), j["length_tolerance_m"] = -0.01, ExpectError(j, "$.length_tolerance_m", "must be >= 0");
  j = Valid(), j["length_tolerance_m"] = 0.7,
  ExpectError(j, "$.length_tolerance_m", "more than 0.1 of the length");
  j = Valid(), j["length_tolerance_m"] = "2 cm", ExpectError(j, "$.length_tolerance_m", "must be a number");
  j = Valid(), j["section"]["dimension_tolerance_m"] = 0.01,
  ExpectError(j, "$.section.dimension_tolerance_m", "more than 0.1 of the diameter");
  j = Valid(), j["section"]["area_tolerance_m2"] = 1e-6,
  ExpectError(j, "$.section.area_tolerance_m2", "unknown key");  // general sections only
  j = Valid(), j["material"]["density_tolerance_kg_m3"] = -5.0,
  ExpectError(j, "$.material.density_tolerance_kg_m3", "must be >= 0");
  j = Valid(), j["material"]["elastic_modulus_tolerance_pa"] = 1e11,
  ExpectError(j, "$.material.elastic_modulus_tolerance_pa", "more than 0.1");
  j = Valid(), j["sensors"][0]["position_tolerance_m"] = 1.0,
  ExpectError(j, "$.sensors[0].position_tolerance_m", "more than 0.1 of the length");
  j = Valid(),
  j["section"] = {{"shape", "general"},
                  {"area_m2", 1e-3},
                  {"second_moment_m4", 1e-7},
                  {"second_moment_tolerance_m4", -1e-9}},
  ExpectError(j, "$.section.second_moment_tolerance_m4", "must be >= 0");
  // The model's own guard for members built in code.
  a.tolerances.density_kg_m3 = -1.0;
  EXPECT_FALSE(model::ValidateMember(a).ok());
}

TEST(MemberJson, SyntaxErrorNamesLineAndColumn) {
  model::Member m;
  const Status s = ParseMember("{\n  \"length_m\": 6.0,\n  \"section\": [,\n}", &m);
  ASSERT_FALSE(s.ok());
  EXPECT_NE(s.message.find("line 3"), std::string::npos) << s.message;
  EXPECT_NE(s.message.find("not valid JSON"), std::string::npos) << s.message;
}

TEST(MemberJson, FileErrorsNameThePath) {
  model::Member m;
  const Status missing = LoadMemberFile("/nonexistent/dir/member.json", &m);
  ASSERT_FALSE(missing.ok());
  EXPECT_NE(missing.message.find("/nonexistent/dir/member.json"), std::string::npos);
  // The shipped example reads cleanly.
  const Status example = LoadMemberFile(std::string(TAUT_EXAMPLES_DIR) + "/maltings-east-tie-2.json", &m);
  EXPECT_TRUE(example.ok()) << example.message;
}

}  // namespace
}  // namespace taut::server
