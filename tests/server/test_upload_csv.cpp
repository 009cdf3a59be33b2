// Reading records as the CLI (--profile, note lines) and the upload route
// (query overrides, ?profile=) do: the same reader, the same rules, the
// answers docs/API.md names. Members and records are invented.
#include <gtest/gtest.h>

#include <cmath>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <sstream>

#include "server/import_profile_json.h"
#include "server/upload_csv.h"
#include "tests/server/cli_test_support.h"

namespace taut::server {
namespace {

// 12 s at 100 Hz, channels K1 K2 as a logger writes them: semicolons,
// decimal commas, millivolts, a line of logger text.
std::string LoggerCsv() {
  std::ostringstream o;
  o << "Invented logger LX-2, export\n# recorded_at=2026-11-20T10:00:00Z\n# units=mV\ntime_ms;v1;v2\n";
  for (int i = 0; i < 1200; ++i) {
    const double t = i / 100.0;
    char buf[96];
    std::snprintf(buf, sizeof buf, "%d;%.6f;%.6f\n", i * 10, 50.0 * std::sin(2 * M_PI * 7 * t),
                  -25.0 * std::cos(2 * M_PI * 11 * t));
    std::string row = buf;
    for (char& c : row)
      if (c == '.') c = ',';
    o << row;
  }
  return o.str();
}

model::Member Member() {
  model::Member m;
  m.id = "invented-hanger-u1";
  m.length_m = 6.0;
  m.sensors = {{"v1", 2.0, 0.03, model::Direction::kVertical},
               {"v2", 4.0, 0.03, model::Direction::kVertical}};
  m.sensors[0].sensitivity_mv_per_g = 100.0;
  m.sensors[1].sensitivity_mv_per_g = 50.0;
  m.sensors[1].polarity = -1;
  return m;
}

TEST(RecordUpload, DialectQueryOverridesAndStatuses) {
  const model::Member m = Member();
  estimation::Record r;
  int status = 0;
  Status s = ReadUploadedCsv(LoggerCsv(), m, {}, &r, &status);
  ASSERT_TRUE(s.ok()) << s.message;
  // 50 mV at 100 mV/g is 0.5 g; -25 mV at 50 mV/g with polarity -1 is
  // +0.5 g (standard gravity 9.80665 m/s^2, ISO 80000-3).
  EXPECT_NEAR(r.samples.col(0).cwiseAbs().maxCoeff(), 0.5 * 9.80665, 1e-3 * 9.80665);
  EXPECT_NEAR(r.samples(0, 1), 0.5 * 9.80665, 1e-12);
  EXPECT_EQ(r.sample_rate_hz, 100.0);
  EXPECT_GE(r.notes.size(), 4u);  // logger text, separator, time_ms, units, calibration

  UploadCsvParams future;
  future.recorded_at = "2999-01-01T00:00:00Z";
  EXPECT_FALSE(ReadUploadedCsv(LoggerCsv(), m, future, &r, &status).ok());
  EXPECT_EQ(status, 422);
  UploadCsvParams units;
  units.units = "furlongs";
  s = ReadUploadedCsv(LoggerCsv(), m, units, &r, &status);
  EXPECT_EQ(status, 400);
  EXPECT_NE(s.message.find("m/s2, g, mg, V or mV"), std::string::npos) << s.message;
  UploadCsvParams bad_profile;
  bad_profile.profile = R"({"delimiter": ";", "skiplines": 1})";
  s = ReadUploadedCsv(LoggerCsv(), m, bad_profile, &r, &status);
  EXPECT_EQ(status, 400);
  EXPECT_NE(s.message.find("$.skiplines"), std::string::npos) << s.message;
  // A profile that renames: K1/K2 columns of another logger feed v1/v2.
  std::string renamed = LoggerCsv();
  renamed.replace(renamed.find("time_ms;v1;v2"), 13, "ms;K1;K2");
  UploadCsvParams profile;
  profile.profile =
      R"({"time": {"column": "ms", "kind": "milliseconds"},
          "channels": [{"column": "K1", "channel": "v1"}, {"column": "K2", "channel": "v2"}]})";
  estimation::Record p;
  s = ReadUploadedCsv(renamed.substr(renamed.find('\n') + 1), m, profile, &p, &status);
  ASSERT_TRUE(s.ok()) << s.message;
  ASSERT_TRUE(ReadUploadedCsv(LoggerCsv(), m, {}, &r, &status).ok());
  EXPECT_EQ(std::memcmp(p.samples.data(), r.samples.data(), sizeof(double) * r.samples.size()), 0);
}

TEST(RecordUpload, CliProfileAndNotes) {
  const auto dir = std::filesystem::temp_directory_path() / ("taut-cli-record-" + std::to_string(::getpid()));
  std::filesystem::create_directories(dir);
  const std::string csv = (dir / "r.csv").string(), profile = (dir / "p.json").string(),
                    bad = (dir / "bad.json").string();
  std::string text = LoggerCsv();
  text.replace(text.find("# units=mV\n"), 11, "");
  std::ofstream(csv) << text;
  std::ofstream(profile) << R"({"units": "g"})";
  std::ofstream(bad) << R"({"units": "g", "time": {"kind": "hours"}})";
  auto r = testing::Taut({"modal", "--record", csv, "--json"});
  EXPECT_EQ(r.code, 0) << r.err;
  EXPECT_NE(r.err.find("taut modal: note: " + csv + ": 1 line(s) of logger text"), std::string::npos)
      << r.err;
  r = testing::Taut({"modal", "--record", csv, "--profile", profile, "--json"});
  EXPECT_EQ(r.code, 0) << r.err;
  EXPECT_NE(r.err.find("units g converted"), std::string::npos) << r.err;
  r = testing::Taut({"modal", "--record", csv, "--profile", bad});
  EXPECT_EQ(r.code, 1);
  EXPECT_NE(r.err.find("$.time.kind"), std::string::npos) << r.err;
  std::filesystem::remove_all(dir);
}

}  // namespace
}  // namespace taut::server
