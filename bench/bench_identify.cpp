// Identification speed (issue 4: whole `identify` under 100 ms median with
// unknown N, EI and two fixities). Run by hand:
//   build/bench/bench_identify --benchmark_repetitions=10 --benchmark_report_aggregates_only=true
// The counter "model_calls" is the number of forward-model solves per
// identification.
#include <benchmark/benchmark.h>

#include <cmath>
#include <random>

#include "estimation/identify.h"
#include "model/modal.h"

namespace {

using taut::model::Direction;

// An invented 6 m, 30 mm round tie with three vertical sensors and two
// elastic ends (the unknowns: N, EI, both fixities).
taut::model::Member BenchMember() {
  taut::model::Member m;
  m.id = "bench-tie";
  m.length_m = 6.0;
  m.section.diameter_m = 0.030;
  m.elastic_modulus_pa = 2.0e11;
  m.density_kg_m3 = 7850.0;
  const double x[3] = {1.2, 2.7, 4.2};
  for (int i = 0; i < 3; ++i)
    m.sensors.push_back({"a" + std::to_string(i + 1), x[i], 0.03, Direction::kVertical});
  m.design_axial_force_n = 30000.0;
  return m;
}

// Four modes from the forward model (fine mesh) at N = 30 kN, fixities
// 0.4 / 0.6, with 0.2 % frequency noise and 0.03 shape noise.
taut::estimation::ModalIdentification BenchModes(const taut::model::Member& m) {
  taut::model::ModalParameters p;
  p.axial_force_n = 30000.0;
  p.fixity_left = 0.4;
  p.fixity_right = 0.6;
  taut::model::ModalResult r;
  (void)taut::model::ComputeModes(m, Direction::kVertical, p, 4, &r, {160});
  std::mt19937 rng(7);
  std::normal_distribution<double> unit(0.0, 1.0);
  taut::estimation::ModalIdentification id;
  id.channels = r.channels;
  for (const auto& mode : r.modes) {
    taut::estimation::IdentifiedMode im;
    im.frequency_std_hz = 2e-3 * mode.frequency_hz;
    im.frequency_hz = mode.frequency_hz + im.frequency_std_hz * unit(rng);
    double amax = 0.0;
    for (double v : mode.shape_at_sensors) amax = std::max(amax, std::abs(v));
    for (double v : mode.shape_at_sensors) im.shape.push_back(v / amax + 0.03 * unit(rng));
    id.modes.push_back(im);
  }
  return id;
}

void BM_IdentifyFromModes(benchmark::State& state) {
  const auto member = BenchMember();
  const auto modes = BenchModes(member);
  taut::estimation::IdentifyOptions options;
  options.shape_std = 0.03;
  long calls = 0;
  for (auto _ : state) {
    taut::estimation::Estimate e;
    auto s = taut::estimation::IdentifyFromModes(member, modes, options, &e);
    if (!s.ok()) state.SkipWithError(s.message.c_str());
    calls = e.fit.forward_model_calls;
    benchmark::DoNotOptimize(e);
  }
  state.counters["model_calls"] = static_cast<double>(calls);
}
BENCHMARK(BM_IdentifyFromModes)->Unit(benchmark::kMillisecond);

}  // namespace
