// The whole service end to end: the real `taut serve` executable as a child
// process on a loopback port with a real SQLite file, records uploaded over
// HTTP as a gateway sends them, identified by the job workers, queried back;
// a SIGKILL with queued and running jobs; drift alerts and their webhook.
//
// Records are model-generated (model/ambient_synthesis.h, modal
// superposition of the member model) with known parameters, so the truth
// is known. Readiness: the child prints its bound port once it listens
// (cpp-httplib test/test.cc style: ephemeral port, wait until ready, stop
// and reap in TearDown); every wait is bounded.
#include <fcntl.h>
#include <gtest/gtest.h>
#include <signal.h>
#include <sys/wait.h>
#include <unistd.h>

#include <atomic>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <map>
#include <mutex>
#include <nlohmann/json.hpp>
#include <numbers>
#include <random>
#include <sstream>
#include <thread>

#include "estimation/record.h"
#include "model/ambient_synthesis.h"
#include "serve_process.h"
#include "server/auth.h"
#include "server/hashing.h"
#include "server/iso_time.h"
#include "server/job_run.h"
#include "server/member_json.h"
#include "server/record_csv.h"
#include "server/worker.h"
#include "storage/migrations.h"
#include "storage/repository.h"
#include "tests/server/hanger_record.h"
#include "tests/server/serve_process.h"
#include "tests/storage/backend_fixture.h"

// After Eigen: <resolv.h> (pulled in by httplib) defines _res.
#include <httplib.h>

namespace taut::server {
namespace {

using nlohmann::json;
using namespace std::chrono_literals;

using taut::testing::Hanger;
using taut::testing::HangerCsv;

// Every test runs on both storage backends (tests/storage/backend_fixture.h):
// `taut serve --db` an SQLite file, and a PostgreSQL URI.
class ServiceTest : public ::testing::TestWithParam<storage::testing::Backend> {
 protected:
  void SetUp() override {
    dir_ = std::filesystem::temp_directory_path() /
           ("taut-service-" + std::to_string(::getpid()) + "-" +
            ::testing::UnitTest::GetInstance()->current_test_info()->name());
    std::filesystem::remove_all(dir_);
    std::filesystem::create_directories(dir_);
    db_ = GetParam() == storage::testing::Backend::kSqlite ? (dir_ / "taut.db").string()
                                                           : storage::testing::FreshPostgresDatabase();
    ASSERT_FALSE(db_.empty());
    storage::Database db;
    ASSERT_TRUE(storage::OpenAndMigrate(db, db_).ok());
    storage::Repository repo(db);
    storage::Id org = 0;
    ASSERT_TRUE(repo.CreateOrganisation("Oskerton bridge works", NowUnixMs(), &org).ok());
    ASSERT_TRUE(IssueToken(repo, org, storage::Role::kAdmin, "test admin", NowUnixMs(), &admin_).ok());
  }
  void TearDown() override {
    serve_.Kill(SIGKILL);
    if (!HasFailure()) std::filesystem::remove_all(dir_);
  }

  void StartServe(int workers) {
    // The webhook receivers of these tests listen on loopback, which taut
    // refuses unless allowed (webhook_policy.h).
    // On PostgreSQL a restarted service does not requeue running jobs
    // (other replicas may own them): a short lease brings the job of a
    // killed process back within seconds.
    port_ = serve_.Start(db_, (dir_ / "serve.log").string(), workers,
                         {"--webhook-allow", "127.0.0.0/8", "--job-lease", "2"});
    ASSERT_GT(port_, 0) << "taut serve did not report a port; see " << (dir_ / "serve.log");
  }
  httplib::Client Client() const {
    httplib::Client c("127.0.0.1", port_);
    c.set_default_headers({{"Authorization", "Bearer " + admin_}});
    c.set_read_timeout(60, 0);
    return c;
  }
  // Structure + the hanger; returns the member id.
  std::int64_t CreateHanger() {
    auto c = Client();
    auto s = c.Post("/v1/structures", R"({"name": "Oskerton footbridge"})", "application/json");
    EXPECT_TRUE(s && s->status == 201);
    const auto structure = json::parse(s->body)["id"].get<std::int64_t>();
    auto m =
        c.Post("/v1/structures/" + std::to_string(structure) + "/members", hanger_.text, "application/json");
    EXPECT_TRUE(m && m->status == 201) << (m ? m->body : httplib::to_string(m.error()));
    return json::parse(m->body)["id"].get<std::int64_t>();
  }
  json Upload(std::int64_t member, const std::string& csv) {
    auto r = Client().Post("/v1/members/" + std::to_string(member) + "/records", csv, "text/csv");
    EXPECT_TRUE(r && r->status == 202) << (r ? r->body : httplib::to_string(r.error()));
    return r ? json::parse(r->body) : json();
  }
  // Polls the jobs until every one is done or failed (bounded by `limit`).
  bool WaitForJobs(const std::vector<std::int64_t>& jobs, std::chrono::seconds limit) {
    const auto deadline = std::chrono::steady_clock::now() + limit;
    auto c = Client();
    for (std::int64_t id : jobs) {
      for (;;) {
        auto r = c.Get("/v1/jobs/" + std::to_string(id));
        if (r && r->status == 200) {
          const std::string st = json::parse(r->body)["state"];
          if (st == "done" || st == "failed") break;
        }
        if (std::chrono::steady_clock::now() > deadline) return false;
        std::this_thread::sleep_for(50ms);
      }
    }
    return true;
  }

  std::filesystem::path dir_;
  std::string db_, admin_;
  taut::testing::ServeProcess serve_;
  int port_ = 0;
  Hanger hanger_;
};
TAUT_BOTH_BACKENDS(ServiceTest);

TEST_P(ServiceTest, UploadJobEstimateForceQueryReturnsTheTruthWithinItsInterval) {
  StartServe(2);
  const auto member = CreateHanger();
  // Uploaded out of time order; N differs per record so that the latest is
  // recognisable.
  const std::vector<std::string> times = {"2026-11-22T06:00:00Z", "2026-11-20T06:00:00Z",
                                          "2026-11-21T06:00:00Z"};
  const std::vector<double> force = {92000, 88000, 90000};
  std::vector<std::int64_t> jobs;
  for (std::size_t i = 0; i < times.size(); ++i) {
    jobs.push_back(Upload(member, HangerCsv(hanger_, force[i], times[i], 10.0, 11 + i))["job_id"]);
  }
  ASSERT_TRUE(WaitForJobs(jobs, 300s));
  auto c = Client();
  const std::string m = std::to_string(member);
  const json latest = json::parse(c.Get("/v1/members/" + m + "/force")->body);
  ASSERT_TRUE(latest.contains("result")) << latest.dump();
  EXPECT_EQ(latest["measured_at"], "2026-11-22T06:00:00Z");
  // The truth inside the reported 95 % interval (docs/FORMATS.md section 3), and
  // the value within 3 std of it (a 99.7 % event for an honest std).
  const json& n = latest["result"]["axial_force_n"];
  EXPECT_LE(n["ci95"][0].get<double>(), force[0]);
  EXPECT_GE(n["ci95"][1].get<double>(), force[0]);
  EXPECT_NEAR(n["value"].get<double>(), force[0], 3 * n["std"].get<double>());
  EXPECT_FALSE(latest["result"]["notice"].get<std::string>().empty());
  const json h = json::parse(
      c.Get("/v1/members/" + m + "/force/history?from=2026-11-01T00:00:00Z&to=2026-12-01T00:00:00Z")->body);
  ASSERT_EQ(h["points"].size(), 3u);
  const std::vector<double> by_time = {force[1], force[2], force[0]};
  for (std::size_t i = 0; i < 3; ++i) {
    const json& p = h["points"][i];
    EXPECT_EQ(p["measured_at"], "2026-11-2" + std::to_string(i) + "T06:00:00Z");
    EXPECT_LE(p["ci95_n"][0].get<double>(), by_time[i]) << i;
    EXPECT_GE(p["ci95_n"][1].get<double>(), by_time[i]) << i;
  }
}

// A record the estimation cannot use (white noise: no mode stands out) is
// stored, its job fails with the estimation's reason, and the service's
// metrics (Prometheus text exposition format) count the outcome, the jobs
// by state and the requests per route.
TEST_P(ServiceTest, UnidentifiableRecordFailsItsJobWithTheReasonAndMetricsCountIt) {
  StartServe(1);
  const auto member = CreateHanger();
  std::mt19937_64 rng(5);
  std::normal_distribution<double> g(0.0, 0.01);
  RecordCsvHeader header;
  header.recorded_at = "2026-11-20T06:00:00Z";
  const std::string noise = FormatRecordCsv(header, {"h1", "h2", "h3"}, 128, 128 * 60,
                                            [&](std::int64_t, std::size_t) { return g(rng); });
  const json sent = Upload(member, noise);
  ASSERT_TRUE(WaitForJobs({sent["job_id"].get<std::int64_t>()}, 120s));
  auto c = Client();
  const json job = json::parse(c.Get("/v1/jobs/" + std::to_string(sent["job_id"].get<std::int64_t>()))->body);
  EXPECT_EQ(job["state"], "failed");
  EXPECT_FALSE(job["failure_reason"].get<std::string>().empty()) << job.dump();
  EXPECT_EQ(
      c.Get("/v1/records/" + std::to_string(sent["record_id"].get<std::int64_t>()) + "/estimate")->status,
      404);
  const std::string metrics = httplib::Client("127.0.0.1", port_).Get("/metrics")->body;
  EXPECT_NE(metrics.find("taut_jobs{state=\"failed\"} 1"), std::string::npos) << metrics;
  EXPECT_NE(metrics.find("taut_identify_total{outcome=\"failed\"} 1"), std::string::npos) << metrics;
  EXPECT_NE(metrics.find("taut_identify_duration_seconds_count 1"), std::string::npos) << metrics;
  EXPECT_NE(
      metrics.find(
          "taut_http_requests_total{method=\"POST\",route=\"/v1/members/{id}/records\",status=\"202\"} 1"),
      std::string::npos)
      << metrics;
}

TEST_P(ServiceTest, SigkillWithQueuedAndRunningJobsLosesNothing) {
  StartServe(1);
  const auto member = CreateHanger();
  struct Sent {
    std::int64_t record, job;
    std::string sha;
  };
  std::vector<Sent> sent;
  // 300 s records, made before the uploads so that these follow each other
  // quickly: the kill then finds one job running and others queued.
  std::vector<std::string> csvs;
  for (unsigned i = 0; i < 8; ++i) {
    csvs.push_back(
        HangerCsv(hanger_, 90000, "2026-11-2" + std::to_string(i) + "T06:00:00Z", 8, 40 + i, 300.0));
  }
  for (const auto& csv : csvs) {
    const json r = Upload(member, csv);
    sent.push_back({r["record_id"], r["job_id"], Sha256Hex(csv)});
  }
  // Freeze the child (SIGSTOP) at a moment when the file shows one job
  // running and others queued, then kill it: the moment is exact, not a
  // race between a poll and the kill. WAL mode lets this process read while
  // the stopped one holds its connection.
  storage::Database db;
  ASSERT_TRUE(db.Open(db_).ok());
  storage::Repository repo(db);
  storage::Organisation org;
  ASSERT_TRUE(repo.FindOrganisationByName("Oskerton bridge works", &org).ok());
  auto count = [&](storage::JobState state) {
    int n = 0;
    for (const auto& s : sent) {
      storage::Job job;
      if (repo.GetJob(org.id, s.job, &job).ok() && job.state == state) ++n;
    }
    return n;
  };
  bool caught = false;
  for (int k = 0; k < 400 && !caught; ++k) {
    ASSERT_TRUE(serve_.Stop());
    caught = count(storage::JobState::kRunning) == 1 && count(storage::JobState::kQueued) > 0;
    if (!caught) {
      serve_.Signal(SIGCONT);
      std::this_thread::sleep_for(2ms);
    }
  }
  ASSERT_TRUE(caught) << "never saw a running job with queued ones";
  const int status = serve_.Kill(SIGKILL);
  ASSERT_TRUE(WIFSIGNALED(status) && WTERMSIG(status) == SIGKILL);

  // Every acknowledged record is in the file with the hash of its upload
  // and samples matching their stored SHA-256 (FIPS 180-4 via OpenSSL).
  for (const auto& s : sent) {
    storage::Record r;
    ASSERT_TRUE(repo.GetRecord(org.id, s.record, &r).ok()) << s.record;
    EXPECT_EQ(r.content_sha256, s.sha);
    EXPECT_EQ(Sha256Hex(storage::EncodeSamples(r.samples)), r.samples_sha256);
    EXPECT_EQ(r.sample_count, 38400);  // 300 s at 128 Hz
  }
  EXPECT_EQ(count(storage::JobState::kRunning), 1);
  // After a restart every job finishes, the interrupted one included.
  StartServe(2);
  std::vector<std::int64_t> jobs;
  for (const auto& s : sent) jobs.push_back(s.job);
  ASSERT_TRUE(WaitForJobs(jobs, 300s));
  int rerun = 0;
  for (const auto& s : sent) {
    const json j = json::parse(Client().Get("/v1/jobs/" + std::to_string(s.job))->body);
    EXPECT_EQ(j["state"], "done") << j.dump();
    rerun += j["attempts"].get<int>() > 1;
  }
  EXPECT_GE(rerun, 1) << "the job running at the kill must have been claimed again";
}

// A hanger whose force follows a +-15 C daily temperature cycle and drops
// by 10 % after day 20: the drift rules (estimation/drift.h) raise an alert
// within 3 estimates of the loss and none before; the webhook receiver
// gets it, signed with HMAC-SHA256 of the body (RFC 2104).
TEST_P(ServiceTest, ForceLossRaisesAnAlertWithinThreeEstimatesAndTheWebhookGetsIt) {
  // Webhook receiver on loopback.
  httplib::Server receiver;
  std::mutex mu;
  std::vector<std::pair<std::string, std::string>> received;  // body, signature
  receiver.Post("/hook", [&](const httplib::Request& req, httplib::Response& res) {
    std::lock_guard<std::mutex> lock(mu);
    received.emplace_back(req.body, req.get_header_value("X-Taut-Signature"));
    res.status = 204;
  });
  const int hook_port = receiver.bind_to_any_port("127.0.0.1");
  ASSERT_GT(hook_port, 0);
  std::thread hook_thread([&] { receiver.listen_after_bind(); });

  StartServe(1);  // one worker: drift checks see the estimates in time order
  const auto member = CreateHanger();
  const std::string secret = "oskerton-test-secret";
  auto w = Client().Post(
      "/v1/webhooks",
      json{{"url", "http://127.0.0.1:" + std::to_string(hook_port) + "/hook"}, {"secret", secret}}.dump(),
      "application/json");
  ASSERT_TRUE(w && w->status == 201) << (w ? w->body : "");

  // One record every 10 h for 30 days (72 records; the phase of the daily
  // cycle moves by 10 h each time, so the baseline of the first 10 spans the
  // cycle). N = N0 (1 - 0.1 [day >= 20]) - k_T (T - 10 C), k_T = 800 N/K: a
  // partly restrained hanger (invented scenario values).
  constexpr double kN0 = 90000, kPerKelvin = 800;
  const std::int64_t start_ms = (20777LL - 30) * 86400 * 1000;  // 2026-10-21T00:00:00Z
  std::vector<std::int64_t> jobs;
  std::size_t first_loss = 0;
  for (std::size_t i = 0; i < 72; ++i) {
    const double t_h = 10.0 * static_cast<double>(i);
    const double temp = 10 + 15 * std::sin(2 * std::numbers::pi * t_h / 24);
    const bool lost = t_h >= 20 * 24;
    if (lost && first_loss == 0) first_loss = i;
    const double n = kN0 * (lost ? 0.9 : 1.0) - kPerKelvin * (temp - 10);
    const std::int64_t at = start_ms + static_cast<std::int64_t>(t_h * 3600 * 1000);
    jobs.push_back(Upload(member, HangerCsv(hanger_, n, FormatIsoUtc(at), temp, 100 + i))["job_id"]);
  }
  ASSERT_TRUE(WaitForJobs(jobs, 900s));
  auto c = Client();
  const std::string m = std::to_string(member);
  const json history = json::parse(
      c.Get("/v1/members/" + m + "/force/history?from=2026-10-01T00:00:00Z&to=2026-12-01T00:00:00Z")->body);
  ASSERT_EQ(history["points"].size(), 72u);
  std::map<std::int64_t, std::size_t> index_of;  // estimate id -> time index
  for (std::size_t i = 0; i < 72; ++i) index_of[history["points"][i]["estimate_id"]] = i;

  // Drift checks run right after each estimate; wait (bounded) for the last.
  json alerts;
  for (int k = 0; k < 200; ++k) {
    alerts = json::parse(c.Get("/v1/alerts?member_id=" + m)->body)["alerts"];
    if (!alerts.empty()) break;
    std::this_thread::sleep_for(50ms);
  }
  ASSERT_FALSE(alerts.empty()) << "no alert after a 10 % force loss";
  std::size_t first_alert = 72;
  for (const auto& a : alerts) {
    const std::size_t i = index_of.at(a["estimate_id"].get<std::int64_t>());
    EXPECT_GE(i, first_loss) << "false alarm before the loss: " << a.dump();
    first_alert = std::min(first_alert, i);
  }
  EXPECT_LE(first_alert, first_loss + 2)
      << "first alert " << first_alert - first_loss + 1 << " estimates after the loss";
  std::printf("[ measured ] first alert at estimate %zu of the loss (rule %s); %zu alerts\n",
              first_alert - first_loss + 1, alerts[0]["rule"].get<std::string>().c_str(), alerts.size());

  // The webhook: every delivery is signed; the first alert arrives.
  bool delivered = false;
  for (int k = 0; k < 200 && !delivered; ++k) {
    {
      std::lock_guard<std::mutex> lock(mu);
      delivered = !received.empty();
    }
    if (!delivered) std::this_thread::sleep_for(50ms);
  }
  receiver.stop();
  hook_thread.join();
  ASSERT_TRUE(delivered);
  for (const auto& [body, signature] : received) {
    EXPECT_EQ(signature, "sha256=" + HmacSha256Hex(secret, body));
    const json a = json::parse(body);
    EXPECT_EQ(a["member_id"].get<std::int64_t>(), member);
    EXPECT_FALSE(a["message"].get<std::string>().empty());
  }
  const auto first_id = alerts[0]["id"].get<std::int64_t>();
  const json deliveries = json::parse(c.Get("/v1/alerts/" + std::to_string(first_id) + "/deliveries")->body);
  ASSERT_FALSE(deliveries["deliveries"].empty());
  EXPECT_TRUE(deliveries["deliveries"][0]["succeeded"].get<bool>());
}

// SIGTERM while a job runs: the service finishes the running job (or
// leaves it queued) and exits 0; no job is left "running" in the file.
TEST_P(ServiceTest, SigtermFinishesRunningJobsAndExitsCleanly) {
  StartServe(1);
  const auto member = CreateHanger();
  std::vector<std::string> csvs;  // made first, so that the uploads come quickly
  for (unsigned i = 0; i < 4; ++i) {
    csvs.push_back(
        HangerCsv(hanger_, 90000, "2026-11-1" + std::to_string(i) + "T06:00:00Z", 8, 60 + i, 300.0));
  }
  std::vector<std::int64_t> jobs;
  for (const auto& csv : csvs) jobs.push_back(Upload(member, csv)["job_id"]);
  auto c = Client();
  bool running = false;
  for (int k = 0; k < 400 && !running; ++k) {
    for (std::int64_t id : jobs)
      running |= json::parse(c.Get("/v1/jobs/" + std::to_string(id))->body)["state"] == "running";
    if (!running) std::this_thread::sleep_for(5ms);
  }
  ASSERT_TRUE(running);
  const int status = serve_.Kill(SIGTERM);
  ASSERT_TRUE(WIFEXITED(status)) << "killed by a signal instead of stopping";
  EXPECT_EQ(WEXITSTATUS(status), 0);
  storage::Database db;
  ASSERT_TRUE(db.Open(db_).ok());
  storage::Repository repo(db);
  storage::Organisation org;
  ASSERT_TRUE(repo.FindOrganisationByName("Oskerton bridge works", &org).ok());
  int done = 0;
  for (std::int64_t id : jobs) {
    storage::Job job;
    ASSERT_TRUE(repo.GetJob(org.id, id, &job).ok());
    EXPECT_NE(job.state, storage::JobState::kRunning) << "job " << id;
    done += job.state == storage::JobState::kDone;
  }
  EXPECT_GE(done, 1) << "the job running at SIGTERM must have finished";
}

// Webhook delivery with retries: a receiver that answers 500 twice, then
// 204, gets three attempts; the log (GET /v1/alerts/{id}/deliveries) has
// all three, the first two with their HTTP status and a next attempt at
// least the back-off later (first_backoff * 2^(attempt-1), worker.h).
// Issue 13 item 5: an identification past the job time limit fails with
// that reason (a limit of 0 s: the first progress point is already late).
TEST(Jobs, AnIdentificationPastTheTimeLimitFailsWithThatReason) {
  const auto dir = std::filesystem::temp_directory_path() / ("taut-timelimit-" + std::to_string(::getpid()));
  std::filesystem::remove_all(dir);
  std::filesystem::create_directories(dir);
  storage::Database db;
  ASSERT_TRUE(storage::OpenAndMigrate(db, (dir / "t.db").string()).ok());
  storage::Repository repo(db);
  const Hanger hanger;
  storage::Id org = 0, structure = 0, member = 0;
  ASSERT_TRUE(repo.CreateOrganisation("Timing works", 1, &org).ok());
  ASSERT_TRUE(repo.CreateStructure(org, "Footbridge", "", 1, &structure).ok());
  ASSERT_TRUE(repo.CreateMember(org, structure, hanger.member.id, hanger.text, 1, &member).ok());
  const std::string csv = HangerCsv(hanger, 90000, "2026-11-20T06:00:00Z", 8, 3, 30.0);
  estimation::Record record;
  std::istringstream in(csv);
  ASSERT_TRUE(estimation::ParseRecordCsv(in, {}, &record).ok());
  storage::NewRecord nr;
  nr.member_id = member;
  nr.recorded_at_unix_ms = 1;
  nr.sample_rate_hz = record.sample_rate_hz;
  nr.channels = record.channels;
  for (Eigen::Index i = 0; i < record.samples.rows(); ++i) {
    for (Eigen::Index j = 0; j < record.samples.cols(); ++j) nr.samples.push_back(record.samples(i, j));
  }
  nr.content_sha256 = Sha256Hex(csv);
  nr.samples_sha256 = Sha256Hex(storage::EncodeSamples(nr.samples));
  storage::RecordInsertResult inserted;
  ASSERT_TRUE(repo.InsertRecord(org, nr, 2, &inserted).ok());
  storage::Job job;
  bool claimed = false;
  ASSERT_TRUE(repo.ClaimNextJob(3, &job, &claimed).ok());
  ASSERT_TRUE(claimed);
  storage::Id estimate = 0, member_id = 0;
  const std::string reason = RunIdentification(repo, job, &estimate, &member_id, std::chrono::seconds(0));
  EXPECT_NE(reason.find("job time limit of 0 s"), std::string::npos) << reason;
  // With time to spare the same job identifies (the limit is the only cause).
  EXPECT_EQ(RunIdentification(repo, job, &estimate, &member_id, std::chrono::seconds(300)), "");
  std::filesystem::remove_all(dir);
}

TEST(Webhooks, FailedDeliveriesAreRetriedWithBackOffAndLogged) {
  const auto dir = std::filesystem::temp_directory_path() / ("taut-webhooks-" + std::to_string(::getpid()));
  std::filesystem::remove_all(dir);
  std::filesystem::create_directories(dir);
  const std::string db_path = (dir / "taut.db").string();
  storage::Database db;
  ASSERT_TRUE(storage::OpenAndMigrate(db, db_path).ok());
  storage::Repository repo(db);
  storage::Id org = 0, structure = 0, member = 0, hook = 0, alert = 0;
  const std::int64_t now = NowUnixMs();
  ASSERT_TRUE(repo.CreateOrganisation("Retry works", now, &org).ok());
  ASSERT_TRUE(repo.CreateStructure(org, "Test footbridge", "", now, &structure).ok());
  ASSERT_TRUE(repo.CreateMember(org, structure, "h1", Hanger().text, now, &member).ok());

  httplib::Server receiver;
  std::atomic<int> calls{0};
  receiver.Post("/hook", [&](const httplib::Request&, httplib::Response& res) {
    res.status = ++calls <= 2 ? 500 : 204;
  });
  const int port = receiver.bind_to_any_port("127.0.0.1");
  ASSERT_GT(port, 0);
  std::thread t([&] { receiver.listen_after_bind(); });
  ASSERT_TRUE(
      repo.CreateWebhook(org, "http://127.0.0.1:" + std::to_string(port) + "/hook", "s3cret", now, &hook)
          .ok());
  storage::NewAlert a;
  a.member_id = member;
  a.rule = "force-residual";
  a.message = "test alert";
  a.evidence = "{}";
  ASSERT_TRUE(repo.RaiseAlert(org, a, now + 1, &alert).ok());

  WorkerOptions wo;
  wo.db_path = db_path;
  wo.workers = 1;
  wo.poll_interval = 20ms;
  wo.webhook_first_backoff = 100ms;
  Cidr loopback;  // the receivers below listen on loopback (webhook_policy.h)
  ASSERT_TRUE(ParseCidr("127.0.0.0/8", &loopback));
  wo.webhook_policy.allow.push_back(loopback);
  WorkerPool pool(wo, nullptr);
  ASSERT_TRUE(pool.Start().ok());
  std::vector<storage::DeliveryAttempt> log;
  for (int k = 0; k < 300; ++k) {
    ASSERT_TRUE(repo.ListDeliveries(org, alert, &log).ok());
    if (!log.empty() && log.back().succeeded) break;
    std::this_thread::sleep_for(10ms);
  }
  pool.Stop();
  receiver.stop();
  t.join();
  ASSERT_EQ(log.size(), 3u);
  for (int i = 0; i < 2; ++i) {
    EXPECT_FALSE(log[i].succeeded);
    ASSERT_TRUE(log[i].http_status.has_value());
    EXPECT_EQ(*log[i].http_status, 500);
    ASSERT_TRUE(log[i].next_attempt_at_unix_ms.has_value());
    EXPECT_GE(*log[i].next_attempt_at_unix_ms - log[i].attempted_at_unix_ms, 100 << i) << "attempt " << i + 1;
    EXPECT_GE(log[i + 1].attempted_at_unix_ms, *log[i].next_attempt_at_unix_ms);
  }
  EXPECT_TRUE(log[2].succeeded);
  EXPECT_EQ(log[2].attempt, 3);
  EXPECT_EQ(calls.load(), 3);
  std::filesystem::remove_all(dir);
}

// `taut demo` (the README's first command) on a short run: every record
// it uploads is identified (no failed job) and the output ends with the
// standing notice.
TEST(Demo, RunsTheWholeJobOnItsInventedPortfolio) {
  const std::string cmd = std::string(TAUT_BINARY_PATH) + " demo --days 1 --record-length 30 2>&1";
  std::FILE* p = popen(cmd.c_str(), "r");
  ASSERT_NE(p, nullptr);
  std::string output;
  char buf[512];
  while (std::fgets(buf, sizeof buf, p)) output += buf;
  const int status = pclose(p);
  ASSERT_TRUE(WIFEXITED(status) && WEXITSTATUS(status) == 0) << output;
  // 1 day x 2 records x 10 members (cli_demo.cpp's portfolio).
  EXPECT_NE(output.find("20 estimates, 0 failed jobs"), std::string::npos) << output;
  EXPECT_NE(output.find("licensed structural engineer"), std::string::npos) << output;
}

}  // namespace
}  // namespace taut::server
