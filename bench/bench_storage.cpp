// Storage speed (issue 6: force query with 100,000 stored estimates, p99
// under 5 ms end to end over HTTP; this measures the storage share of it),
// and insert throughput. Run by hand:
//   build/bench/bench_storage --benchmark_repetitions=5 --benchmark_report_aggregates_only=true
// Each query benchmark also reports its own per-call median and p99 (in
// microseconds) as counters, from the individual call times.
#include <benchmark/benchmark.h>

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <filesystem>
#include <string>
#include <vector>

#include "bench_store.h"

namespace {

using namespace taut_bench;

Store& TheStore() {
  static Store store("taut-bench-storage.db");
  return store;
}

void BM_LatestEstimate(benchmark::State& state) {
  Store& s = TheStore();
  Database db;
  Check(db.Open(s.path), "open");
  Repository repo(db);
  taut::storage::Estimate e;
  TimedCalls(state, [&] {
    Check(repo.LatestEstimate(s.org, s.member, &e), "latest");
    benchmark::DoNotOptimize(e);
  });
}
BENCHMARK(BM_LatestEstimate);

// History over `range(0)` days ending at a varying point of the series.
void BM_ForceHistory(benchmark::State& state) {
  Store& s = TheStore();
  Database db;
  Check(db.Open(s.path), "open");
  Repository repo(db);
  std::vector<taut::storage::Estimate> rows;
  const std::int64_t span = state.range(0) * kDay_ms;
  std::int64_t k = 0;
  TimedCalls(state, [&] {
    const std::int64_t from = kStart_ms + (k++ * 7 * kDay_ms) % (900 * kDay_ms);
    Check(repo.ForceHistory(s.org, s.member, from, from + span, &rows), "history");
    benchmark::DoNotOptimize(rows);
  });
  state.counters["rows"] = static_cast<double>(rows.size());
}
BENCHMARK(BM_ForceHistory)->Arg(1)->Arg(30)->Arg(365);

// Upload of a record the size of a 1 MB CSV (3 channels x 25,000 samples:
// ~40 bytes per CSV row) with its job, one durable transaction each.
void BM_InsertRecord(benchmark::State& state) {
  Store& s = TheStore();
  Database db;
  Check(db.Open(s.path), "open");
  Repository repo(db);
  taut::storage::NewRecord r;
  r.member_id = s.member;
  r.sample_rate_hz = 200;
  r.channels = {"a1", "a2", "a3"};
  r.samples.resize(3 * 25000);
  for (std::size_t i = 0; i < r.samples.size(); ++i) r.samples[i] = 0.001 * static_cast<double>(i % 1000);
  r.samples_sha256 = Hex64(1);
  static unsigned long long n = 1u << 30;
  taut::storage::RecordInsertResult out;
  TimedCalls(state, [&] {
    r.content_sha256 = Hex64(++n);
    r.recorded_at_unix_ms = static_cast<std::int64_t>(n);
    Check(repo.InsertRecord(s.org, r, 0, &out), "insert");
  });
  state.SetItemsProcessed(state.iterations());
}
BENCHMARK(BM_InsertRecord)->Unit(benchmark::kMillisecond);

// Worker side: claim a job and store its estimate (two transactions).
void BM_ClaimAndComplete(benchmark::State& state) {
  Store& s = TheStore();
  Database db;
  Check(db.Open(s.path), "open");
  Repository repo(db);
  taut::storage::NewRecord r;
  r.member_id = s.member;
  r.sample_rate_hz = 200;
  r.channels = {"a1"};
  r.samples = {0.0};
  r.samples_sha256 = Hex64(2);
  static unsigned long long n = 1u << 31;
  const std::string json(1500, ' ');
  for (auto _ : state) {
    state.PauseTiming();
    r.content_sha256 = Hex64(++n);
    taut::storage::RecordInsertResult ins;
    Check(repo.InsertRecord(s.org, r, 0, &ins), "insert");
    state.ResumeTiming();
    taut::storage::Job j;
    bool claimed = false;
    Check(repo.ClaimNextJob(0, &j, &claimed), "claim");
    Id est = 0;
    Check(
        repo.CompleteJobWithEstimate(j.id, {j.record_id, 30000, 200, 29600, 30400, 8000, 100, json}, 0, &est),
        "complete");
  }
  state.SetItemsProcessed(state.iterations());
}
BENCHMARK(BM_ClaimAndComplete)->Unit(benchmark::kMillisecond);

}  // namespace
