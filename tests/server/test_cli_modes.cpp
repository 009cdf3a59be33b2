// `taut modes` end to end, in process: arguments in, table or JSON out,
// exit codes and one-line errors.
#include <gtest/gtest.h>

#include <cmath>
#include <filesystem>
#include <fstream>
#include <nlohmann/json.hpp>
#include <numbers>
#include <sstream>

#include "server/cli.h"
#include "tests/server/cli_test_support.h"

namespace taut::server {
namespace {

using testing::CliRun;
using testing::Taut;

class CliModes : public ::testing::Test {
 protected:
  void SetUp() override {
    dir_ = std::filesystem::temp_directory_path() /
           ("taut-cli-" + std::to_string(::testing::UnitTest::GetInstance()->random_seed()) + "-" +
            ::testing::UnitTest::GetInstance()->current_test_info()->name());
    std::filesystem::create_directories(dir_);
  }
  void TearDown() override { std::filesystem::remove_all(dir_); }
  std::string Write(const std::string& name, const std::string& text) {
    const auto p = dir_ / name;
    std::ofstream(p) << text;
    return p.string();
  }
  std::filesystem::path dir_;
};

// An invented pinned-pinned, axially free bar (no sag coupling) with three
// massless sensors: the closed form applies exactly.
constexpr const char* kPinnedBar = R"({
  "length_m": 5.0,
  "section": { "shape": "general", "area_m2": 5e-4, "second_moment_m4": 2e-8 },
  "material": { "elastic_modulus_pa": 2.1e11, "density_kg_m3": 7850 },
  "ends": { "left": { "rotation": "pinned" }, "right": { "rotation": "pinned" }, "axial": "free" },
  "sensors": [
    { "channel": "s1", "position_m": 1.25 }, { "channel": "s2", "position_m": 2.5 },
    { "channel": "s3", "position_m": 3.75 } ]
})";

// JSON output against the pinned-pinned closed form with tension (docs/DESIGN.md;
// Timoshenko, Young and Weaver 1974, sec. 5.12); 1e-6 with 200 elements, as
// in tests/model. Shapes: mode 1 of a pinned bar is sin(pi x/L), so the
// quarter-point sensors read sin(pi/4) of the mid-span one (1e-6).
TEST_F(CliModes, JsonMatchesClosedFormAndShapeIsSine) {
  const std::string member = Write("bar.json", kPinnedBar);
  const CliRun r = Taut(
      {"modes", "--member", member, "--axial-force", "25000", "--modes", "4", "--elements", "200", "--json"});
  ASSERT_EQ(r.code, 0) << r.err;
  const auto j = nlohmann::json::parse(r.out);
  ASSERT_EQ(j["modes"].size(), 4u);
  const double length = 5.0, ei = 2.1e11 * 2e-8, m = 7850 * 5e-4, n_force = 25000.0;
  const double pi = std::numbers::pi;
  for (int n = 1; n <= 4; ++n) {
    const auto& mode = j["modes"][n - 1];
    EXPECT_EQ(mode["order"].get<int>(), n);
    const double exact =
        n / (2 * length) * std::sqrt((n_force + n * n * pi * pi * ei / (length * length)) / m);
    EXPECT_NEAR(mode["frequency_hz"].get<double>() / exact, 1.0, 1e-6) << "mode " << n;
    EXPECT_EQ(mode["shape"].size(), 3u);
  }
  const auto& s = j["modes"][0]["shape"];
  EXPECT_NEAR(s["s1"].get<double>() / s["s2"].get<double>(), std::sin(pi / 4), 1e-6);
  EXPECT_NEAR(s["s3"].get<double>() / s["s2"].get<double>(), std::sin(pi / 4), 1e-6);
}

TEST_F(CliModes, HumanTableListsEveryModeAndChannel) {
  const std::string member = Write("bar.json", kPinnedBar);
  const CliRun r = Taut({"modes", "--member", member, "--axial-force", "25000", "--modes", "3"});
  ASSERT_EQ(r.code, 0) << r.err;
  for (const char* needle : {"frequency_hz", "s1", "s2", "s3", "25 kN", "mass-normalised"}) {
    EXPECT_NE(r.out.find(needle), std::string::npos) << needle << " missing in:\n" << r.out;
  }
  // Header + 3 mode rows between the blank lines.
  int rows = 0;
  std::istringstream in(r.out);
  for (std::string line; std::getline(in, line);) {
    if (line.size() > 6 && line.find_first_not_of(' ') != std::string::npos &&
        std::isdigit(static_cast<unsigned char>(line[line.find_first_not_of(' ')])) &&
        line.find(".") != std::string::npos)
      ++rows;
  }
  EXPECT_EQ(rows, 3) << r.out;
}

TEST_F(CliModes, ErrorsAreOneLineWithNonZeroExit) {
  const std::string good = Write("bar.json", kPinnedBar);
  const std::string bad = Write("bad.json", R"({"length_m": -1})");
  // Beyond buckling: pinned Euler load pi^2 EI / L^2 = 1658 N.
  CliRun r = Taut({"modes", "--member", good, "--axial-force", "-2000"});
  EXPECT_EQ(r.code, 1);
  EXPECT_NE(r.err.find("buckling"), std::string::npos) << r.err;
  EXPECT_EQ(std::count(r.err.begin(), r.err.end(), '\n'), 1) << r.err;
  r = Taut({"modes", "--member", bad, "--axial-force", "1000"});
  EXPECT_EQ(r.code, 1);
  EXPECT_NE(r.err.find("$.length_m"), std::string::npos) << r.err;
  EXPECT_EQ(std::count(r.err.begin(), r.err.end(), '\n'), 1) << r.err;
  r = Taut({"modes", "--member", good, "--axial-force", "1000", "--fixity-left", "1.5"});
  EXPECT_EQ(r.code, 2) << r.err;
  r = Taut({"modes", "--member", good});
  EXPECT_EQ(r.code, 2);
  EXPECT_NE(r.err.find("axial-force"), std::string::npos) << r.err;
  r = Taut({"modes", "--member", (dir_ / "absent.json").string(), "--axial-force", "1"});
  EXPECT_EQ(r.code, 2) << r.err;
}

// Overrides: --fixity-left 1 --fixity-right 1 on a pinned-declared bar is
// the clamped-clamped beam; at N = 0 its beta_1 L = 4.7300 (Blevins 1979,
// Table 8-1), to the table's 4 decimals.
TEST_F(CliModes, FixityOverridesReachClampedBeam) {
  const std::string member = Write("bar.json", kPinnedBar);
  const CliRun r = Taut({"modes", "--member", member, "--axial-force", "0", "--fixity-left", "1",
                         "--fixity-right", "1", "--elements", "200", "--modes", "1", "--json"});
  ASSERT_EQ(r.code, 0) << r.err;
  const auto j = nlohmann::json::parse(r.out);
  const double f = j["modes"][0]["frequency_hz"].get<double>();
  const double beta_l = std::sqrt(2 * std::numbers::pi * f * 25.0 / std::sqrt(2.1e11 * 2e-8 / (7850 * 5e-4)));
  EXPECT_NEAR(beta_l, 4.7300, 5e-5);
}

}  // namespace
}  // namespace taut::server
