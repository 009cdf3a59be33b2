// `taut modal` end to end (in process, through server::Main): a record made
// from the beam model of the invented example member maltings-east-tie-2 at
// its design force, so that the bending orders are known.
#include <gtest/gtest.h>
#include <unistd.h>

#include <algorithm>
#include <filesystem>
#include <fstream>
#include <nlohmann/json.hpp>
#include <sstream>

#include "../estimation/synthetic.h"
#include "estimation/cautions.h"
#include "model/modal.h"
#include "server/cli.h"
#include "server/member_json.h"

namespace taut::server {
namespace {

class CliModal : public ::testing::Test {
 protected:
  void SetUp() override {
    dir_ = std::filesystem::temp_directory_path() / ("taut_cli_modal_" + std::to_string(::getpid()));
    std::filesystem::create_directories(dir_);
    member_path_ = std::string(TAUT_EXAMPLES_DIR) + "/maltings-east-tie-2.json";
    model::Member m;
    ASSERT_TRUE(LoadMemberFile(member_path_, &m).ok());
    model::ModalParameters p;
    p.axial_force_n = *m.design_axial_force_n;
    model::ModalResult r;
    ASSERT_TRUE(model::ComputeModes(m, model::Direction::kVertical, p, 3, &r).ok());
    std::vector<double> f, z, drive;
    Eigen::MatrixXd shapes(3, 3);
    for (int k = 0; k < 3; ++k) {
      f.push_back(r.modes[static_cast<std::size_t>(k)].frequency_hz);
      model_f_.push_back(f.back());
      z.push_back(0.006);
      drive.push_back(1.0);
      for (int s = 0; s < 3; ++s)
        shapes(s, k) = r.modes[static_cast<std::size_t>(k)].shape_at_sensors[static_cast<std::size_t>(s)];
    }
    const double fs = 256.0;
    const Eigen::MatrixXd y =
        testing::SimulateModal(f, z, shapes, drive, fs, static_cast<Eigen::Index>(200 * fs), 4);
    record_path_ = (dir_ / "r.csv").string();
    std::ofstream o(record_path_);
    o << "# recorded_at=2026-11-20T10:00:00Z\n# temperature_c=8.5\ntime_s,v1,v2,v3\n";
    o.precision(9);
    for (Eigen::Index k = 0; k < y.rows(); ++k)
      o << k / fs << "," << y(k, 0) << "," << y(k, 1) << "," << y(k, 2) << "\n";
  }
  void TearDown() override { std::filesystem::remove_all(dir_); }

  long ErrLines() const {
    const std::string e = err_.str();
    return std::count(e.begin(), e.end(), '\n');
  }

  int Run(std::vector<std::string> args) {
    args.insert(args.begin(), "taut");
    std::vector<const char*> argv;
    for (auto& a : args) argv.push_back(a.c_str());
    out_.str("");
    err_.str("");
    return Main(static_cast<int>(argv.size()), argv.data(), out_, err_);
  }

  std::filesystem::path dir_;
  std::string member_path_, record_path_;
  std::vector<double> model_f_;
  std::ostringstream out_, err_;
};

// JSON: docs/FORMATS.md section 3 `modes` (order, frequency_hz, frequency_std_hz,
// damping_ratio, shape keyed by channel) plus cautions and notice. The
// record is made from the model at the design force, so orders 1..3 must
// be assigned and frequencies match the model within the reported std.
TEST_F(CliModal, JsonWithMemberHasOrdersCautionsNotice) {
  ASSERT_EQ(Run({"modal", "--record", record_path_, "--member", member_path_, "--json"}), 0) << err_.str();
  const auto j = nlohmann::json::parse(out_.str());
  ASSERT_EQ(j["modes"].size(), 3u);
  for (int k = 0; k < 3; ++k) {
    const auto& m = j["modes"][static_cast<std::size_t>(k)];
    EXPECT_EQ(m["order"].get<int>(), k + 1);
    // Within 4 reported standard deviations (the std itself is checked by
    // test_modal_id's chi-square test).
    EXPECT_NEAR(m["frequency_hz"].get<double>(), model_f_[static_cast<std::size_t>(k)],
                4.0 * m["frequency_std_hz"].get<double>());
    EXPECT_GT(m["frequency_std_hz"].get<double>(), 0.0);
    EXPECT_TRUE(m["shape"].contains("v1") && m["shape"].contains("v2") && m["shape"].contains("v3"));
    EXPECT_TRUE(m.contains("damping_ratio"));
  }
  EXPECT_TRUE(j["cautions"].is_array());
  EXPECT_EQ(j["notice"].get<std::string>(), estimation::StandingNotice());
  EXPECT_EQ(j["temperature_c"].get<double>(), 8.5);
}

TEST_F(CliModal, TableWithoutMemberHasNoOrderAndTheNotice) {
  ASSERT_EQ(Run({"modal", "--record", record_path_}), 0) << err_.str();
  const std::string t = out_.str();
  EXPECT_NE(t.find("freq_hz"), std::string::npos);
  EXPECT_NE(t.find("cautions:"), std::string::npos);
  EXPECT_NE(t.find(estimation::StandingNotice()), std::string::npos);
  ASSERT_EQ(Run({"modal", "--record", record_path_, "--json"}), 0);
  const auto j = nlohmann::json::parse(out_.str());
  for (const auto& m : j["modes"]) EXPECT_FALSE(m.contains("order"));
}

// Unusable input: exit 1 and exactly one line on stderr that names the rule.
TEST_F(CliModal, BadInputOneLineExitOne) {
  {
    std::ofstream o(dir_ / "bad.csv");
    o << "time_s,v1\n0,0.1\n0.01,nan\n";
  }
  EXPECT_EQ(Run({"modal", "--record", (dir_ / "bad.csv").string()}), 1);
  EXPECT_NE(err_.str().find("line 3, column 2 (v1)"), std::string::npos) << err_.str();
  EXPECT_EQ(ErrLines(), 1);
  EXPECT_EQ(Run({"modal", "--record", record_path_, "--band", "40"}), 1);
  EXPECT_NE(err_.str().find("--band"), std::string::npos);
  EXPECT_EQ(ErrLines(), 1);
  {
    std::ofstream o(dir_ / "other.csv");
    o << "time_s,x9\n";
  }
  EXPECT_EQ(Run({"modal", "--record", (dir_ / "other.csv").string(), "--member", member_path_}), 1);
  EXPECT_NE(err_.str().find("not a sensor"), std::string::npos) << err_.str();
}

}  // namespace
}  // namespace taut::server
