// The alert rules that need storage (server/alert_rules.h): the stale-data
// rule against the clock, counting usable estimates only, and the baseline
// restart taken from the logbook. Expected values are by hand from the
// definitions in estimation/drift.h items 5 to 7.
#include <gtest/gtest.h>

#include <cmath>
#include <fstream>
#include <nlohmann/json.hpp>
#include <sstream>
#include <string>

#include "server/alert_rules.h"
#include "server/triage.h"
#include "storage/logbook.h"
#include "tests/storage/storage_test_support.h"

namespace taut::server {
namespace {

using storage::Id;
using storage::testing::MakeFixture;
using storage::testing::SmallRecord;
using storage::testing::TempDbFile;

constexpr std::int64_t kHour = 3'600'000;

class AlertRulesTest : public ::testing::Test {
 protected:
  void SetUp() override { ASSERT_TRUE(storage::OpenAndMigrate(db_, file_.path()).ok()); }

  // Stores an estimate of 40 kN measured at `at` with the given verdict
  // ("" = a result without one).
  Id AddEstimate(const storage::testing::Fixture& f, std::int64_t at, const std::string& verdict) {
    storage::RecordInsertResult r;
    EXPECT_TRUE(repo_.InsertRecord(f.org, SmallRecord(f.member, ++content_, at), 1, &r).ok());
    storage::Job job;
    bool claimed = false;
    EXPECT_TRUE(repo_.ClaimNextJob(2, &job, &claimed).ok());
    EXPECT_TRUE(claimed);
    storage::NewEstimate e;
    e.record_id = r.record_id;
    e.axial_force_n = 40e3;
    e.force_std_n = 400;
    e.force_ci95_low_n = 39.2e3;
    e.force_ci95_high_n = 40.8e3;
    e.result_json = verdict.empty() ? "{}" : R"({"verdict": {"code": ")" + verdict + R"(", "summary": "."}})";
    Id id = 0;
    EXPECT_TRUE(repo_.CompleteJobWithEstimate(job.id, e, 3, &id).ok());
    return id;
  }

  TempDbFile file_;
  storage::Database db_;
  storage::Repository repo_{db_};
  unsigned long long content_ = 0;
};

TEST_F(AlertRulesTest, StaleDataFiresOnceAfterTheSilenceCountingUsableEstimatesOnly) {
  const auto f = MakeFixture(repo_, "Harbour Works");
  AddEstimate(f, 0, "");
  const Id usable = AddEstimate(f, 1 * kHour, "reduced-confidence");
  AddEstimate(f, 2 * kHour, "unusable");
  std::vector<std::string> lines;
  const auto log = [&](const std::string& l) { lines.push_back(l); };
  EXPECT_EQ(CheckStaleData(repo_, 100 * kHour, log), 0) << "off until the member sets max_silence_hours";
  ASSERT_TRUE(repo_.SetDriftSettings(f.org, f.member, R"({"max_silence_hours": 6})", 5).ok());
  // Newest usable estimate at 1 h (the unusable one at 2 h does not count):
  // silent for more than 6 h from 7 h on.
  EXPECT_EQ(CheckStaleData(repo_, 7 * kHour, log), 0);
  EXPECT_EQ(CheckStaleData(repo_, 7 * kHour + 1, log), 1);
  std::vector<storage::Alert> alerts;
  ASSERT_TRUE(repo_.ListAlerts(f.org, {f.member, std::nullopt}, &alerts).ok());
  ASSERT_EQ(alerts.size(), 1u);
  EXPECT_EQ(alerts[0].rule, "stale-data");
  ASSERT_TRUE(alerts[0].estimate_id.has_value());
  EXPECT_EQ(*alerts[0].estimate_id, usable);
  EXPECT_NE(alerts[0].message.find("6.0 h"), std::string::npos) << alerts[0].message;
  // Still silent: the open alert stands, nothing new; resolved, the same
  // silence (same newest usable estimate) is not raised again.
  EXPECT_EQ(CheckStaleData(repo_, 20 * kHour, log), 0);
  ASSERT_TRUE(repo_.ResolveAlert(f.org, alerts[0].id, 6).ok());
  EXPECT_EQ(CheckStaleData(repo_, 21 * kHour, log), 0);
  // A new usable estimate ends the silence; a later one starts another.
  AddEstimate(f, 22 * kHour, "usable");
  EXPECT_EQ(CheckStaleData(repo_, 23 * kHour, log), 0);
  EXPECT_EQ(CheckStaleData(repo_, 28 * kHour + 1, log), 1);
}

TEST_F(AlertRulesTest, TheNewestNewBaselineEntryRestartsTheBaseline) {
  const auto f = MakeFixture(repo_, "Harbour Works");
  const auto g = MakeFixture(repo_, "Valley Works");
  storage::Logbook logbook(db_);
  Id id = 0;
  ASSERT_TRUE(logbook.Add(f.org, {f.member, "inspected", "", "R. Field", 9 * kHour, false}, 1, &id).ok());
  estimation::DriftSettings s;
  ASSERT_TRUE(ApplyLogbookBaseline(repo_, f.org, f.member, &s).ok());
  EXPECT_FALSE(s.baseline_start_s.has_value()) << "an entry without new_baseline changes nothing";
  ASSERT_TRUE(logbook.Add(f.org, {f.member, "re-tensioned", "", "R. Field", 5 * kHour, true}, 2, &id).ok());
  ASSERT_TRUE(ApplyLogbookBaseline(repo_, f.org, f.member, &s).ok());
  ASSERT_TRUE(s.baseline_start_s.has_value());
  EXPECT_EQ(*s.baseline_start_s, 5.0 * 3600.0);
  estimation::DriftSettings other;
  ASSERT_TRUE(ApplyLogbookBaseline(repo_, g.org, f.member, &other).ok());
  EXPECT_FALSE(other.baseline_start_s.has_value()) << "another organisation's entries are not seen";
}

}  // namespace
}  // namespace taut::server

namespace taut::server {
namespace {

// The critical compression of a pinned-pinned member is Euler's
// pi^2 EI / L^2 (S. P. Timoshenko, J. M. Gere, Theory of Elastic
// Stability, 1961, section 2.1); with EI the only free parameter its
// interval is pi^2 (EI +- 1.959964 std) / L^2 (z_0.975, Abramowitz and
// Stegun 1964, table 26.1). Tolerance 1e-3 relative: the 60-element model's
// discretisation error of the first buckling load with cubic beam elements
// is far smaller (h^4 convergence: recalled from memory, common FE
// practice).
TEST(CriticalCompression, PinnedEndsGiveEulersLoadWithTheIntervalOfEI) {
  std::ifstream in(std::string(TAUT_EXAMPLES_DIR) + "/maltings-east-tie-2.json");
  std::stringstream description;
  description << in.rdbuf();
  const double length = nlohmann::json::parse(description.str())["length_m"].get<double>();
  storage::Estimate e;
  e.id = 7;
  e.result_json = R"({"bending_stiffness_nm2": {"value": 6000, "std": 150},
                      "end_fixity": {"left": {"value": 0, "fixed": true}, "right": {"value": 0, "fixed": true}}})";
  const nlohmann::json cc = CriticalCompressionJson(description.str(), e);
  ASSERT_TRUE(cc.is_object()) << cc.dump();
  const double pi2 = M_PI * M_PI / (length * length);
  EXPECT_NEAR(cc["value_n"].get<double>(), pi2 * 6000, 1e-3 * pi2 * 6000);
  EXPECT_NEAR(cc["ci95_n"][0].get<double>(), pi2 * (6000 - 1.959964 * 150), 1e-3 * pi2 * 6000);
  EXPECT_NEAR(cc["ci95_n"][1].get<double>(), pi2 * (6000 + 1.959964 * 150), 1e-3 * pi2 * 6000);
  EXPECT_EQ(cc["free_parameters"], 1);
  // Free fixities widen it (Bonferroni z = 2.393980 for three parameters)
  // and their upper ends raise N_cr: clamped-clamped is 4 pi^2 EI / L^2.
  e.result_json = R"({"bending_stiffness_nm2": {"value": 6000, "std": 150},
                      "end_fixity": {"left": {"value": 0.5, "std": 0.3}, "right": {"value": 0.5, "std": 0.3}}})";
  const nlohmann::json wide = CriticalCompressionJson(description.str(), e);
  ASSERT_TRUE(wide.is_object());
  EXPECT_EQ(wide["free_parameters"], 3);
  EXPECT_GT(wide["value_n"].get<double>(), pi2 * 6000);
  EXPECT_LT(wide["value_n"].get<double>(), 4 * pi2 * 6000);
  EXPECT_LT(wide["ci95_n"][0].get<double>(), wide["value_n"].get<double>());
  EXPECT_GT(wide["ci95_n"][1].get<double>(), wide["value_n"].get<double>());
  // Fixities at 1 (0.5 + 2.39 * 0.3 clamped to 1): at most the clamped load.
  EXPECT_LE(wide["ci95_n"][1].get<double>(), 4 * pi2 * (6000 + 2.393980 * 150) * (1 + 1e-3));
  e.result_json = "{}";
  EXPECT_TRUE(CriticalCompressionJson(description.str(), e).is_null());
}

}  // namespace
}  // namespace taut::server
