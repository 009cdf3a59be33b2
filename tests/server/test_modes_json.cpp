// The supplied-modes reader (docs/FORMATS.md section 4): every rule names
// its JSON path; shapes are read per channel and validated against the
// member's sensors.
#include <gtest/gtest.h>

#include "server/member_json.h"
#include "server/modes_json.h"

namespace taut::server {
namespace {

using nlohmann::json;

model::Member TwoPlaneMember() {
  model::Member m;
  const Status s = ParseMember(R"({
    "id": "test-tie-7", "length_m": 6.0,
    "section": { "shape": "circle", "diameter_m": 0.03 },
    "material": { "elastic_modulus_pa": 2.0e11, "density_kg_m3": 7850 },
    "sensors": [ { "channel": "v1", "position_m": 1.5 }, { "channel": "v2", "position_m": 3.0 },
                 { "channel": "h1", "position_m": 2.0, "direction": "lateral" } ]
  })",
                               &m);
  EXPECT_TRUE(s.ok()) << s.message;
  return m;
}

json Valid() {
  return json::parse(R"({
    "source": "hammer test",
    "modes": [
      { "frequency_hz": 7.7, "frequency_std_hz": 0.01, "damping_ratio": 0.004, "shape": { "v1": 0.7, "v2": 1.0 } },
      { "frequency_hz": 16.4, "frequency_std_hz": 0.02, "shape": { "v1": -2.0, "v2": 0.1 } }
    ]
  })");
}

void ExpectError(const json& j, const std::string& path, const std::string& rule) {
  estimation::SuppliedModes out;
  const Status s = SuppliedModesFromJson(j, TwoPlaneMember(), &out);
  ASSERT_FALSE(s.ok()) << "accepted: " << j.dump();
  EXPECT_NE(s.message.find(path), std::string::npos) << s.message;
  EXPECT_NE(s.message.find(rule), std::string::npos) << s.message;
}

TEST(ModesJson, ValidDocumentIsRead) {
  estimation::SuppliedModes out;
  const Status s = SuppliedModesFromJson(Valid(), TwoPlaneMember(), &out);
  ASSERT_TRUE(s.ok()) << s.message;
  EXPECT_EQ(out.source, "hammer test");
  EXPECT_EQ(out.channels, (std::vector<std::string>{"v1", "v2"}));
  ASSERT_EQ(out.modes.size(), 2u);
  EXPECT_EQ(out.modes[0].frequency_hz, 7.7);
  EXPECT_EQ(out.modes[0].damping_ratio, 0.004);
  EXPECT_EQ(out.modes[1].damping_ratio, 0.0);                       // default
  EXPECT_EQ(out.modes[1].shape, (std::vector<double>{-2.0, 0.1}));  // as given; scaled by the estimation
  EXPECT_FALSE(out.plane.has_value());
  // Without shapes, with a plane.
  json j = Valid();
  for (auto& m : j["modes"]) m.erase("shape");
  j["plane"] = "lateral";
  ASSERT_TRUE(SuppliedModesFromJson(j, TwoPlaneMember(), &out).ok());
  EXPECT_TRUE(out.channels.empty());
  EXPECT_EQ(*out.plane, model::Direction::kLateral);
}

TEST(ModesJson, TheShippedExampleReads) {
  model::Member member;
  ASSERT_TRUE(LoadMemberFile(std::string(TAUT_EXAMPLES_DIR) + "/maltings-east-tie-2.json", &member).ok());
  estimation::SuppliedModes out;
  const Status s =
      LoadSuppliedModesFile(std::string(TAUT_EXAMPLES_DIR) + "/maltings-east-tie-2-modes.json", member, &out);
  ASSERT_TRUE(s.ok()) << s.message;
  EXPECT_EQ(out.modes.size(), 3u);
  EXPECT_EQ(out.channels.size(), 3u);
}

TEST(ModesJson, EveryRuleNamesItsPath) {
  json j;
  j = Valid(), j.erase("modes"), ExpectError(j, "$.modes", "required key is missing");
  j = Valid(), j["modes"] = json::array(), ExpectError(j, "$.modes", "1 to 32 modes");
  j = Valid(), j["mode"] = 1, ExpectError(j, "$.mode", "unknown key");
  j = Valid(), j["plane"] = "up", ExpectError(j, "$.plane", "unknown plane");
  j = Valid(), j["source"] = std::string(201, 'x'), ExpectError(j, "$.source", "at most 200");
  j = Valid(), j["modes"][0]["frequency_hz"] = -1.0, ExpectError(j, "$.modes[0].frequency_hz", "must be > 0");
  j = Valid(), j["modes"][1].erase("frequency_std_hz"),
  ExpectError(j, "$.modes[1].frequency_std_hz", "required key is missing");
  j = Valid(), j["modes"][1]["frequency_std_hz"] = 0.0,
  ExpectError(j, "$.modes[1].frequency_std_hz", "must be > 0");
  j = Valid(), j["modes"][0]["damping_ratio"] = 1.5, ExpectError(j, "$.modes[0].damping_ratio", "[0, 1)");
  j = Valid(), j["modes"][0]["order"] = 1, ExpectError(j, "$.modes[0].order", "unknown key");
  j = Valid(), j["modes"][0]["shape"]["x9"] = 0.5,
  ExpectError(j, "$.modes[0].shape.x9", "not a sensor channel of the member");
  j = Valid(), j["modes"][1]["shape"] = {{"v1", 1.0}},
  ExpectError(j, "$.modes[1].shape", "same channels as $.modes[0].shape");
  j = Valid(), j["modes"][1].erase("shape"), ExpectError(j, "$.modes[1].shape", "required key is missing");
  j = Valid(), j["modes"][0].erase("shape"),
  ExpectError(j, "$.modes[1].shape", "give shapes for every mode or none");
  j = Valid(), j["modes"][0]["shape"] = {{"v1", 0.0}, {"v2", 0.0}},
  ExpectError(j, "$.modes[0].shape", "every value is 0");
  j = Valid(), j["modes"][0]["shape"]["v1"] = "high",
  ExpectError(j, "$.modes[0].shape.v1", "must be a number");
  ExpectError(json::array(), "$", "must be a JSON object");
  estimation::SuppliedModes out;
  const Status syntax = ParseSuppliedModes("{\n \"modes\": [,\n}", TwoPlaneMember(), &out);
  ASSERT_FALSE(syntax.ok());
  EXPECT_NE(syntax.message.find("line 2"), std::string::npos) << syntax.message;
}

TEST(ModesJson, ShapesOfTheOtherPlaneThanDeclaredAreAnError) {
  // estimation/supplied_modes.h: a declared plane and shape channels that
  // sense the other one contradict each other.
  json j = Valid();
  j["plane"] = "lateral";
  estimation::SuppliedModes out;
  ASSERT_TRUE(SuppliedModesFromJson(j, TwoPlaneMember(), &out).ok());
  estimation::Estimate e;
  const Status s = estimation::IdentifySuppliedModes(TwoPlaneMember(), out, {}, &e);
  ASSERT_FALSE(s.ok());
  EXPECT_NE(s.message.find("shape channel 'v1' senses the vertical plane"), std::string::npos) << s.message;
}

}  // namespace
}  // namespace taut::server
