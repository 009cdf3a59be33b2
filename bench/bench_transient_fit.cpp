// Speed of one whole time-domain fit (issue 5: a 10 s, 2 kHz record with
// 20 elements, target under 2 s). The record is synthetic, made by the
// quasi-static model itself at known parameters (an invented 6 m, 30 mm
// tie with elastic ends, three sensors, large amplitude, 0.5 % damping).
// Run by hand:
//   build/bench/bench_transient_fit --benchmark_repetitions=5 --benchmark_report_aggregates_only=true
#include <benchmark/benchmark.h>

#include <string>

#include "estimation/transient_fit.h"
#include "model/transient.h"

namespace {

using taut::model::Direction;

taut::model::Member BenchMember() {
  taut::model::Member m;
  m.id = "invented-bench-tie";
  m.length_m = 6.0;
  m.section.shape = taut::model::Section::Shape::kCircle;
  m.section.diameter_m = 0.030;
  m.elastic_modulus_pa = 2.0e11;
  m.density_kg_m3 = 7850.0;
  m.axial.kind = taut::model::AxialEnds::Kind::kFixed;
  for (int i = 1; i <= 3; ++i)
    m.sensors.push_back({"a" + std::to_string(i), 1.4 * i, 0.0, Direction::kVertical});
  return m;
}

void BM_TransientFit(benchmark::State& state) {
  const taut::model::Member m = BenchMember();
  taut::model::ModalParameters p;
  p.axial_force_n = 20000.0;
  p.fixity_left = 0.4;
  p.fixity_right = 0.6;
  taut::model::TransientOptions o;
  o.target_elements = 20;
  o.output_rate_hz = 2000.0;
  o.duration_s = 10.0;
  o.damping_ratio = 0.005;
  const taut::model::TransientModel truth(m, Direction::kVertical, p, o);
  taut::model::TransientLoads loads;
  loads.initial_displacement = truth.ModeShape(1, 0.015) + truth.ModeShape(2, 0.003);
  taut::model::TransientResult rec;
  if (!truth.Run(loads, &rec).ok()) {
    state.SkipWithError("truth run failed");
    return;
  }
  taut::estimation::TransientFitStart start;
  start.axial_force_n = 1.1 * p.axial_force_n;
  taut::estimation::TransientFitOptions opt;
  opt.modes = 2;
  opt.target_elements = 20;
  int runs = 0;
  double n_fit = 0.0;
  for (auto _ : state) {
    taut::estimation::TransientFitResult r;
    const auto s = taut::estimation::FitTransient(m, Direction::kVertical, rec.acceleration_m_s2, 2000.0,
                                                  start, opt, &r);
    if (!s.ok()) {
      state.SkipWithError(s.message.c_str());
      return;
    }
    runs = r.model_runs;
    n_fit = r.axial_force_n.value;
    benchmark::DoNotOptimize(r);
  }
  state.counters["model_runs"] = runs;
  state.counters["N_fit_over_truth"] = n_fit / p.axial_force_n;
}
BENCHMARK(BM_TransientFit)->Unit(benchmark::kMillisecond)->Iterations(1);

}  // namespace
