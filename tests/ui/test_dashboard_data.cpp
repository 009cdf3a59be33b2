// The data behind the dashboard's charts (server/dashboard_data.h) against
// outside references: scipy.signal.welch for the spectrum and its
// decimation, the closed-form pinned-pinned beam-column for the model
// shapes, the textbook least-squares formulas for the drift limits, and
// nlohmann_json's full parse for the fixity reader.
#include <gtest/gtest.h>
#include <unistd.h>

#include <cmath>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <nlohmann/json.hpp>
#include <numbers>
#include <random>

#include "estimation/cautions.h"
#include "server/api_json.h"
#include "server/dashboard_data.h"
#include "server/estimate_json.h"
#include "server/member_json.h"
#include "storage/migrations.h"
#include "storage/repository.h"

namespace taut::server {
namespace {

using nlohmann::json;

// scipy from Debian's python3-scipy, always through /usr/bin/python3 (the
// first python3 on PATH may be another interpreter without it).
constexpr const char* kPython = "/usr/bin/python3";

bool HaveScipy() {
  const std::string cmd = std::string(kPython) + " -c 'import scipy.signal' >/dev/null 2>&1";
  return std::system(cmd.c_str()) == 0;
}

// A one-channel record: with one channel the CSD "matrix" is the PSD, and
// its first singular value is the PSD itself, so s1 must equal
// scipy.signal.welch of the linearly detrended record (the identification's
// conditioning, estimation/conditioning.h) with window='hann',
// nperseg=segment, noverlap=segment/2, detrend='constant'. Both are the same
// float64 sums; 1e-6 relative (as tests/estimation/test_spectral.cpp) leaves
// room for the FFTs' different rounding.
class SpectrumTest : public ::testing::Test {
 protected:
  void SetUp() override {
    if (!HaveScipy()) GTEST_SKIP() << "SKIPPED: /usr/bin/python3 with scipy not found; install python3-scipy";
    std::mt19937_64 rng(5);
    std::normal_distribution<double> g(0.0, 1.0);
    record_.id = 7;
    record_.channels = {"a1"};
    record_.sample_rate_hz = kRate_hz;
    record_.sample_count = kSamples;
    record_.units = "m/s2";
    record_.excitation = "ambient";
    for (int k = 0; k < kSamples; ++k) {
      const double t = k / kRate_hz;
      record_.samples.push_back(std::sin(2 * std::numbers::pi * kTone_hz * t) + 0.01 * t + 0.2 * g(rng));
    }
    dir_ = std::filesystem::temp_directory_path() / ("taut_ui_spectrum_" + std::to_string(::getpid()));
    std::filesystem::create_directories(dir_);
    {
      std::ofstream f(dir_ / "x.txt");
      f.precision(17);
      for (double v : record_.samples) f << v << "\n";
    }
    // 6000 samples / 16 = 375 -> the nearest power of two, 512
    // (spectral.h DefaultSegmentSamples).
    std::ofstream(dir_ / "ref.py")
        << "import numpy as np, scipy.signal as s\n"
        << "x = s.detrend(np.loadtxt('" << (dir_ / "x.txt").string() << "'), type='linear')\n"
        << "f, p = s.welch(x, fs=200.0, window='hann', nperseg=512, noverlap=256)\n"
        << "np.savetxt('" << (dir_ / "p.txt").string() << "', np.column_stack([f, p]), fmt='%.17g')\n";
    ASSERT_EQ(std::system((std::string(kPython) + " " + (dir_ / "ref.py").string()).c_str()), 0);
    std::ifstream ref(dir_ / "p.txt");
    double f = 0, p = 0;
    while (ref >> f >> p) {
      ref_f_.push_back(f);
      ref_p_.push_back(p);
    }
    ASSERT_EQ(ref_f_.size(), 257u);  // nperseg / 2 + 1 one-sided lines
    estimate_.id = 11;
    estimate_.result_json = json{
        {"modes", {{{"order", 1}, {"frequency_hz", kTone_hz}, {"model_frequency_hz", 13.2}, {"mac", 1.0}}}},
        {"unpaired_modes",
         json::array()}}.dump();
  }
  void TearDown() override {
    if (!dir_.empty()) std::filesystem::remove_all(dir_);
  }

  static constexpr double kRate_hz = 200.0;
  static constexpr int kSamples = 6000;
  static constexpr double kTone_hz = 13.3;
  storage::Record record_;
  storage::Estimate estimate_;
  std::filesystem::path dir_;
  std::vector<double> ref_f_, ref_p_;
};

TEST_F(SpectrumTest, EveryLineAboveZeroMatchesScipyWelch) {
  json out;
  ASSERT_TRUE(EstimateSpectrumJson(estimate_, record_, kMaxSpectrumPoints, &out).ok());
  EXPECT_EQ(out["segment_samples"], 512);
  ASSERT_EQ(out["frequency_hz"].size(), ref_f_.size() - 1);  // 0 Hz left out
  EXPECT_EQ(out["lines_per_point"], 1);
  for (std::size_t i = 0; i + 1 < ref_f_.size(); ++i) {
    EXPECT_NEAR(out["frequency_hz"][i].get<double>(), ref_f_[i + 1], 1e-9) << "line " << i + 1;
    EXPECT_NEAR(out["s1"][i].get<double>(), ref_p_[i + 1], 1e-6 * ref_p_[i + 1]) << "line " << i + 1;
  }
  // The identified mode is marked at the top of its peak: the largest PSD
  // within kPeakMarkLines of the line nearest 13.3 Hz (line 34 at 0.39 Hz).
  ASSERT_EQ(out["peaks"].size(), 1u);
  const int line = static_cast<int>(std::lround(kTone_hz / (kRate_hz / 512)));
  const double top = std::max({ref_p_[line - 1], ref_p_[line], ref_p_[line + 1]});
  EXPECT_NEAR(out["peaks"][0]["s1"].get<double>(), top, 1e-6 * top);
  EXPECT_EQ(out["peaks"][0]["order"], 1);
}

TEST_F(SpectrumTest, DecimationKeepsTheLargestLineOfEveryBucket) {
  json out;
  ASSERT_TRUE(EstimateSpectrumJson(estimate_, record_, kMinSpectrumPoints, &out).ok());
  // 256 lines into at most 16 points: buckets of ceil(256 / 16) = 16 lines.
  ASSERT_EQ(out["lines_per_point"], 16);
  ASSERT_EQ(out["s1"].size(), 16u);
  double global = 0;
  for (std::size_t b = 0; b < 16; ++b) {
    std::size_t best = 1 + 16 * b;
    for (std::size_t m = best; m < 1 + 16 * (b + 1); ++m) {
      if (ref_p_[m] > ref_p_[best]) best = m;
    }
    EXPECT_NEAR(out["frequency_hz"][b].get<double>(), ref_f_[best], 1e-9) << "bucket " << b;
    EXPECT_NEAR(out["s1"][b].get<double>(), ref_p_[best], 1e-6 * ref_p_[best]) << "bucket " << b;
    global = std::max(global, out["s1"][b].get<double>());
  }
  // The tone's peak survives decimation at its full height.
  const double peak = *std::max_element(ref_p_.begin() + 1, ref_p_.end());
  EXPECT_NEAR(global, peak, 1e-6 * peak);
}

// Pinned-pinned member with axially free ends and massless sensors: a
// uniform beam-column under tension N, whose modes are exactly
//   w_n(x) = sin(n pi x / L),
//   f_n = (n / 2L) sqrt(N/m) sqrt(1 + n^2 pi^2 EI / (N L^2))
// (docs/DESIGN.md; R. D. Blevins, Formulas for Natural Frequency and Mode Shape,
// 1979, beam under axial load). Cubic Hermite elements converge as h^4 in
// the eigenvalue; with 60 elements the third mode is within about 1e-6 of
// the closed form, so 1e-5 (frequency, relative) and 1e-4 (shape at the
// nodes, absolute, shapes of unit size) are discretisation bounds with room.
TEST(ModelShapes, PinnedBeamColumnShapesAndFrequenciesMatchTheClosedForm) {
  const std::string text = R"({
    "id": "test-pinned-tie", "length_m": 6.0,
    "section": {"shape": "circle", "diameter_m": 0.03},
    "material": {"elastic_modulus_pa": 2.0e11, "density_kg_m3": 7850},
    "ends": {"left": {"rotation": "pinned"}, "right": {"rotation": "pinned"}, "axial": "free"},
    "sensors": [{"channel": "v1", "position_m": 1.0}, {"channel": "v2", "position_m": 2.5},
                {"channel": "v3", "position_m": 4.1}]})";
  model::Member member;
  ASSERT_TRUE(ParseMember(text, &member, MemberReadOptions{.require_id = true}).ok());
  const double L = 6.0, N = 20000.0, m = member.MassPerLength_kg_m();
  const double ei = member.NominalBendingStiffness_nm2(model::Direction::kVertical);
  const std::vector<double> xs = {1.0, 2.5, 4.1};
  auto closed_f = [&](int n) {
    return n / (2 * L) * std::sqrt(N / m) *
           std::sqrt(1 + n * n * std::numbers::pi * std::numbers::pi * ei / (N * L * L));
  };
  // "Measured" shapes: the exact shape at the sensors, max |.| = 1 (as stored).
  json modes = json::array();
  std::vector<double> max_abs;
  for (int n = 1; n <= 3; ++n) {
    double mx = 0;
    for (double x : xs) mx = std::max(mx, std::abs(std::sin(n * std::numbers::pi * x / L)));
    max_abs.push_back(mx);
    json shape;
    for (std::size_t c = 0; c < xs.size(); ++c) {
      shape["v" + std::to_string(c + 1)] = std::sin(n * std::numbers::pi * xs[c] / L) / mx;
    }
    modes.push_back({{"order", n}, {"frequency_hz", closed_f(n)}, {"shape", shape}, {"mac", 1.0}});
  }
  storage::Estimate e;
  e.id = 3;
  e.member_id = 9;
  e.member_version = 1;
  e.result_json =
      json{{"axial_force_n", {{"value", N}}},
           {"bending_stiffness_nm2", {{"value", ei}}},
           {"end_fixity",
            {{"left", {{"value", 0.0}, {"fixed", true}}}, {"right", {{"value", 0.0}, {"fixed", true}}}}},
           {"plane", "vertical"},
           {"modes", modes},
           {"cautions", json::array()},
           {"notice", estimation::StandingNotice()}}
          .dump();
  json out;
  ASSERT_TRUE(ModelShapesJson(e, member, &out).ok());
  ASSERT_EQ(out["modes"].size(), 3u);
  ASSERT_EQ(out["sensors"].size(), 3u);
  EXPECT_EQ(out["notice"], estimation::StandingNotice());
  const json& x = out["x_m"];
  ASSERT_GE(x.size(), static_cast<std::size_t>(kShapeElements + 1));
  EXPECT_DOUBLE_EQ(x.front().get<double>(), 0.0);
  EXPECT_DOUBLE_EQ(x.back().get<double>(), L);
  for (int n = 1; n <= 3; ++n) {
    const json& mode = out["modes"][n - 1];
    EXPECT_EQ(mode["order"], n);
    EXPECT_NEAR(mode["model_frequency_hz"].get<double>(), closed_f(n), 1e-5 * closed_f(n)) << "mode " << n;
    // Scaled onto the measured shape, the curve is sin(n pi x / L) / max.
    double worst = 0;
    for (std::size_t i = 0; i < x.size(); ++i) {
      const double exact = std::sin(n * std::numbers::pi * x[i].get<double>() / L) / max_abs[n - 1];
      worst = std::max(worst, std::abs(mode["model_shape"][i].get<double>() - exact));
    }
    EXPECT_LT(worst, 1e-4) << "mode " << n;
    for (const json& q : mode["measured"]) {
      const double pos = q["position_m"].get<double>();
      EXPECT_NEAR(q["value"].get<double>(), std::sin(n * std::numbers::pi * pos / L) / max_abs[n - 1], 1e-12);
    }
  }
}

// The drift limits: ordinary least squares of force on temperature over the
// first 10 estimates (D. C. Montgomery, E. A. Peck, G. G. Vining,
// Introduction to Linear Regression Analysis, 5th ed. 2012, section 2.2:
// b1 = Sxy / Sxx, b0 = ybar at Tbar, s^2 = SSE / (n - 2)), and the limits
// of the residual rule at each later point's temperature T,
//   b0 + b1 (T - Tbar) +- z sqrt(s^2 (1/n + (T - Tbar)^2 / Sxx) + max(0, s^2 - mean std^2) + std^2)
// (estimation/drift.h item 3). Recomputed here from the formulas; the two
// sides are the same float64 sums in a different order, so 1e-9 relative.
TEST(MemberDrift, BaselineAndLimitsFollowTheLeastSquaresFormulas) {
  model::Member member;
  ASSERT_TRUE(LoadMemberFile(std::string(TAUT_EXAMPLES_DIR) + "/maltings-east-tie-2.json", &member).ok());
  std::mt19937_64 rng(21);
  std::normal_distribution<double> g(0.0, 1.0);
  std::vector<storage::Estimate> history;
  const std::int64_t day_ms = 86400000, t0 = 1'800'000'000'000;
  for (int i = 0; i < 16; ++i) {
    storage::Estimate e;
    e.id = 100 + i;
    e.measured_at_unix_ms = t0 + i * day_ms;
    e.temperature_c = 8.0 + 0.7 * i + (i % 3);
    e.axial_force_n = 30000 - 350 * (*e.temperature_c - 12) + 150 * g(rng);
    e.force_std_n = 120 + 10 * (i % 4);
    e.force_ci95_low_n = e.axial_force_n - 2 * *e.force_std_n;
    e.force_ci95_high_n = e.axial_force_n + 2 * *e.force_std_n;
    history.push_back(e);
  }
  estimation::DriftSettings settings;
  ASSERT_TRUE(EffectiveDriftSettings(member, nullptr, member.MajorityPlane(), &settings).ok());
  ASSERT_EQ(settings.baseline_count, 10u);
  json out;
  // Window: the last 6 estimates.
  ASSERT_TRUE(MemberDriftJson(member, settings, DriftSettingsToJson(settings), history,
                              history[10].measured_at_unix_ms, history.back().measured_at_unix_ms + 1, &out)
                  .ok());
  // Reference regression over the first 10.
  const std::size_t n = 10;
  double tbar = 0, ybar = 0, mean_var = 0;
  for (std::size_t i = 0; i < n; ++i) {
    tbar += *history[i].temperature_c / n;
    ybar += history[i].axial_force_n / n;
    mean_var += *history[i].force_std_n * *history[i].force_std_n / n;
  }
  double sxx = 0, sxy = 0;
  for (std::size_t i = 0; i < n; ++i) {
    sxx += (*history[i].temperature_c - tbar) * (*history[i].temperature_c - tbar);
    sxy += (*history[i].temperature_c - tbar) * (history[i].axial_force_n - ybar);
  }
  const double b1 = sxy / sxx, b0 = ybar;
  double sse = 0;
  for (std::size_t i = 0; i < n; ++i) {
    const double r = history[i].axial_force_n - (b0 + b1 * (*history[i].temperature_c - tbar));
    sse += r * r;
  }
  const double s2 = sse / (n - 2), extra = std::max(0.0, s2 - mean_var);
  const json& base = out["force"]["baseline"];
  ASSERT_TRUE(base.is_object());
  EXPECT_EQ(base["points"], 10);
  EXPECT_NEAR(base["intercept_n"].get<double>(), b0, 1e-9 * b0);
  EXPECT_NEAR(base["slope_n_per_c"].get<double>(), b1, 1e-9 * std::abs(b1));
  EXPECT_NEAR(base["residual_std_n"].get<double>(), std::sqrt(s2), 1e-9 * std::sqrt(s2));
  ASSERT_EQ(out["points"].size(), 6u);
  for (std::size_t k = 0; k < 6; ++k) {
    const storage::Estimate& e = history[10 + k];
    const json& p = out["points"][k];
    EXPECT_EQ(p["estimate_id"], e.id);
    EXPECT_FALSE(p["in_baseline"].get<bool>());
    const double d = *e.temperature_c - tbar;
    const double pred = b0 + b1 * d;
    const double half = settings.z_threshold *
                        std::sqrt(s2 * (1.0 / n + d * d / sxx) + extra + *e.force_std_n * *e.force_std_n);
    EXPECT_NEAR(p["force_expected_n"].get<double>(), pred, 1e-9 * pred);
    EXPECT_NEAR(p["force_limits_n"][0].get<double>(), pred - half, 1e-9 * pred);
    EXPECT_NEAR(p["force_limits_n"][1].get<double>(), pred + half, 1e-9 * pred);
    // z is the residual in units of the half width / z_threshold.
    EXPECT_NEAR(p["force_z"].get<double>(), (e.axial_force_n - pred) / (half / settings.z_threshold), 1e-9);
  }
  // The absolute threshold: min_force_share_of_design (0.5) x the design
  // force of the description (35 kN).
  EXPECT_DOUBLE_EQ(out["force"]["thresholds"]["below_design_n"].get<double>(), 0.5 * 35000.0);
  EXPECT_DOUBLE_EQ(out["force"]["thresholds"]["compression_n"].get<double>(), 0.0);
}

// The fixity history read by SQLite's JSON functions gives what a full
// parse of the stored result gives (nlohmann_json as the reference),
// whatever the key order and the text of the cautions, and null where the
// result has no end_fixity or is not JSON.
TEST(FixityHistory, StorageJsonExtractEqualsTheFullParse) {
  const auto dir = std::filesystem::temp_directory_path() / ("taut-fixity-" + std::to_string(::getpid()));
  std::filesystem::remove_all(dir);
  std::filesystem::create_directories(dir);
  storage::Database db;
  ASSERT_TRUE(storage::OpenAndMigrate(db, (dir / "t.db").string()).ok());
  storage::Repository repo(db);
  storage::Id org = 0, structure = 0, member = 0;
  ASSERT_TRUE(repo.CreateOrganisation("Fixity works", 0, &org).ok());
  ASSERT_TRUE(repo.CreateStructure(org, "Test hall", "", 0, &structure).ok());
  ASSERT_TRUE(repo.CreateMember(org, structure, "t1", "{}", 0, &member).ok());

  estimation::Estimate est;
  est.axial_force_n = {30125.0, 210.0, 29713.0, 30537.0};
  est.bending_stiffness_nm2 = {7950.0, 120.0, 7715.0, 8185.0};
  est.fixity_left = {0.42, 0.05, 0.32, 0.52};
  est.fixity_right = {1.0, 0.0, 0.0, 0.0, true};
  est.cautions = {{"single-sensor", "a \"quoted\" {brace} [bracket] text: end_fixity"}};
  est.notice = estimation::StandingNotice();
  const json full = EstimateToJson(est);
  nlohmann::ordered_json reordered;  // end_fixity last, after a nested key of the same name
  reordered["fit"] = {{"end_fixity", "not this one"}};
  reordered["modes"] = full["modes"];
  reordered["end_fixity"] = full["end_fixity"];
  const std::vector<std::string> results = {full.dump(), reordered.dump(),
                                            R"({"axial_force_n": {"value": 1}})", "not json"};
  for (std::size_t i = 0; i < results.size(); ++i) {
    storage::NewRecord r;
    r.member_id = member;
    r.recorded_at_unix_ms = 1'800'000'000'000 + static_cast<std::int64_t>(i) * 1000;
    r.sample_rate_hz = 100;
    r.channels = {"a1"};
    r.samples = {0.0};
    r.content_sha256 = std::string(63, '0') + static_cast<char>('1' + i);
    r.samples_sha256 = std::string(64, 'a');
    storage::RecordInsertResult ins;
    ASSERT_TRUE(repo.InsertRecord(org, r, 0, &ins).ok());
    storage::Job job;
    bool claimed = false;
    ASSERT_TRUE(repo.ClaimNextJob(0, &job, &claimed).ok() && claimed);
    storage::Id id = 0;
    ASSERT_TRUE(
        repo.CompleteJobWithEstimate(job.id, {job.record_id, 1, 1, 0, 2, {}, {}, results[i]}, 0, &id).ok());
  }
  std::vector<storage::Repository::FixityRow> rows;
  ASSERT_TRUE(repo.FixityHistory(org, member, 0, 2'000'000'000'000, &rows).ok());
  ASSERT_EQ(rows.size(), 4u);
  for (int i = 0; i < 2; ++i) {
    const json p = FixityPointJson(rows[i]);
    EXPECT_EQ(p["left"], full["end_fixity"]["left"]) << i;
    EXPECT_EQ(p["right"], full["end_fixity"]["right"]) << i;
    // 1.8e9 s after the epoch is 20833 days + 8 h: 2027-01-15T08:00:00Z
    // (Python: datetime.fromtimestamp(1.8e9, timezone.utc)); record i is i s later.
    EXPECT_EQ(p["measured_at"], "2027-01-15T08:00:0" + std::to_string(i) + "Z") << i;
  }
  EXPECT_TRUE(FixityPointJson(rows[0])["right"]["fixed"].get<bool>());
  for (int i = 2; i < 4; ++i) {
    EXPECT_TRUE(FixityPointJson(rows[i])["left"].is_null()) << i;
    EXPECT_TRUE(FixityPointJson(rows[i])["right"].is_null()) << i;
  }
  std::filesystem::remove_all(dir);
}

}  // namespace
}  // namespace taut::server
