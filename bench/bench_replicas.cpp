// Several `taut serve` replicas on one PostgreSQL database (issue 14):
// records identified per second by 1, 2 and 3 replicas of the built binary,
// each with one worker thread, on a PostgreSQL server the benchmark starts
// (tests/storage/postgres_server.h). Per run: a copy of a database holding
// kRecords uploaded records with their jobs queued (model-generated 300 s
// records of the example hanger, uploaded once over HTTP before any clock
// starts), then the replicas are started and timed from their start to the
// last job done (process start, ~0.1 s, included). Run by hand:
//   build/bench/bench_replicas --benchmark_repetitions=3
// Counter records_per_s = kRecords / that time. The force query p99 on
// PostgreSQL is bench_service's, run with TAUT_BENCH_POSTGRES=1.
#include <benchmark/benchmark.h>
#include <signal.h>
#include <unistd.h>

#include <chrono>
#include <filesystem>
#include <fstream>
#include <nlohmann/json.hpp>
#include <thread>

#include "bench_store.h"
#include "server/auth.h"
#include "server/iso_time.h"
#include "tests/server/hanger_record.h"
#include "tests/server/serve_process.h"

// After Eigen: <resolv.h> (pulled in by httplib) defines _res.
#include <httplib.h>

namespace {

using namespace taut_bench;
using nlohmann::json;

constexpr int kRecords = 48;

const std::vector<std::string>& Records() {
  static const std::vector<std::string> csvs = [] {
    taut::testing::Hanger hanger;
    std::vector<std::string> out;
    for (int i = 0; i < kRecords; ++i) {
      out.push_back(taut::testing::HangerCsv(hanger, 90000,
                                             taut::server::FormatIsoUtc(kStart_ms + i * kDay_ms), 10,
                                             500 + static_cast<unsigned>(i), 300.0));
    }
    return out;
  }();
  return csvs;
}

std::string StartReplicas(const std::string& uri, int n,
                          std::vector<std::unique_ptr<taut::testing::ServeProcess>>* procs) {
  const std::string log = (std::filesystem::temp_directory_path() / "taut-bench-replicas.log").string();
  for (int i = 0; i < n; ++i) {
    procs->push_back(std::make_unique<taut::testing::ServeProcess>());
    if (procs->back()->Start(uri, log, 1, {"--quiet"}) <= 0)
      std::exit(1);  // exit: the PostgreSQL server is stopped at exit
  }
  return log;
}

void WaitForJobs(const std::string& uri) {
  taut::storage::PgConnection sql;
  Check(sql.Open(uri), "open");
  std::vector<std::vector<std::string>> rows;
  for (;;) {
    Check(sql.Query("SELECT count(*) FROM job WHERE state IN ('done', 'failed')", {}, &rows), "count");
    if (rows[0][0] == std::to_string(kRecords)) return;
    std::this_thread::sleep_for(std::chrono::milliseconds(10));
  }
}

// A database with kRecords uploaded records whose jobs are all queued: the
// records go in through one replica (the HTTP upload path), then its
// results are removed and the jobs queued again. Each run copies it
// (CREATE DATABASE ... TEMPLATE), so every run starts from the same queue.
const std::string& LoadedTemplate() {
  static const std::string name = [] {
    const std::string uri = NewPostgresDatabase("bench_loaded");
    std::string token;
    {
      Database db;
      Check(taut::storage::OpenAndMigrate(db, uri), "migrate");
      Repository repo(db);
      Id org = 0;
      Check(repo.CreateOrganisation("Bench Estates", 0, &org), "org");
      Check(taut::server::IssueToken(repo, org, taut::storage::Role::kAdmin, "bench", 0, &token), "token");
    }
    taut::testing::ServeProcess loader;
    const int port = loader.Start(uri, "/dev/null", 1, {"--quiet"});
    if (port <= 0) std::exit(1);  // exit: the PostgreSQL server is stopped at exit
    taut::testing::Hanger hanger;
    httplib::Client c("127.0.0.1", port);
    c.set_default_headers({{"Authorization", "Bearer " + token}});
    c.set_read_timeout(60, 0);
    auto st = c.Post("/v1/structures", R"({"name": "Bench hall"})", "application/json");
    const auto structure = json::parse(st->body)["id"].get<std::int64_t>();
    auto m =
        c.Post("/v1/structures/" + std::to_string(structure) + "/members", hanger.text, "application/json");
    const std::string records = "/v1/members/" + json::parse(m->body)["id"].dump() + "/records";
    for (const std::string& csv : Records()) {
      auto r = c.Post(records, csv, "text/csv");
      if (!r || r->status != 202) std::exit(1);  // exit: the PostgreSQL server is stopped at exit
    }
    WaitForJobs(uri);
    loader.Kill(SIGTERM);
    Database db;
    Check(db.Open(uri), "open");
    Check(db.Exec(
              "DELETE FROM webhook_delivery; DELETE FROM alert; DELETE FROM estimate; UPDATE job SET state = "
              "'queued', progress = 0, attempts = 0, started_at_unix_ms = NULL, finished_at_unix_ms = NULL, "
              "failure_reason = NULL, lease_owner = NULL, lease_expires_at_unix_ms = NULL"),
          "requeue");
    return std::string("bench_loaded");
  }();
  return name;
}

void BM_RecordsIdentifiedPerSecond(benchmark::State& state) {
  const int replicas = static_cast<int>(state.range(0));
  const std::string& loaded = LoadedTemplate();
  static int run = 0;
  for (auto _ : state) {
    const std::string db_uri = NewPostgresDatabase("replicas" + std::to_string(++run), loaded);
    std::vector<std::unique_ptr<taut::testing::ServeProcess>> procs;
    const auto t0 = std::chrono::steady_clock::now();
    StartReplicas(db_uri, replicas, &procs);
    WaitForJobs(db_uri);
    const double seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
    state.SetIterationTime(seconds);
    state.counters["records_per_s"] = kRecords / seconds;
    // CPU the replicas used (utime + stime, proc(5)) over the wall time:
    // how many of the machine's cores they kept busy.
    double cpu_s = 0;
    for (auto& p : procs) {
      std::ifstream stat("/proc/" + std::to_string(p->pid()) + "/stat");
      std::string field;
      for (int k = 1; k <= 15 && stat >> field; ++k) {
        if (k == 14 || k == 15) cpu_s += std::stod(field) / static_cast<double>(sysconf(_SC_CLK_TCK));
      }
    }
    state.counters["replica_cores_busy"] = cpu_s / seconds;
    for (auto& p : procs) p->Kill(SIGTERM);
  }
}
BENCHMARK(BM_RecordsIdentifiedPerSecond)
    ->Arg(1)
    ->Arg(2)
    ->Arg(3)
    ->Iterations(1)
    ->UseManualTime()
    ->Unit(benchmark::kMillisecond);

}  // namespace
