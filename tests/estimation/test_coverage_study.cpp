// Coverage study (issue 12 "Tests"): the 95 % interval of N over randomised
// records of every hard family from the independent reference simulator
// (tests/estimation/beam_reference.py, one python run for all records),
// identified by IdentifyRecord on both paths. CTest label "slow"; left
// out of the ASan pass.
//
// Families (invented members; drawn with a fixed seed): ordinary ties;
// weak fundamental (long low-tension ties, modes 1-2 25-30 dB down); EI
// 0.25-10 times the nominal; a dead or clipped channel; two sensors at L/4
// and L/2 (40 ambient records each, modal path); and 20 large-amplitude
// free decays after a blow (the reference's nonlinear Galerkin simulator,
// mode 1 at 1.5-2.5 radii of gyration: the time-domain path). Expectation: over the records that are not
// refused, the truth lies inside the reported 95 % interval of N (and of EI) in 90 % to 99 % of the cases
// (the binomial 99.9 % range of the count at a true 95 % over 200 records is about 89.5 %-98.5 %; the issue's
// bounds are used), and no record is refused on more than a tenth of the cases (a refusal is honest, but a
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

// 200 ambient records (40 per family, modal path) and 20 large-amplitude
// free decays (time-domain path).
constexpr int kModalCases = 200;
constexpr int kDecayCases = 20;
constexpr int kCases = kModalCases + kDecayCases;
constexpr int kFamilies = 6;

int FamilyOf(int k) { return k < kModalCases ? k % 5 : 5; }

Family Draw(int k, std::mt19937& g) {
  std::uniform_real_distribution<double> u(0.0, 1.0);
  auto in = [&](double a, double b) { return a + (b - a) * u(g); };
  Family f;
  f.seed = 1000 + k;
  f.fixity_left = in(0.1, 0.9);
  f.fixity_right = in(0.1, 0.9);
  f.duration_s = 120.0;
  f.fs = 200.0;
  const int family = FamilyOf(k);
  f.name = "case" + std::to_string(k);
  if (family == 5) {  // large-amplitude free decay, time-domain path
    f.length_m = in(5.0, 8.0);
    f.diameter_m = in(0.025, 0.035);
    f.force_n = in(10e6, 30e6) * kPi * f.diameter_m * f.diameter_m / 4.0;  // 10-30 MPa
    f.fs = 256.0;
    f.duration_s = 10.0;
    // A blow at x that sets mode 1 swinging at a = 1.5-2.5 radii of
    // gyration (d / 4): mode-1 velocity a omega_1 with modal mass m L / 2
    // of a sine shape, so J = a omega_1 (m L / 2) / sin(pi x / L) (pinned
    // closed form for omega_1, [B] of test_hard_families.cpp).
    const double x = in(0.25, 0.4) * f.length_m;
    const double m = testing::Mass(f), ei = testing::Ei(f), L = f.length_m;
    const double omega1 =
        kPi / L * std::sqrt(f.force_n / m) * std::sqrt(1.0 + kPi * kPi * ei / (f.force_n * L * L));
    const double a = in(1.5, 2.5) * f.diameter_m / 4.0;
    const double j = a * omega1 * m * L / 2.0 / std::sin(kPi * x / L);
    const model::Member declared = DeclaredMember(f);
    f.extra_json = "\"impact\":{\"x_m\":" + testing::Num(x) + ",\"impulse_n_s\":" + testing::Num(j) +
                   ",\"modes\":4},\"ea_n\":" + testing::Num(declared.AxialRigidity_n()) +
                   ",\"damping_ratio\":0.005,\"noise_share\":0.01,\"drift_share\":0";
  } else if (family == 1) {  // weak fundamental
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
  int per_family_ei[kFamilies] = {};
  int per_family_inside[kFamilies] = {}, per_family_counted[kFamilies] = {};
  int per_path_counted[2] = {}, per_path_inside[2] = {};  // modal, transient
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
    ++per_family_counted[FamilyOf(k)];
    per_family_inside[FamilyOf(k)] += in;
    const int path = e.fit.model == kFitModelTransient ? 1 : 0;
    ++per_path_counted[path];
    per_path_inside[path] += in;
    const bool ei_in = e.bending_stiffness_nm2.ci95_low <= testing::Ei(f) &&
                       testing::Ei(f) <= e.bending_stiffness_nm2.ci95_high;
    ei_inside += ei_in;
    per_family_ei[FamilyOf(k)] += ei_in;
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
  const char* names[kFamilies] = {"ordinary",       "weak fundamental", "EI off nominal",
                                  "faulty channel", "two sensors",      "free decay"};
  for (int fam = 0; fam < kFamilies; ++fam) {
    std::printf("[ coverage ] %-17s %d of %d inside (EI %d)\n", names[fam], per_family_inside[fam],
                per_family_counted[fam], per_family_ei[fam]);
  }
  std::printf("[ coverage ] %d of %d inside (%.1f %%), %d refused, largest |error| %.2f %%\n", inside,
              counted, 100.0 * inside / std::max(1, counted), refused, 100 * max_abs_error);
  std::printf("[ coverage ] EI: %d of %d inside (%.1f %%)\n", ei_inside, counted,
              100.0 * ei_inside / std::max(1, counted));
  std::printf("[ coverage ] modal path %d of %d inside, time-domain path %d of %d inside\n",
              per_path_inside[0], per_path_counted[0], per_path_inside[1], per_path_counted[1]);
  ASSERT_GT(counted, 0);
  // Both paths are exercised: most decays take the time-domain path.
  EXPECT_GE(per_path_counted[1], kDecayCases / 2);
  EXPECT_LE(refused, kCases / 10);
  EXPECT_GE(inside, 0.90 * counted);
  EXPECT_LE(inside, 0.99 * counted);
  // EI (issue 12: its interval is a profile like N's) to the same range.
  EXPECT_GE(ei_inside, 0.90 * counted);
  EXPECT_LE(ei_inside, 0.99 * counted);
}

}  // namespace
}  // namespace taut::estimation
