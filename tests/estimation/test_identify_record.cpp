// The whole identification of a record (estimation/identify_record.h): the
// amplitude check against the published first-order backbone, and the
// choice between the modal and the time-domain path on records whose truth
// is known (simulated by the model at known parameters).
#include <gtest/gtest.h>

#include <cmath>
#include <cstdio>
#include <filesystem>
#include <numbers>
#include <random>

#include "estimation/identify_record.h"
#include "model/transient.h"
#include "tests/server/synthetic_record.h"

namespace taut::estimation {
namespace {

using model::Direction;
using model::Member;
constexpr double kPi = std::numbers::pi;

// An invented 5.8 m round iron tie (28 mm, E = 190 GPa, 7800 kg/m^3),
// elastic ends, axially immovable, three 40 g sensors at the quarter points
// (the values of the example member examples/maltings-east-tie-2.json).
Member Tie() {
  Member m;
  m.id = "invented-tie-e2";
  m.length_m = 5.8;
  m.section.shape = model::Section::Shape::kCircle;
  m.section.diameter_m = 0.028;
  m.elastic_modulus_pa = 1.9e11;
  m.density_kg_m3 = 7800.0;
  m.axial.kind = model::AxialEnds::Kind::kFixed;
  m.sensors = {{"v1", 1.45, 0.04, Direction::kVertical},
               {"v2", 2.90, 0.04, Direction::kVertical},
               {"v3", 4.35, 0.04, Direction::kVertical}};
  m.design_axial_force_n = 12000.0;
  return m;
}

bool HasCaution(const Estimate& e, const std::string& code) {
  for (const auto& c : e.cautions) {
    if (c.code == code) return true;
  }
  return false;
}

// First-order backbone of a pinned-pinned beam with immovable ends
// (Woinowsky-Krieger, J. Appl. Mech. 17, 1950; the Duffing reduction of
// Nayfeh and Mook, Nonlinear Oscillations, 1979, sec. 2.3):
//   d f / f = (3/32) (EA/L) L (pi/L)^2 a^2 / (N + pi^2 EI / L^2),
// (3/32) (a/r)^2 at N = 0 (docs/DESIGN.md); a stationary Gaussian vibration of
// RMS s shifts it by (3/8) (EA/L) L (pi/L)^2 s^2 / (N + pi^2 EI/L^2)
// (statistical linearisation, Caughey, J. Acoust. Soc. Am. 35, 1963:
// omega_eq^2 = omega^2 + 3 k3 s^2). Tolerance 1e-3 relative: the 40-element
// model's frequency and G-norm errors are below 1e-6, the central
// difference of omega^2 in N is exact up to round-off (omega^2 is linear in
// N without sag).
TEST(NonlinearFrequencyShift, MatchesFirstOrderPinnedBackbone) {
  Member m = Tie();
  m.left.kind = model::RotationEnd::Kind::kPinned;
  m.right.kind = model::RotationEnd::Kind::kPinned;
  for (auto& s : m.sensors) s.mass_kg = 0.0;
  const double L = m.length_m;
  const double ea = m.AxialRigidity_n();
  const double ei = m.NominalBendingStiffness_nm2(Direction::kVertical);
  const double r_g = m.section.diameter_m / 4.0;
  for (double n : {0.0, 12000.0}) {
    model::ModalParameters p;
    p.axial_force_n = n;
    p.gravity_m_s2 = 0.0;
    for (double a_over_r : {0.1, 1.0}) {
      const double a = a_over_r * r_g;
      double shift = 0.0, bias = 0.0;
      ASSERT_TRUE(NonlinearFrequencyShift(m, Direction::kVertical, p, 1, a, true, &shift, &bias).ok());
      model::ModalResult r;
      ASSERT_TRUE(model::ComputeModes(m, Direction::kVertical, p, 1, &r).ok());
      const double f = r.modes[0].frequency_hz;
      const double n_eff = n + kPi * kPi * ei / (L * L);
      const double expected = 3.0 / 32.0 * ea * (kPi / L) * (kPi / L) * a * a / n_eff;
      EXPECT_NEAR(shift / f / expected, 1.0, 1e-3) << "N " << n << " a/r " << a_over_r;
      if (n == 0.0) {
        EXPECT_NEAR(shift / f / (3.0 / 32.0 * a_over_r * a_over_r), 1.0, 1e-3);
      }
      // The force a linear reading adds: f^2 is linear in N with slope
      // f^2 / n_eff (pinned closed form), so dN = 2 n_eff df / f.
      EXPECT_NEAR(bias / (2.0 * n_eff * expected), 1.0, 1e-3);
      double shift_rms = 0.0;
      ASSERT_TRUE(NonlinearFrequencyShift(m, Direction::kVertical, p, 1, a, false, &shift_rms).ok());
      EXPECT_NEAR(shift_rms / shift, 4.0, 4e-3);  // (3/8) s^2 against (3/32) a^2
    }
  }
}

// The impact record of the tests below. Truth: the tie at N = 12 kN, EI
// nominal, fixities 0.3 / 0.6, Rayleigh damping 0.5 % at modes 1 and 2,
// hit at 1.9 m by a 6 N s half-sine blow of 5 ms (peak amplitude about
// 2 radii of gyration, so the frequency of mode 1 rises by several per cent
// over the decay), simulated by the quasi-static-axial model (20 elements,
// 20 steps per sample: period error below 1e-5 for the fitted modes,
// Hairer, Lubich and Wanner 2006, sec. I.1), 10 s at 256 Hz (the shortest
// record docs/FORMATS.md allows), 1 % white noise (fixed seed).
constexpr double kImpactTruthN = 12000.0;

Record ImpactRecord(const Member& m, Excitation label) {
  model::ModalParameters p;
  p.axial_force_n = kImpactTruthN;
  p.fixity_left = 0.3;
  p.fixity_right = 0.6;
  model::TransientOptions o;
  o.target_elements = 20;
  o.output_rate_hz = 256.0;
  o.duration_s = 10.0;
  o.substeps = 20;
  o.damping_ratio = 0.005;
  const model::TransientModel truth(m, Direction::kVertical, p, o);
  Record record;
  if (!truth.status().ok()) return record;
  model::TransientLoads loads;
  const double j = 6.0, tau = 0.005;
  loads.forces.push_back(
      {1.9, [j, tau](double t) { return t < tau ? kPi * j / (2.0 * tau) * std::sin(kPi * t / tau) : 0.0; }});
  model::TransientResult sim;
  if (!truth.Run(loads, &sim).ok()) return record;
  record.channels = sim.channels;
  record.sample_rate_hz = o.output_rate_hz;
  record.samples = sim.acceleration_m_s2;
  record.excitation = label;
  std::mt19937_64 rng(4242);
  std::normal_distribution<double> g(0.0, 1.0);
  for (int c = 0; c < record.samples.cols(); ++c) {
    const double rms = std::sqrt(record.samples.col(c).squaredNorm() / record.samples.rows());
    for (int i = 0; i < record.samples.rows(); ++i) record.samples(i, c) += 0.01 * rms * g(rng);
  }
  CheckRecordQuality(&record);
  return record;
}

// The test of the automatic choice: the impact record goes through
// IdentifyRecord (default options) as a gateway's upload would, labelled
// excitation=impact; the estimate must come from the transient path and
// give N within 1 % of the truth (the tolerance) and inside its
// 95 % interval, while the linear modal fit it started from is printed for
// comparison. (A whole time-domain fit: the sanitizer pass may leave it out.)
TEST(IdentifyRecord, LargeAmplitudeImpactGoesThroughTheTransientPath) {
  const Member m = Tie();
  const Record record = ImpactRecord(m, Excitation::kImpact);
  ASSERT_GT(record.samples.rows(), 0);
  Estimate e;
  const Status st = IdentifyRecord(m, record, {}, &e);
  ASSERT_TRUE(st.ok()) << st.message;
  const double n = e.axial_force_n.value;
  std::printf(
      "truth N 12000 N; transient N %.1f N (error %+.3f %%, std %.1f, 95 %% [%.1f, %.1f]); linear modal "
      "N %.1f N (%+.2f %%); EI %.1f (nominal %.1f); fixities %.3f / %.3f; model %s; %d runs; %.2f s; "
      "shift %.4f Hz vs std %.4f Hz\n",
      n, 100 * (n / kImpactTruthN - 1), e.axial_force_n.std, e.axial_force_n.ci95_low,
      e.axial_force_n.ci95_high, e.transient ? e.transient->modal_axial_force_n : 0.0,
      e.transient ? 100 * (e.transient->modal_axial_force_n / kImpactTruthN - 1) : 0.0,
      e.bending_stiffness_nm2.value, m.NominalBendingStiffness_nm2(Direction::kVertical), e.fixity_left.value,
      e.fixity_right.value, e.fit.model.c_str(), e.transient ? e.transient->model_runs : 0, e.fit.seconds,
      e.amplitude.frequency_shift_hz, e.amplitude.frequency_std_hz);
  for (const auto& c : e.cautions) std::printf("  caution %s: %s\n", c.code.c_str(), c.message.c_str());
  EXPECT_EQ(e.fit.model, kFitModelTransient);
  ASSERT_TRUE(e.transient.has_value());
  EXPECT_TRUE(HasCaution(e, "time-domain-fit"));
  EXPECT_NEAR(n / kImpactTruthN, 1.0, 0.01);
  EXPECT_LE(e.axial_force_n.ci95_low, kImpactTruthN);
  EXPECT_GE(e.axial_force_n.ci95_high, kImpactTruthN);
  EXPECT_EQ(e.notice, StandingNotice());
  // Issue 17: the time-domain estimate carries the tolerance terms of its
  // modal estimate (tolerance_budget.h): a budget whose std is the fit's and
  // the tolerances' in quadrature, and an interval at least that wide.
  ASSERT_TRUE(e.uncertainty_budget.has_value());
  EXPECT_GT(e.uncertainty_budget->tolerance_std_n, 0.0);
  EXPECT_NEAR(e.uncertainty_budget->axial_force_std_n,
              std::hypot(e.uncertainty_budget->fit_std_n, e.uncertainty_budget->tolerance_std_n),
              1e-9 * e.uncertainty_budget->axial_force_std_n);
  EXPECT_GE(e.axial_force_n.ci95_high - e.axial_force_n.ci95_low,
            2 * 1.959 * e.uncertainty_budget->tolerance_std_n);
}

// The same record without its excitation label (a gateway that omits the
// metadata line): the amplitude check finds the stretching shift above the
// frequency std and the record holds a free decay, so the transient path
// is taken all the same, to the same 1 % and inside the interval. The
// window is cut to 12 periods of mode 1 (TransientPathOptions) so that the
// test stays cheap enough for the sanitizer pass.
TEST(IdentifyRecord, UnlabelledFreeDecayTakesTheTransientPath) {
  const Member m = Tie();
  const Record record = ImpactRecord(m, Excitation::kAmbient);
  ASSERT_GT(record.samples.rows(), 0);
  IdentifyRecordOptions o;
  o.transient.max_window_periods = 12.0;
  Estimate e;
  ASSERT_TRUE(IdentifyRecord(m, record, o, &e).ok());
  std::printf(
      "unlabelled: model %s, N %.1f N (%+.3f %%) [%.1f, %.1f], shift %.4f Hz vs std %.4f Hz (%s), %.2f s\n",
      e.fit.model.c_str(), e.axial_force_n.value, 100 * (e.axial_force_n.value / kImpactTruthN - 1),
      e.axial_force_n.ci95_low, e.axial_force_n.ci95_high, e.amplitude.frequency_shift_hz,
      e.amplitude.frequency_std_hz, e.amplitude.basis.c_str(), e.fit.seconds);
  EXPECT_TRUE(e.amplitude.exceeds_std);
  EXPECT_EQ(e.fit.model, kFitModelTransient);
  EXPECT_NEAR(e.axial_force_n.value / kImpactTruthN, 1.0, 0.01);
  EXPECT_LE(e.axial_force_n.ci95_low, kImpactTruthN);
  EXPECT_GE(e.axial_force_n.ci95_high, kImpactTruthN);
}

// A stationary record at an amplitude large enough for stretching to matter
// holds no free decay: the time-domain fit does not apply, the modal
// estimate is kept, and the large-amplitude caution gives the predicted
// shift. Record: modal superposition of the tie's five lowest modes
// (tests/server/synthetic_record.h, linear by construction), 120 s at
// 256 Hz, scaled to 40 m/s^2 RMS per mode. The check's expectation comes
// from the first-order backbone above: at such an amplitude (several mm of
// RMS displacement of mode 1) the predicted shift exceeds the frequency std
// of a 120 s record by far.
TEST(IdentifyRecord, StationaryLargeAmplitudeStaysModalWithCaution) {
  const Member m = Tie();
  model::ModalParameters p;
  p.axial_force_n = 30000.0;
  p.fixity_left = 0.4;
  p.fixity_right = 0.6;
  const std::string path =
      (std::filesystem::temp_directory_path() /
       ("taut-identify-record-" + std::to_string(::testing::UnitTest::GetInstance()->random_seed()) + ".csv"))
          .string();
  ASSERT_TRUE(testing::WriteSyntheticRecord(path, m, Direction::kVertical, p, {}));
  RecordReadOptions ro;
  ro.member = &m;
  Record record;
  ASSERT_TRUE(ReadRecordCsv(path, ro, &record).ok());
  std::filesystem::remove(path);

  Estimate small;
  ASSERT_TRUE(IdentifyRecord(m, record, {}, &small).ok());
  std::printf("unit RMS: model %s, shift %.5f Hz vs std %.5f Hz (%s, %.3g mm)\n", small.fit.model.c_str(),
              small.amplitude.frequency_shift_hz, small.amplitude.frequency_std_hz,
              small.amplitude.basis.c_str(), 1000 * small.amplitude.amplitude_m);
  EXPECT_EQ(small.fit.model, kFitModelModal);

  record.samples *= 40.0;
  Estimate large;
  ASSERT_TRUE(IdentifyRecord(m, record, {}, &large).ok());
  std::printf("x40: model %s, shift %.5f Hz vs std %.5f Hz, bias %.1f N\n", large.fit.model.c_str(),
              large.amplitude.frequency_shift_hz, large.amplitude.frequency_std_hz,
              large.amplitude.force_bias_n);
  EXPECT_EQ(large.fit.model, kFitModelModal);
  EXPECT_TRUE(large.amplitude.exceeds_std);
  EXPECT_TRUE(HasCaution(large, "large-amplitude"));
  EXPECT_FALSE(large.transient.has_value());
  // The amplitude scales the predicted shift with its square (the backbone
  // above); the frequencies and their stds do not change with a scale.
  EXPECT_NEAR(large.amplitude.frequency_shift_hz / small.amplitude.frequency_shift_hz, 1600.0, 16.0);
}

}  // namespace
}  // namespace taut::estimation
