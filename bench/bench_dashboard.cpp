// Dashboard speed (issue 7): a member page with 2 years of daily estimates
// (730 points) rendered, data fetched and drawn, in under 500 ms in headless
// Chromium; the API responses behind it under 20 ms. Run by hand:
//   build/bench/bench_dashboard --benchmark_report_aggregates_only=true
// Each benchmark runs its repetitions (set below) and reports the median.
//
// Setup (not measured): the real server in process on loopback with a real
// SQLite file; 730 records of one member (small ones: their samples are not
// read by the member page) and an estimate for each, stored the way the
// workers store them (ClaimNextJob + CompleteJobWithEstimate) with the
// result JSON of a real identification of a model-generated record, its
// values varied per day (a seasonal temperature cycle moving the force);
// three alerts.
//
// API_*: one GET over loopback HTTP (cpp-httplib client), the client's wall
// time (what the browser waits for). Page_*: Chromium via WebDriver
// (tests/ui/webdriver.h); manual time = the page's own measurement
// (server/ui/js/shared.js window.tautTiming): Page_MemberRoute from the
// route change to the first paint after drawing (the in-app navigation an
// engineer makes from the portfolio), Page_MemberFullLoad from the start of
// a full page load (modules, /v1/me, data, drawing, paint).
#include <benchmark/benchmark.h>
#include <unistd.h>

#include <chrono>
#include <cmath>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <nlohmann/json.hpp>
#include <numbers>
#include <random>
#include <sstream>
#include <thread>

#include "estimation/identify_record.h"
#include "server/auth.h"
#include "server/dashboard_data.h"
#include "server/estimate_json.h"
#include "server/hashing.h"
#include "server/http_api.h"
#include "server/iso_time.h"
#include "server/member_json.h"
#include "storage/migrations.h"
#include "storage/repository.h"
#include "tests/server/synthetic_record.h"
// After Eigen: <resolv.h> defines _res.
#include "tests/ui/webdriver.h"

namespace {

using nlohmann::json;
using taut::storage::Id;

constexpr int kDays = 730;
constexpr std::int64_t kDay_ms = 86400000;
// The page's "2 years" range reaches back 731 days (server/ui/js/member.js).
constexpr std::int64_t kRange_ms = 731 * kDay_ms;

void Die(const std::string& what) {
  std::fprintf(stderr, "bench_dashboard: %s\n", what.c_str());
  std::abort();
}

void Check(const taut::storage::StorageStatus& s, const char* what) {
  if (!s.ok()) Die(std::string(what) + ": " + s.message);
}

struct Fixture {
  std::filesystem::path dir;
  std::unique_ptr<taut::server::ApiServer> server;
  std::unique_ptr<taut::testing::WebDriver> driver;
  std::string token, base, from, browser_error, db_path;
  std::string sample_result;  // one stored result_json
  Id member = 0;

  Fixture() {
    dir = std::filesystem::temp_directory_path() / ("taut-bench-dashboard-" + std::to_string(::getpid()));
    std::filesystem::remove_all(dir);
    std::filesystem::create_directories(dir);
    db_path = (dir / "taut.db").string();
    taut::server::ServeOptions so;
    so.db_path = db_path;
    server = std::make_unique<taut::server::ApiServer>(so);
    if (!server->Start().ok()) Die("server start");
    base = "http://127.0.0.1:" + std::to_string(server->port());
    Fill(db_path);
    from = taut::server::FormatIsoUtc((taut::server::NowUnixMs() - kRange_ms) / 1000 * 1000);
    // TAUT_BENCH_DASHBOARD_SERVE=1: keep the filled server up for a look by
    // hand (prints the address and a read token), no benchmark run.
    if (const char* serve = std::getenv("TAUT_BENCH_DASHBOARD_SERVE"); serve && std::string(serve) == "1") {
      std::printf("%s/ui/#/members/%lld?range=2y\ntoken %s\n", base.c_str(), static_cast<long long>(member),
                  token.c_str());
      std::fflush(stdout);
      for (;;) std::this_thread::sleep_for(std::chrono::seconds(60));
    }
    if (!taut::testing::HaveChromium()) {
      browser_error = "chromium / chromedriver not installed";
      return;
    }
    driver = taut::testing::WebDriver::Start((dir / "chromedriver.log").string(), 1280, 1000, &browser_error);
    if (!driver) return;
    // Sign in once: the token goes where the sign-in page puts it.
    driver->Navigate(base + "/ui/#/signin");
    driver->Execute("sessionStorage.setItem('taut.token', arguments[0]); return true;", {token});
  }
  ~Fixture() {
    driver.reset();
    server.reset();
    std::filesystem::remove_all(dir);
  }

  // One real identification gives the result JSON every stored estimate
  // starts from (its size and shape are what the fixity history reads).
  static json RealResult(const taut::model::Member& member, const std::filesystem::path& dir) {
    taut::model::ModalParameters truth;
    truth.axial_force_n = 30000;
    truth.bending_stiffness_nm2 = member.NominalBendingStiffness_nm2(taut::model::Direction::kVertical);
    truth.fixity_left = truth.fixity_right = 0.5;
    taut::testing::RecordSpec spec;
    spec.duration_s = 60;
    spec.modes = 4;
    const std::string path = (dir / "record.csv").string();
    if (!taut::testing::WriteSyntheticRecord(path, member, taut::model::Direction::kVertical, truth, spec))
      Die("record");
    taut::estimation::Record record;
    taut::estimation::RecordReadOptions ro;
    ro.member = &member;
    if (!taut::estimation::ReadRecordCsv(path, ro, &record).ok()) Die("read record");
    taut::estimation::Estimate estimate;
    if (!taut::estimation::IdentifyRecord(member, record, {}, &estimate).ok()) Die("identify");
    return taut::server::EstimateToJson(estimate);
  }

  void Fill(const std::string& db_path) {
    taut::storage::Database db;
    Check(db.Open(db_path), "open");
    // Setup only: no fsync per write on this connection (the 2,190 write
    // transactions of the fill would otherwise take minutes).
    Check(db.Exec("PRAGMA synchronous = OFF"), "pragma");
    taut::storage::Repository repo(db);
    const std::string member_path = std::string(TAUT_EXAMPLES_DIR) + "/maltings-east-tie-2.json";
    std::ifstream in(member_path);
    std::stringstream text;
    text << in.rdbuf();
    taut::model::Member m;
    if (!taut::server::ParseMember(text.str(), &m).ok()) Die("member");
    const json base_result = RealResult(m, dir);
    Id org = 0, structure = 0;
    const std::int64_t now = taut::server::NowUnixMs();
    Check(repo.CreateOrganisation("Bench works (invented)", now, &org), "org");
    Check(taut::server::IssueToken(repo, org, taut::storage::Role::kRead, "bench", now, &token), "token");
    Check(repo.CreateStructure(org, "Old maltings hall", "", now, &structure), "structure");
    Check(repo.CreateMember(org, structure, m.id, text.str(), now, &member), "member");
    std::mt19937_64 rng(7);
    std::normal_distribution<double> g(0.0, 1.0);
    std::vector<Id> estimate_ids;
    for (int d = 0; d < kDays; ++d) {
      taut::storage::NewRecord r;
      r.member_id = member;
      r.recorded_at_unix_ms = (now - (kDays - d) * kDay_ms + 6 * 3600 * 1000) / 1000 * 1000;
      const double t = 10 + 8 * std::sin(2 * std::numbers::pi * d / 365.0) + 1.5 * g(rng);
      r.temperature_c = t;
      r.sample_rate_hz = 100;
      r.channels = {"v1"};
      r.samples.assign(1000, 0.0);
      r.samples[0] = d;  // distinct content
      char hash[65];
      std::snprintf(hash, sizeof hash, "%064x", d + 1);
      r.content_sha256 = hash;
      r.samples_sha256 = taut::server::Sha256Hex(taut::storage::EncodeSamples(r.samples));
      taut::storage::RecordInsertResult ins;
      Check(repo.InsertRecord(org, r, now, &ins), "record");
      taut::storage::Job job;
      bool claimed = false;
      Check(repo.ClaimNextJob(now, &job, &claimed), "claim");
      if (!claimed) Die("no job");
      // About 0.4 kN per kelvin, as an axially restrained 28 mm tie loses
      // (E A alpha = 1.9e11 x 6.2e-4 x 12e-6, docs/DESIGN.md).
      const double force = 30000 - 420 * (t - 10) + 250 * g(rng);
      json result = base_result;
      result["axial_force_n"] = {{"value", force}, {"std", 300.0}, {"ci95", {force - 600, force + 600}}};
      const double ei = 5730 + 40 * g(rng);
      result["bending_stiffness_nm2"] = {{"value", ei}, {"std", 60.0}, {"ci95", {ei - 120, ei + 120}}};
      const double left = std::clamp(0.45 + 0.05 * g(rng), 0.0, 1.0),
                   right = std::clamp(0.5 + 0.05 * g(rng), 0.0, 1.0);
      result["end_fixity"] = {
          {"left", {{"value", left}, {"std", 0.08}, {"ci95", {left - 0.16, left + 0.16}}}},
          {"right", {{"value", right}, {"std", 0.08}, {"ci95", {right - 0.16, right + 0.16}}}}};
      taut::storage::NewEstimate e;
      e.record_id = job.record_id;
      e.axial_force_n = force;
      e.force_std_n = 300;
      e.force_ci95_low_n = force - 600;
      e.force_ci95_high_n = force + 600;
      e.bending_stiffness_nm2 = ei;
      e.bending_stiffness_std_nm2 = 60;
      e.result_json = result.dump();
      if (d == 0) sample_result = e.result_json;
      Id id = 0;
      Check(repo.CompleteJobWithEstimate(job.id, e, now, &id), "estimate");
      estimate_ids.push_back(id);
    }
    for (int k : {200, 450, 700}) {
      taut::storage::NewAlert a;
      a.member_id = member;
      a.estimate_id = estimate_ids[static_cast<std::size_t>(k)];
      a.rule = "force-residual";
      a.message = "bench alert";
      a.evidence = R"({"points": []})";
      Id id = 0;
      Check(repo.RaiseAlert(org, a, now, &id), "alert");
    }
  }
};

Fixture& F() {
  static Fixture f;
  return f;
}

void ApiGet(benchmark::State& state, const std::string& path) {
  Fixture& f = F();
  httplib::Client c("127.0.0.1", f.server->port());
  c.set_default_headers({{"Authorization", "Bearer " + f.token}});
  std::size_t bytes = 0;
  for (auto _ : state) {
    auto r = c.Get(path);
    if (!r || r->status != 200) {
      state.SkipWithError(("GET " + path + " failed").c_str());
      return;
    }
    bytes = r->body.size();
    benchmark::DoNotOptimize(r->body.data());
  }
  state.counters["bytes"] = static_cast<double>(bytes);
}

void API_Member(benchmark::State& s) { ApiGet(s, "/v1/members/" + std::to_string(F().member)); }
void API_ForceHistory2y(benchmark::State& s) {
  ApiGet(s, "/v1/members/" + std::to_string(F().member) + "/force/history?from=" + F().from);
}
void API_Drift2y(benchmark::State& s) {
  ApiGet(s, "/v1/members/" + std::to_string(F().member) + "/drift?from=" + F().from);
}
void API_FixityHistory2y(benchmark::State& s) {
  ApiGet(s, "/v1/members/" + std::to_string(F().member) + "/fixity/history?from=" + F().from);
}
// The first fixity history after a start (SQLite's page cache of this
// connection cold): a fresh server on the same file for every iteration.
void API_FixityHistory2yCold(benchmark::State& state) {
  Fixture& f = F();
  const std::string path = "/v1/members/" + std::to_string(f.member) + "/fixity/history?from=" + f.from;
  for (auto _ : state) {
    state.PauseTiming();
    taut::server::ServeOptions so;
    so.db_path = f.db_path;
    taut::server::ApiServer fresh(so);
    if (!fresh.Start().ok()) return state.SkipWithError("server start");
    httplib::Client c("127.0.0.1", fresh.port());
    c.set_default_headers({{"Authorization", "Bearer " + f.token}});
    if (!c.Get("/v1/me")) return state.SkipWithError("warm-up");  // connection pool, token
    state.ResumeTiming();
    auto r = c.Get(path);
    if (!r || r->status != 200) return state.SkipWithError("GET fixity history failed");
    benchmark::DoNotOptimize(r->body.data());
    state.PauseTiming();
    fresh.Stop();
    state.ResumeTiming();
  }
}
void API_MemberAlerts(benchmark::State& s) {
  ApiGet(s, "/v1/alerts?member_id=" + std::to_string(F().member));
}
void API_Me(benchmark::State& s) { ApiGet(s, "/v1/me"); }

std::string MemberHash(Fixture& f) { return "#/members/" + std::to_string(f.member) + "?range=2y"; }

bool WaitMember(taut::testing::WebDriver& d) {
  return d.WaitFor(
      "document.documentElement.dataset.page === 'member' && document.documentElement.dataset.state === "
      "'ready'",
      30.0);
}

// In-app navigation: from the alerts page to the member page.
void Page_MemberRoute(benchmark::State& state) {
  Fixture& f = F();
  if (!f.driver) return state.SkipWithError(f.browser_error.c_str());
  auto& d = *f.driver;
  const std::string member = MemberHash(f);
  double fetched = 0, points = 0;
  for (auto _ : state) {
    d.Navigate(f.base + "/ui/#/alerts");
    d.WaitFor(
        "document.documentElement.dataset.page === 'alerts' && document.documentElement.dataset.state === "
        "'ready'",
        30);
    d.Navigate(f.base + "/ui/" + member);
    if (!WaitMember(d)) return state.SkipWithError(d.last_error().c_str());
    const json t = d.Execute("return window.tautTiming;");
    state.SetIterationTime(t["drawn_ms"].get<double>() / 1000.0);
    fetched = t["fetched_ms"].get<double>();
    points =
        d.Execute("return document.querySelectorAll('figure[data-chart=force] .layer-force .pt').length;")
            .get<double>();
  }
  state.counters["fetched_ms"] = fetched;
  state.counters["force_points"] = points;
}

// A full load of the member page (reload: modules, /v1/me, data, drawing).
void Page_MemberFullLoad(benchmark::State& state) {
  Fixture& f = F();
  if (!f.driver) return state.SkipWithError(f.browser_error.c_str());
  auto& d = *f.driver;
  d.Navigate(f.base + "/ui/" + MemberHash(f));
  WaitMember(d);
  for (auto _ : state) {
    d.Execute("document.documentElement.dataset.state = 'reloading'; location.reload(); return true;");
    if (!WaitMember(d)) return state.SkipWithError(d.last_error().c_str());
    const json t = d.Execute("return window.tautTiming;");
    state.SetIterationTime(t["since_navigation_ms"].get<double>() / 1000.0);
  }
}

}  // namespace

BENCHMARK(API_Member)->Unit(benchmark::kMillisecond)->Repetitions(10);
BENCHMARK(API_ForceHistory2y)->Unit(benchmark::kMillisecond)->Repetitions(10);
BENCHMARK(API_Drift2y)->Unit(benchmark::kMillisecond)->Repetitions(10);
BENCHMARK(API_FixityHistory2y)->Unit(benchmark::kMillisecond)->Repetitions(10);
BENCHMARK(API_FixityHistory2yCold)->Unit(benchmark::kMillisecond)->Iterations(5)->Repetitions(10);
BENCHMARK(API_MemberAlerts)->Unit(benchmark::kMillisecond)->Repetitions(10);
BENCHMARK(API_Me)->Unit(benchmark::kMillisecond)->Repetitions(10);
BENCHMARK(Page_MemberRoute)->UseManualTime()->Unit(benchmark::kMillisecond)->Iterations(1)->Repetitions(15);
BENCHMARK(Page_MemberFullLoad)
    ->UseManualTime()
    ->Unit(benchmark::kMillisecond)
    ->Iterations(1)
    ->Repetitions(15);
