// `taut simulate`: record CSV format (docs/FORMATS.md section 2) and the
// physics of what it writes.
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

struct Csv {
  std::vector<std::string> meta, header;
  std::vector<std::vector<double>> rows;
};

Csv ParseCsv(const std::string& text) {
  Csv c;
  std::istringstream in(text);
  for (std::string line; std::getline(in, line);) {
    if (line.rfind("#", 0) == 0) {
      c.meta.push_back(line);
      continue;
    }
    std::vector<std::string> cells;
    std::istringstream ls(line);
    for (std::string cell; std::getline(ls, cell, ',');) cells.push_back(cell);
    if (c.header.empty()) {
      c.header = cells;
      continue;
    }
    std::vector<double> row;
    for (const auto& cell : cells) row.push_back(std::stod(cell));
    c.rows.push_back(row);
  }
  return c;
}

const std::string kMember = std::string(TAUT_EXAMPLES_DIR) + "/maltings-east-tie-2.json";

// Format: metadata lines, header "time_s" + the member's sensor channels,
// one row per sample at a uniform step of 1/rate, duration * rate + 1 rows.
TEST(CliSimulate, WritesFormatsSection2Record) {
  const CliRun r = Taut({"simulate", "--member", kMember, "--axial-force", "30000", "--impact", "2.0:1.0",
                         "--duration", "10", "--rate", "256", "--damping", "0.01", "--temperature", "8.5"});
  ASSERT_EQ(r.code, 0) << r.err;
  const Csv c = ParseCsv(r.out);
  EXPECT_EQ(c.header, (std::vector<std::string>{"time_s", "v1", "v2", "v3"}));
  ASSERT_EQ(c.rows.size(), 10u * 256u + 1u);
  for (size_t i = 1; i < c.rows.size(); ++i) {
    ASSERT_EQ(c.rows[i].size(), 4u);
    EXPECT_NEAR(c.rows[i][0] - c.rows[i - 1][0], 1.0 / 256, 1.01e-6);  // 6 decimals written
  }
  bool units = false, excitation = false, temperature = false;
  for (const auto& m : c.meta) {
    units |= m == "# units=m/s2";
    excitation |= m == "# excitation=impact";
    temperature |= m == "# temperature_c=8.5";
  }
  EXPECT_TRUE(units && excitation && temperature);
}

// Released from rest in mode 1 at a small amplitude (a/r = 0.01, so the
// nonlinear shift (3/32)(a/r)^2 ~ 1e-5 is negligible), the motion is simple
// harmonic: the acceleration at t = 0 is -omega_1^2 times the displacement
// (e.g. Timoshenko, Young and Weaver 1974, sec. 1.1). The displacement at
// each sensor is the amplitude times the mode shape ratio reported by
// `taut modes` (both commands given 40 elements, so they share the mesh).
// Tolerance 1e-3: well above the nonlinear shift (1e-5) and the static
// sag's coupling, far below any error in the wiring of the output.
TEST(CliSimulate, InitialModeAccelerationIsMinusOmegaSquaredDisplacement) {
  const double amplitude = 0.01 * 0.028 / 4.0;
  const CliRun s =
      Taut({"simulate", "--member", kMember, "--axial-force", "30000", "--initial-mode", "1", "--amplitude",
            std::to_string(amplitude), "--duration", "1", "--rate", "1000", "--elements", "40"});
  ASSERT_EQ(s.code, 0) << s.err;
  const CliRun m = Taut(
      {"modes", "--member", kMember, "--axial-force", "30000", "--modes", "1", "--elements", "40", "--json"});
  ASSERT_EQ(m.code, 0) << m.err;
  const auto modes = nlohmann::json::parse(m.out);
  const double f1 = modes["modes"][0]["frequency_hz"].get<double>();
  const double omega2 = std::pow(2 * std::numbers::pi * f1, 2);
  const auto& shape = modes["modes"][0]["shape"];
  // The largest |w| of mode 1 of this symmetric tie is at mid-span, where
  // sensor v2 sits, so v2 reads the full amplitude.
  const double peak = shape["v2"].get<double>();
  const Csv c = ParseCsv(s.out);
  for (int col = 1; col <= 3; ++col) {
    const double displacement = amplitude * shape[c.header[col]].get<double>() / peak;
    EXPECT_NEAR(c.rows[0][col] / (-omega2 * displacement), 1.0, 1e-3) << c.header[col];
  }
}

TEST(CliSimulate, BadRequestsAreOneLineErrors) {
  for (const std::vector<std::string>& args :
       std::vector<std::vector<std::string>>{{"--impact", "9.0:1.0"},  // outside the 5.8 m span
                                             {"--impact", "2.0"},      // no impulse
                                             {"--initial-mode", "1"},  // no amplitude
                                             {"--impact", "2.0:1.0", "--initial-mode", "1"}})  // two sources
  {
    std::vector<std::string> full = {"simulate", "--member", kMember, "--axial-force", "30000", "--duration",
                                     "1",        "--rate",   "100"};
    full.insert(full.end(), args.begin(), args.end());
    const CliRun r = Taut(full);
    EXPECT_EQ(r.code, 1) << args[0];
    EXPECT_EQ(std::count(r.err.begin(), r.err.end(), '\n'), 1) << r.err;
  }
}

}  // namespace
}  // namespace taut::server
