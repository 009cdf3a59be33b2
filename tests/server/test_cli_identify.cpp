// `taut identify` end to end: member JSON + record CSV -> result.
//
// Truth: records synthesised from the forward model with known N, EI and
// fixities (synthetic_record.h); the invented member is the example
// examples/maltings-east-tie-2.json (5.8 m, 28 mm, elastic ends, sensors at
// the quarter points). Contract: docs/FORMATS.md sections 1-3 and docs/DESIGN.md
// "Interfaces" (exit 0 on a result, non-zero and one stderr line on bad
// input).
#include <gtest/gtest.h>

#include <algorithm>
#include <filesystem>
#include <fstream>
#include <nlohmann/json.hpp>
#include <sstream>

#include "estimation/cautions.h"
#include "server/cli.h"
#include "server/member_json.h"
#include "synthetic_record.h"

namespace taut::server {
namespace {

namespace fs = std::filesystem;

class CliIdentify : public ::testing::Test {
 protected:
  void SetUp() override {
    dir_ = fs::temp_directory_path() /
           ("taut-cli-identify-" + std::to_string(::testing::UnitTest::GetInstance()->random_seed()) + "-" +
            ::testing::UnitTest::GetInstance()->current_test_info()->name());
    fs::create_directories(dir_);
    member_path_ = std::string(TAUT_EXAMPLES_DIR) + "/maltings-east-tie-2.json";
    ASSERT_TRUE(LoadMemberFile(member_path_, &member_).ok());
    truth_.axial_force_n = 35000.0;
    truth_.fixity_left = 0.4;
    truth_.fixity_right = 0.6;
  }
  void TearDown() override { fs::remove_all(dir_); }

  int Run(std::vector<std::string> args, std::string* out, std::string* err) {
    args.insert(args.begin(), "taut");
    std::vector<const char*> argv;
    for (const auto& a : args) argv.push_back(a.c_str());
    std::ostringstream o, e;
    const int code = Main(static_cast<int>(argv.size()), argv.data(), o, e);
    *out = o.str();
    *err = e.str();
    return code;
  }

  fs::path dir_;
  std::string member_path_;
  model::Member member_;
  model::ModalParameters truth_;
};

TEST_F(CliIdentify, JsonResultRecoversForceFromSyntheticRecord) {
  // 120 s at 256 Hz, five modes, 1 % damping, 2 % sensor noise. The modal
  // identification's frequency error on such a record is a few 0.1 % (its
  // own stated std), the force error about twice that plus the fixity
  // trade-off: the truth must lie inside the reported 95 % interval, and
  // within 3 % (a bound, not a golden value: 10 x a 0.15 % frequency error).
  const std::string record = (dir_ / "tie.csv").string();
  ASSERT_TRUE(testing::WriteSyntheticRecord(record, member_, model::Direction::kVertical, truth_, {}));
  std::string out, err;
  ASSERT_EQ(Run({"identify", "--member", member_path_, "--record", record, "--json"}, &out, &err), 0) << err;
  const nlohmann::json j = nlohmann::json::parse(out);
  const double n = j["axial_force_n"]["value"];
  const double lo = j["axial_force_n"]["ci95"][0], hi = j["axial_force_n"]["ci95"][1];
  std::printf("[ cli ] N %.6g (truth %.6g, %.2f %%), ci95 [%.6g, %.6g], %zu paired modes, cautions %s\n", n,
              truth_.axial_force_n, 100 * (n / truth_.axial_force_n - 1), lo, hi, j["modes"].size(),
              j["cautions"].dump().c_str());
  EXPECT_NEAR(n / truth_.axial_force_n, 1.0, 0.03);
  EXPECT_LE(lo, truth_.axial_force_n);
  EXPECT_GE(hi, truth_.axial_force_n);
  EXPECT_GE(j["modes"].size(), 2u);
  EXPECT_EQ(j["fit"]["model"], "modal");
  EXPECT_EQ(j["notice"], estimation::StandingNotice());
  EXPECT_EQ(j["record"]["temperature_c"], 12.5);
  EXPECT_NE(j["verdict"]["code"], "unusable");
  for (const auto& c : j["cautions"]) EXPECT_TRUE(c.contains("severity")) << c.dump();
  EXPECT_TRUE(err.empty()) << err;
}

TEST_F(CliIdentify, TableNamesForceIntervalModesAndNotice) {
  const std::string record = (dir_ / "tie.csv").string();
  ASSERT_TRUE(testing::WriteSyntheticRecord(record, member_, model::Direction::kVertical, truth_, {}));
  std::string out, err;
  ASSERT_EQ(
      Run({"identify", "--member", member_path_, "--record", record, "--temperature", "3.5"}, &out, &err), 0)
      << err;
  // The verdict line comes first (SHARED-DECISIONS item 1).
  EXPECT_EQ(out.rfind("verdict: Usable", 0), 0u) << out;
  EXPECT_NE(out.find("axial force"), std::string::npos) << out;
  EXPECT_NE(out.find("kN"), std::string::npos) << out;
  EXPECT_NE(out.find("95 %"), std::string::npos) << out;
  EXPECT_NE(out.find("measured_hz"), std::string::npos) << out;
  EXPECT_NE(out.find("3.5 C"), std::string::npos) << out;  // the flag overrides the file's 12.5
  EXPECT_NE(out.find(estimation::StandingNotice()), std::string::npos) << out;
}

TEST_F(CliIdentify, TableShowsTheUncertaintyBudgetAndTheSimplifiedFormulas) {
  // Issue 17: the table ends with the budget of the force (its sources by
  // share; the example member declares no tolerance, so the defaults of
  // docs/FORMATS.md 1.1 apply and say so) and the two simplified formulas,
  // labelled as such.
  const std::string record = (dir_ / "tie.csv").string();
  ASSERT_TRUE(testing::WriteSyntheticRecord(record, member_, model::Direction::kVertical, truth_, {}));
  std::string out, err;
  ASSERT_EQ(Run({"identify", "--member", member_path_, "--record", record}, &out, &err), 0) << err;
  EXPECT_NE(out.find("uncertainty of the axial force"), std::string::npos) << out;
  EXPECT_NE(out.find("density (default 78 kg/m3)"), std::string::npos) << out;  // 1 % of 7800 kg/m3
  EXPECT_NE(out.find("measured frequencies"), std::string::npos) << out;
  EXPECT_NE(out.find("simplified formulas (for comparison only): taut string from f1"), std::string::npos)
      << out;
  EXPECT_NE(out.find("why taut differs:"), std::string::npos) << out;
  ASSERT_EQ(Run({"identify", "--member", member_path_, "--record", record, "--json"}, &out, &err), 0) << err;
  const nlohmann::json j = nlohmann::json::parse(out);
  ASSERT_TRUE(j.contains("uncertainty_budget")) << out;
  double share = 0.0;
  for (const auto& x : j["uncertainty_budget"]["sources"]) share += x["share"].get<double>();
  // A rest of the fit's variance below 1e-6 of it is not listed
  // (tolerance_budget.cpp), so the shares sum to 1 within 1e-6.
  EXPECT_NEAR(share, 1.0, 1e-6);
  // The reported std of N is the budget's total (fit and tolerances in quadrature).
  EXPECT_NEAR(
      j["axial_force_n"]["std"].get<double>() / j["uncertainty_budget"]["axial_force_std_n"].get<double>(),
      1.0, 0.05);
  ASSERT_TRUE(j.contains("simplified_formulas"));
  EXPECT_GT(j["simplified_formulas"]["taut_string_force_n"].get<double>(), 0.0);
}

// `taut identify --modes` with the published frequencies of two beams
// (Blevins, Formulas for Natural Frequency and Mode Shape, 1979, table 8-1:
// pinned-pinned with the axial-load term of sec. 8.3, f_n = n/(2L)
// sqrt(N/m + n^2 pi^2 EI/(m L^2)) at N = 30 kN; clamped-clamped without
// axial force, f_n = lambda_n^2/(2 pi L^2) sqrt(EI/m), lambda = 4.73004074,
// 7.85320462, 10.9956078), written as a modes file (docs/FORMATS.md
// section 4) with std 1e-4 f: the force comes back to 1e-4 (of N for the
// pinned bar; of the Euler load pi^2 EI / L^2 for the clamped one, N = 0).
TEST_F(CliIdentify, SuppliedBlevinsFrequenciesGiveBackTheForce) {
  constexpr double kPi = 3.14159265358979323846;
  const double lambda[] = {4.73004074, 7.85320462, 10.9956078};
  for (const char* ends : {"pinned", "clamped"}) {
    const bool pinned = std::string(ends) == "pinned";
    nlohmann::json mj = MemberToJson(member_);
    mj["inclination_deg"] = 90.0;  // a hanger: no sag, as the closed forms assume
    mj["ends"]["left"]["rotation"] = ends;
    mj["ends"]["right"]["rotation"] = ends;
    for (auto& sensor : mj["sensors"]) sensor["mass_kg"] = 0.0;
    const std::string member_path = (dir_ / (std::string(ends) + ".json")).string();
    std::ofstream(member_path) << mj.dump(2);
    model::Member m;
    ASSERT_TRUE(LoadMemberFile(member_path, &m).ok());
    const double L = m.length_m, mass = m.MassPerLength_kg_m(),
                 ei = m.NominalBendingStiffness_nm2(model::Direction::kVertical), force = pinned ? 30e3 : 0.0;
    nlohmann::json modes = {{"source", "Blevins 1979 table 8-1"}, {"modes", nlohmann::json::array()}};
    for (int n = 1; n <= 3; ++n) {
      const double f = pinned
                           ? n / (2 * L) * std::sqrt(force / mass + n * n * kPi * kPi * ei / (mass * L * L))
                           : lambda[n - 1] * lambda[n - 1] / (2 * kPi * L * L) * std::sqrt(ei / mass);
      modes["modes"].push_back(
          {{"frequency_hz", f}, {"frequency_std_hz", 1e-4 * f}, {"damping_ratio", 0.005}});
    }
    const std::string modes_path = (dir_ / (std::string(ends) + "-modes.json")).string();
    std::ofstream(modes_path) << modes.dump(2);
    std::string out, err;
    ASSERT_EQ(Run({"identify", "--member", member_path, "--modes", modes_path, "--json"}, &out, &err), 0)
        << err;
    const nlohmann::json j = nlohmann::json::parse(out);
    const double n = j["axial_force_n"]["value"];
    const double scale = pinned ? force : kPi * kPi * ei / (L * L);
    std::printf("[ --modes ] %s: N %.8g (truth %.6g)\n", ends, n, force);
    EXPECT_NEAR((n - force) / scale, 0.0, 1e-4) << ends;
    EXPECT_EQ(j["cautions"][0]["code"], "modes-supplied");
    EXPECT_EQ(j["cautions"][0]["severity"], "info");
    EXPECT_EQ(j["modes_supplied"]["count"], 3);
    EXPECT_EQ(j["notice"], estimation::StandingNotice());
    EXPECT_TRUE(j.contains("uncertainty_budget"));
  }
}

TEST_F(CliIdentify, ModesFileErrorsNameTheirPath) {
  const std::string bad = (dir_ / "bad-modes.json").string();
  std::ofstream(bad)
      << R"({"modes": [{"frequency_hz": 4.0, "frequency_std_hz": 0.01, "shape": {"zz": 1.0}}]})";
  std::string out, err;
  EXPECT_EQ(Run({"identify", "--member", member_path_, "--modes", bad}, &out, &err), 1);
  EXPECT_NE(err.find("$.modes[0].shape.zz: is not a sensor channel of the member"), std::string::npos) << err;
  std::ofstream(bad) << R"({"modes": [{"frequency_hz": 4.0}]})";
  EXPECT_EQ(Run({"identify", "--member", member_path_, "--modes", bad}, &out, &err), 1);
  EXPECT_NE(err.find("$.modes[0].frequency_std_hz: required key is missing"), std::string::npos) << err;
  EXPECT_EQ(Run({"identify", "--member", member_path_}, &out, &err), 1);
  EXPECT_NE(err.find("--record FILE"), std::string::npos) << err;
}

TEST_F(CliIdentify, ChannelNotInMemberIsOneClearError) {
  testing::RecordSpec spec;
  spec.duration_s = 20.0;
  spec.channel_override = {"v1", "x9", "v3"};
  const std::string record = (dir_ / "bad-channel.csv").string();
  ASSERT_TRUE(testing::WriteSyntheticRecord(record, member_, model::Direction::kVertical, truth_, spec));
  std::string out, err;
  EXPECT_EQ(Run({"identify", "--member", member_path_, "--record", record}, &out, &err), 1);
  EXPECT_NE(err.find("x9"), std::string::npos) << err;
  EXPECT_EQ(std::count(err.begin(), err.end(), '\n'), 1) << err;
  EXPECT_TRUE(out.empty());
}

// A refusal (issue 12): the member declares material.yield_strength_pa =
// 20 MPa while the record's 35 kN in a 28 mm bar is a stress of
// 35000 / (pi 0.014^2) = 56.8 MPa: the estimate is refused as implausible,
// the JSON still printed with verdict "unusable" (so the engineer sees
// why), the reason on stderr in one line, exit code 1.
TEST_F(CliIdentify, ImplausibleStressIsRefusedWithExitOne) {
  nlohmann::json m = MemberToJson(member_);
  m["material"]["yield_strength_pa"] = 20e6;
  const std::string member = (dir_ / "weak-material.json").string();
  std::ofstream(member) << m.dump();
  const std::string record = (dir_ / "tie.csv").string();
  ASSERT_TRUE(testing::WriteSyntheticRecord(record, member_, model::Direction::kVertical, truth_, {}));
  std::string out, err;
  EXPECT_EQ(Run({"identify", "--member", member, "--record", record, "--json"}, &out, &err), 1);
  const nlohmann::json j = nlohmann::json::parse(out);
  EXPECT_EQ(j["verdict"]["code"], "unusable");
  EXPECT_EQ(j["verdict"]["summary"].get<std::string>().rfind("Repeat the record: ", 0), 0u);
  bool refusal = false;
  for (const auto& c : j["cautions"])
    refusal |= c["code"] == "implausible-stress" && c["severity"] == "unusable";
  EXPECT_TRUE(refusal) << j["cautions"].dump();
  EXPECT_NE(err.find("Repeat the record"), std::string::npos) << err;
  EXPECT_EQ(std::count(err.begin(), err.end(), '\n'), 1) << err;
}

TEST_F(CliIdentify, SensorOutsideSpanIsOneClearError) {
  nlohmann::json m = MemberToJson(member_);
  m["sensors"][1]["position_m"] = 7.3;  // the member is 5.8 m long
  const std::string member = (dir_ / "bad-member.json").string();
  std::ofstream(member) << m.dump();
  const std::string record = (dir_ / "tie.csv").string();
  testing::RecordSpec spec;
  spec.duration_s = 20.0;
  ASSERT_TRUE(testing::WriteSyntheticRecord(record, member_, model::Direction::kVertical, truth_, spec));
  std::string out, err;
  EXPECT_EQ(Run({"identify", "--member", member, "--record", record}, &out, &err), 1);
  EXPECT_NE(err.find("sensors[1].position_m"), std::string::npos) << err;
  EXPECT_EQ(std::count(err.begin(), err.end(), '\n'), 1) << err;
}

TEST_F(CliIdentify, RecordWithoutModeIsOneClearError) {
  // A record that carries no signal (every channel zero): the modal
  // identification returns no mode, and there is nothing to fit.
  const std::string record = (dir_ / "flat.csv").string();
  {
    std::ofstream f(record);
    f.precision(12);
    f << "time_s,v1,v2,v3\n";
    for (int k = 0; k < 256 * 20; ++k) f << k / 256.0 << ",0,0,0\n";
  }
  std::string out, err;
  EXPECT_EQ(Run({"identify", "--member", member_path_, "--record", record}, &out, &err), 1);
  EXPECT_NE(err.find("no mode"), std::string::npos) << err;
  EXPECT_EQ(std::count(err.begin(), err.end(), '\n'), 1) << err;
  EXPECT_TRUE(out.empty());
}

}  // namespace
}  // namespace taut::server
