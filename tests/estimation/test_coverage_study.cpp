// Coverage study (issue 12 "Tests"): the 95 % interval of N over randomised
// records of every hard family from the independent reference simulator
// (tests/estimation/beam_reference.py, one python run for all records),
// identified by IdentifyRecord on the modal path. CTest label "slow"; left
// out of the ASan pass.
//
// Families (invented members; drawn with a fixed seed): ordinary ties;
// weak fundamental (long low-tension ties, modes 1-2 25-30 dB down); EI
// 0.25-10 times the nominal; a dead or clipped channel; two sensors at L/4
// and L/2. Expectation: over the records that are not refused, the truth
// lies inside the reported 95 % interval of N (and of EI) in 90 % to 99 % of the cases (the
// binomial 99.9 % range of the count at a true 95 % over 200 records is
// about 89.5 %-98.5 %; the issue's bounds are used), and no record is
// refused on more than a tenth of the cases (a refusal is honest, but a
// study that mostly refuses measures nothing).
#include <gtest/gtest.h>
#include <unistd.h>

#include <cstdio>
#include <filesystem>
#include <fstream>
#include <random>

#include "estimation/identify_record.h"
#include "estimation/record.h"
#include "tests/estimation/beam_reference.h"

namespace taut::estimation {
namespace {

using testing::DeclaredMember;
using testing::Family;
using testing::kPi;

constexpr int kCases = 210;

Family Draw(int k, std::mt19937& g) {
  std::uniform_real_distribution<double> u(0.0, 1.0);
  auto in = [&](double a, double b) { return a + (b - a) * u(g); };
  Family f;
  f.seed = 1000 + k;
  f.fixity_left = in(0.1, 0.9);
  f.fixity_right = in(0.1, 0.9);
  f.duration_s = 120.0;
  f.fs = 200.0;
  const int family = k % 5;
  f.name = "case" + std::to_string(k);
  if (family == 1) {  // weak fundamental
    f.length_m = in(20.0, 30.0);
    f.diameter_m = in(0.03, 0.04);
    f.force_n = in(2e6, 10e6) * kPi * f.diameter_m * f.diameter_m / 4.0;  // 2-10 MPa
    f.fs = 100.0;
    f.duration_s = 200.0;
    f.gains = "{\"1\":" + std::to_string(-in(25.0, 30.0)) + ",\"2\":-20}";
  } else {
    f.length_m = in(6.0, 15.0);
    f.diameter_m = in(0.025, 0.05);
    f.force_n = in(30e6, 150e6) * kPi * f.diameter_m * f.diameter_m / 4.0;  // 30-150 MPa
    if (family == 2) {
      const double factors[] = {0.25, 0.5, 3.0, 6.0, 10.0};
      f.ei_factor = factors[(k / 5) % 5];
    } else if (family == 3) {
      f.fault = (k / 5) % 2 == 0 ? R"({"kind":"dead","channel":1})" : R"({"kind":"clipped","channel":0})";
    } else if (family == 4) {
      f.sensor_share = {0.25, 0.5};
    }
  }
  return f;
}

TEST(CoverageStudy, ForceIntervalCoversTheTruthOnHardFamilies) {
  const auto dir = std::filesystem::temp_directory_path() / ("taut_coverage_" + std::to_string(getpid()));
  std::filesystem::create_directories(dir);
  std::mt19937 g(20261205);
  std::vector<Family> cases;
  std::ofstream list(dir / "cases.json");
  list << "[";
  for (int k = 0; k < kCases; ++k) {
    cases.push_back(Draw(k, g));
    std::string p = testing::Params(cases.back());
    p.pop_back();  // "}" -> add the output path
    list << (k ? "," : "") << p << ",\"out\":\"" << (dir / (cases.back().name + ".csv")).string() << "\"}";
  }
  list << "]";
  list.close();
  testing::RunReference({"--batch", (dir / "cases.json").string()});

  int inside = 0, counted = 0, refused = 0, ei_inside = 0;
  int per_family_ei[5] = {};
  int per_family_inside[5] = {}, per_family_counted[5] = {};
  double max_abs_error = 0.0;
  for (int k = 0; k < kCases; ++k) {
    const Family& f = cases[k];
    // The simulator builds the member from exactly the declared geometry
    // and material: declared measured precisely (docs/FORMATS.md 1.1), so
    // the intervals hold what the records leave uncertain (the tolerances'
    // own coverage study: test_tolerance_budget.cpp).
    model::Member member = DeclaredMember(f);
    model::DeclareMeasuredPrecisely(&member);
    RecordReadOptions ro;
    ro.member = &member;
    Record record;
    ASSERT_TRUE(ReadRecordCsv((dir / (f.name + ".csv")).string(), ro, &record).ok()) << f.name;
    Estimate e;
    const Status s = IdentifyRecord(member, record, {}, &e);
    if (!s.ok()) {
      ++refused;
      EXPECT_EQ(e.verdict.code, "unusable") << f.name << ": " << s.message;  // a refusal, not a crash
      std::printf("[ coverage ] %s refused: %s\n", f.name.c_str(), s.message.c_str());
      continue;
    }
    const bool in = e.axial_force_n.ci95_low <= f.force_n && f.force_n <= e.axial_force_n.ci95_high;
    ++counted;
    inside += in;
    ++per_family_counted[k % 5];
    per_family_inside[k % 5] += in;
    const bool ei_in = e.bending_stiffness_nm2.ci95_low <= testing::Ei(f) &&
                       testing::Ei(f) <= e.bending_stiffness_nm2.ci95_high;
    ei_inside += ei_in;
    per_family_ei[k % 5] += ei_in;
    if (!ei_in) {
      std::printf("[ coverage ] %s EI outside: %.6g truth %.6g ci95 [%.6g, %.6g] (%s)\n", f.name.c_str(),
                  e.bending_stiffness_nm2.value, testing::Ei(f), e.bending_stiffness_nm2.ci95_low,
                  e.bending_stiffness_nm2.ci95_high, e.fit.bending_stiffness_interval.c_str());
    }
    max_abs_error = std::max(max_abs_error, std::abs(e.axial_force_n.value / f.force_n - 1));
    if (!in) {
      std::printf("[ coverage ] %s outside: N %.6g truth %.6g ci95 [%.6g, %.6g] verdict %s\n", f.name.c_str(),
                  e.axial_force_n.value, f.force_n, e.axial_force_n.ci95_low, e.axial_force_n.ci95_high,
                  e.verdict.summary.c_str());
    }
  }
  std::filesystem::remove_all(dir);
  const char* names[5] = {"ordinary", "weak fundamental", "EI off nominal", "faulty channel", "two sensors"};
  for (int fam = 0; fam < 5; ++fam) {
    std::printf("[ coverage ] %-17s %d of %d inside (EI %d)\n", names[fam], per_family_inside[fam],
                per_family_counted[fam], per_family_ei[fam]);
  }
  std::printf("[ coverage ] %d of %d inside (%.1f %%), %d refused, largest |error| %.2f %%\n", inside,
              counted, 100.0 * inside / std::max(1, counted), refused, 100 * max_abs_error);
  std::printf("[ coverage ] EI: %d of %d inside (%.1f %%)\n", ei_inside, counted,
              100.0 * ei_inside / std::max(1, counted));
  ASSERT_GT(counted, 0);
  EXPECT_LE(refused, kCases / 10);
  EXPECT_GE(inside, 0.90 * counted);
  EXPECT_LE(inside, 0.99 * counted);
  // EI (issue 12: its interval is a profile like N's) to the same range.
  EXPECT_GE(ei_inside, 0.90 * counted);
  EXPECT_LE(ei_inside, 0.99 * counted);
}

}  // namespace
}  // namespace taut::estimation
