// Service speed over loopback HTTP (issue 6 targets):
// - upload of a 1 MB CSV record: under 30 ms to the 202 (parse, checksum,
//   store, enqueue);
// - force query with 100,000 stored estimates: p99 under 5 ms at 200
//   requests/s from a loopback load generator (bounded: 2,000 requests in
//   10 s).
// The real ApiServer (server/http_api.h) on an ephemeral port and a real
// SQLite file; no workers (the queue only grows). Run by hand:
//   build/bench/bench_service --benchmark_repetitions=5 --benchmark_report_aggregates_only=true
// Each benchmark reports per-call median and p99 in milliseconds as counters.
#include <benchmark/benchmark.h>

#include <atomic>
#include <cmath>
#include <fstream>
#include <sstream>
#include <thread>

#include "bench_store.h"
#include "model/ambient_synthesis.h"
#include "server/auth.h"
#include "server/http_api.h"
#include "server/iso_time.h"
#include "server/member_json.h"
#include "server/record_csv.h"

// After Eigen: <resolv.h> (pulled in by httplib) defines _res.
#include <httplib.h>

namespace {

using namespace taut_bench;

struct Service {
  Store store{"taut-bench-service.db"};
  std::string token;
  Id tie = 0;  // a member with the real example description, for uploads
  std::unique_ptr<taut::server::ApiServer> api;

  Service() {
    Database db;
    Check(db.Open(store.path), "open");
    Repository repo(db);
    Check(taut::server::IssueToken(repo, store.org, taut::storage::Role::kAdmin, "bench", 0, &token),
          "token");
    std::ifstream in(std::string(TAUT_EXAMPLES_DIR) + "/maltings-east-tie-2.json");
    std::stringstream text;
    text << in.rdbuf();
    std::vector<taut::storage::Structure> structures;
    Check(repo.ListStructures(store.org, &structures), "structures");
    Check(repo.CreateMember(store.org, structures.at(0).id, "maltings-east-tie-2", text.str(), 0, &tie),
          "member");
    taut::server::ServeOptions o;
    o.db_path = store.path;
    api = std::make_unique<taut::server::ApiServer>(o);
    if (!api->Start().ok()) std::abort();
  }
  httplib::Client Client() const {
    httplib::Client c("127.0.0.1", api->port());
    c.set_default_headers({{"Authorization", "Bearer " + token}});
    c.set_keep_alive(true);
    c.set_tcp_nodelay(true);  // as a gateway client should (see http_api.cpp)
    return c;
  }
};

Service& TheService() {
  static Service s;
  return s;
}

void Report(benchmark::State& state, std::vector<double> ms) {
  std::sort(ms.begin(), ms.end());
  if (ms.empty()) return;
  state.counters["median_ms"] = ms[ms.size() / 2];
  state.counters["p99_ms"] = ms[std::min(ms.size() - 1, ms.size() * 99 / 100)];
  state.counters["max_ms"] = ms.back();
}

// A 1 MB CSV: 3 channels of the example tie, model-generated, 9 digits.
std::string OneMegabyteCsv() {
  taut::model::Member member;
  if (!taut::server::LoadMemberFile(std::string(TAUT_EXAMPLES_DIR) + "/maltings-east-tie-2.json", &member)
           .ok()) {
    std::abort();
  }
  taut::model::ModalParameters p;
  p.axial_force_n = 30000;
  taut::model::AmbientSpec spec;
  spec.duration_s = 98;  // 25,088 rows of ~42 bytes: 1.05 MB
  spec.sample_rate_hz = 256;
  spec.modes = 4;
  std::vector<std::string> channels;
  Eigen::MatrixXd a;
  if (!taut::model::SynthesizeAmbient(member, taut::model::Direction::kVertical, p, spec, &channels, &a)
           .ok()) {
    std::abort();
  }
  taut::server::RecordCsvHeader h;
  h.recorded_at = "2026-11-20T10:00:00Z";
  return taut::server::FormatRecordCsv(
      h, channels, spec.sample_rate_hz, a.rows(),
      [&](std::int64_t i, std::size_t c) { return a(i, static_cast<Eigen::Index>(c)); });
}

void BM_UploadOneMegabyteCsv(benchmark::State& state) {
  Service& s = TheService();
  const std::string csv = OneMegabyteCsv();
  auto c = s.Client();
  const std::string path = "/v1/members/" + std::to_string(s.tie) + "/records";
  static std::int64_t n = 0;
  std::vector<double> ms;
  for (auto _ : state) {
    // A distinct record each time (another recorded_at line: the same
    // bytes again would be answered as a duplicate upload).
    std::string body = csv;
    const std::string at = taut::server::FormatIsoUtc(1764547200000 + (++n) * 60000);
    body.replace(body.find("2026-11-20T10:00:00Z"), at.size(), at);
    const auto t0 = std::chrono::steady_clock::now();
    auto r = c.Post(path, body, "text/csv");
    ms.push_back(std::chrono::duration<double, std::milli>(std::chrono::steady_clock::now() - t0).count());
    if (!r || r->status != 202) {
      std::fprintf(stderr, "upload: %s\n", r ? r->body.c_str() : httplib::to_string(r.error()).c_str());
      std::abort();
    }
  }
  state.counters["body_mb"] = static_cast<double>(csv.size()) / 1e6;
  Report(state, ms);
}
BENCHMARK(BM_UploadOneMegabyteCsv)->Unit(benchmark::kMillisecond)->Iterations(50);

// Open-loop load: `kRate` requests/s for kSeconds from kClients threads,
// each request sent at its scheduled time (a late schedule is not skipped,
// so queueing delay shows in the latency).
void BM_ForceQueryAt200PerSecond(benchmark::State& state) {
  constexpr int kRate = 200, kSeconds = 10, kClients = 4;
  Service& s = TheService();
  const std::string path = "/v1/members/" + std::to_string(s.store.member) + "/force";
  std::vector<double> all;
  for (auto _ : state) {
    std::vector<std::vector<double>> per(kClients);
    std::atomic<int> errors{0};
    const auto start = std::chrono::steady_clock::now() + std::chrono::milliseconds(50);
    std::vector<std::thread> threads;
    for (int t = 0; t < kClients; ++t) {
      threads.emplace_back([&, t] {
        auto c = s.Client();
        const int n = kRate * kSeconds / kClients;
        for (int i = 0; i < n; ++i) {
          const auto at =
              start + std::chrono::microseconds(static_cast<std::int64_t>((i * kClients + t) * 1e6 / kRate));
          std::this_thread::sleep_until(at);
          const auto t0 = std::chrono::steady_clock::now();
          auto r = c.Get(path);
          per[t].push_back(
              std::chrono::duration<double, std::milli>(std::chrono::steady_clock::now() - t0).count());
          if (!r || r->status != 200) ++errors;
        }
      });
    }
    for (auto& th : threads) th.join();
    for (auto& v : per) all.insert(all.end(), v.begin(), v.end());
    if (errors > 0) state.SkipWithError("requests failed");
  }
  state.counters["requests"] = static_cast<double>(all.size());
  Report(state, all);
}
BENCHMARK(BM_ForceQueryAt200PerSecond)->Unit(benchmark::kMillisecond)->Iterations(1)->UseRealTime();

// The 30-day history the dashboard draws (2,880 points at one estimate
// every 15 minutes), one client.
void BM_ForceHistory30Days(benchmark::State& state) {
  Service& s = TheService();
  auto c = s.Client();
  const std::string path = "/v1/members/" + std::to_string(s.store.member) +
                           "/force/history?from=2026-06-01T00:00:00Z&to=2026-07-01T00:00:00Z";
  std::vector<double> ms;
  for (auto _ : state) {
    const auto t0 = std::chrono::steady_clock::now();
    auto r = c.Get(path);
    ms.push_back(std::chrono::duration<double, std::milli>(std::chrono::steady_clock::now() - t0).count());
    if (!r || r->status != 200) std::abort();
  }
  Report(state, ms);
}
BENCHMARK(BM_ForceHistory30Days)->Unit(benchmark::kMillisecond);

}  // namespace
