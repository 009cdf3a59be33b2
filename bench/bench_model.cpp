// Forward-model speed (issue: one tangent modal analysis of a 40-element
// member, 6 modes, under 0.2 ms median). Run by hand:
//   build/bench/bench_model --benchmark_repetitions=10 --benchmark_report_aggregates_only=true
#include <benchmark/benchmark.h>

#include "model/modal.h"

namespace {

using taut::model::Direction;

// An invented 6 m, 30 mm round tie with three sensors and elastic ends.
taut::model::Member BenchMember() {
  taut::model::Member m;
  m.length_m = 6.0;
  m.section.shape = taut::model::Section::Shape::kCircle;
  m.section.diameter_m = 0.030;
  m.elastic_modulus_pa = 2.0e11;
  m.density_kg_m3 = 7850.0;
  for (int i = 1; i <= 3; ++i)
    m.sensors.push_back({"a" + std::to_string(i), 1.5 * i, 0.03, Direction::kVertical});
  return m;
}

taut::model::ModalParameters BenchParameters() {
  taut::model::ModalParameters p;
  p.axial_force_n = 30000.0;
  p.fixity_left = 0.4;
  p.fixity_right = 0.6;
  return p;
}

// Solve() on a prebuilt model: what the estimation's inner loop pays.
void BM_ModalSolve(benchmark::State& state, Direction direction) {
  const taut::model::ModalModel model(BenchMember(), direction, {static_cast<int>(state.range(0))});
  const auto p = BenchParameters();
  taut::model::ModalResult r;
  for (auto _ : state) {
    auto s = model.Solve(p, 6, &r);
    benchmark::DoNotOptimize(r);
    if (!s.ok()) state.SkipWithError(s.message.c_str());
  }
}
BENCHMARK_CAPTURE(BM_ModalSolve, vertical_sag, Direction::kVertical)->Arg(40)->Arg(160);
BENCHMARK_CAPTURE(BM_ModalSolve, lateral, Direction::kLateral)->Arg(40);

// Mesh, assembly and solve from scratch.
void BM_ComputeModesFromScratch(benchmark::State& state) {
  const auto m = BenchMember();
  const auto p = BenchParameters();
  taut::model::ModalResult r;
  for (auto _ : state) {
    auto s = taut::model::ComputeModes(m, Direction::kVertical, p, 6, &r, {40});
    benchmark::DoNotOptimize(r);
    if (!s.ok()) state.SkipWithError(s.message.c_str());
  }
}
BENCHMARK(BM_ComputeModesFromScratch);

}  // namespace

// Issue target: one transient of 10 s at 2 kHz output with 20 elements,
// quasi-static-axial form, under 20 ms.
#include "model/transient.h"

namespace {

void BM_Transient10s2kHz(benchmark::State& state) {
  const auto m = BenchMember();
  auto p = BenchParameters();
  taut::model::TransientOptions o;
  o.target_elements = 20;
  o.output_rate_hz = 2000.0;
  o.duration_s = 10.0;
  o.damping_ratio = 0.005;
  const taut::model::TransientModel model(m, Direction::kVertical, p, o);
  taut::model::TransientLoads loads;
  loads.impulses = {{2.2, 1.5}};
  taut::model::TransientResult r;
  for (auto _ : state) {
    auto s = model.Run(loads, &r);
    benchmark::DoNotOptimize(r);
    if (!s.ok()) state.SkipWithError(s.message.c_str());
  }
  state.counters["steps"] = r.steps;
  state.counters["newton_per_step"] = static_cast<double>(r.newton_iterations) / r.steps;
}
BENCHMARK(BM_Transient10s2kHz)->Unit(benchmark::kMillisecond);

}  // namespace
