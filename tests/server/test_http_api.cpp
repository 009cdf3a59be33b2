// The v1 HTTP API (docs/API.md) against a real server on loopback and a real
// SQLite file: routing, authentication, organisation scoping, roles, record
// uploads (CSV and JSON, idempotency, concurrency), the error contract and
// the read side. Fixture in the manner of cpp-httplib's test/test.cc: an
// ephemeral port, the server ready when Start returns (the socket listens),
// stopped and joined in TearDown.
//
// The job workers are not started here (test_service.cpp runs the whole
// chain); estimates for the read-side tests are stored through the worker's
// own repository calls (ClaimNextJob + CompleteJobWithEstimate).
#include <gtest/gtest.h>

#include <atomic>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <functional>
#include <nlohmann/json.hpp>
#include <set>
#include <sstream>
#include <thread>

#include "model/modal.h"
#include "raw_http.h"
#include "server/auth.h"
#include "server/hashing.h"
#include "server/http_api.h"
#include "server/iso_time.h"
#include "server/member_json.h"
#include "server/webhook_policy.h"
#include "storage/migrations.h"
#include "storage/repository.h"
#include "synthetic_record.h"
#include "tests/storage/backend_fixture.h"

// After Eigen (synthetic_record.h): <resolv.h> defines _res.
#include <httplib.h>

namespace taut::server {
namespace {

using nlohmann::json;

std::string ReadFile(const std::string& path) {
  std::ifstream in(path);
  std::stringstream ss;
  ss << in.rdbuf();
  return ss.str();
}

// A short ambient record of the example tie (modal superposition of the
// model, tests/server/synthetic_record.h); `seed` makes distinct records.
std::string SyntheticCsv(const std::string& dir, unsigned seed, double duration_s = 20.0) {
  model::Member member;
  EXPECT_TRUE(LoadMemberFile(std::string(TAUT_EXAMPLES_DIR) + "/maltings-east-tie-2.json", &member).ok());
  model::ModalParameters truth;
  truth.axial_force_n = 30000;
  truth.bending_stiffness_nm2 = member.NominalBendingStiffness_nm2(model::Direction::kVertical);
  truth.fixity_left = truth.fixity_right = 0.5;
  taut::testing::RecordSpec spec;
  spec.duration_s = duration_s;
  spec.sample_rate_hz = 256;
  spec.modes = 3;
  spec.seed = seed;
  const std::string path = dir + "/record-" + std::to_string(seed) + ".csv";
  EXPECT_TRUE(taut::testing::WriteSyntheticRecord(path, member, model::Direction::kVertical, truth, spec));
  return ReadFile(path);
}

// Every test runs on both storage backends (tests/storage/backend_fixture.h):
// the service on an SQLite file and on a PostgreSQL database.
class HttpApiTest : public ::testing::TestWithParam<storage::testing::Backend> {
 protected:
  void SetUp() override {
    dir_ = std::filesystem::temp_directory_path() /
           ("taut-http-" + std::to_string(::getpid()) + "-" +
            ::testing::UnitTest::GetInstance()->current_test_info()->name());
    std::filesystem::remove_all(dir_);
    std::filesystem::create_directories(dir_);
    db_path_ = GetParam() == storage::testing::Backend::kSqlite ? (dir_ / "taut.db").string()
                                                                : storage::testing::FreshPostgresDatabase();
    ASSERT_FALSE(db_path_.empty());
    StartServer(64u << 20);
    storage::Database db;
    ASSERT_TRUE(storage::OpenAndMigrate(db, db_path_).ok());
    storage::Repository repo(db);
    const std::int64_t now = NowUnixMs();
    ASSERT_TRUE(repo.CreateOrganisation("org-a", now, &org_a_).ok());
    ASSERT_TRUE(repo.CreateOrganisation("org-b", now, &org_b_).ok());
    ASSERT_TRUE(IssueToken(repo, org_a_, storage::Role::kAdmin, "a admin", now, &admin_a_).ok());
    ASSERT_TRUE(IssueToken(repo, org_a_, storage::Role::kUpload, "a gateway", now, &upload_a_).ok());
    ASSERT_TRUE(IssueToken(repo, org_a_, storage::Role::kRead, "a viewer", now, &read_a_).ok());
    ASSERT_TRUE(IssueToken(repo, org_b_, storage::Role::kAdmin, "b admin", now, &admin_b_).ok());
    member_text_ = ReadFile(std::string(TAUT_EXAMPLES_DIR) + "/maltings-east-tie-2.json");
  }
  void TearDown() override {
    server_.reset();
    std::filesystem::remove_all(dir_);
  }

  void StartServer(std::size_t max_body, const std::function<void(ServeOptions&)>& configure = {}) {
    server_.reset();
    ServeOptions o;
    o.db_path = db_path_;
    o.max_body_bytes = max_body;
    o.on_job_queued = [this] { ++queued_; };
    if (configure) configure(o);
    server_ = std::make_unique<ApiServer>(o);
    ASSERT_TRUE(server_->Start().ok());
  }

  httplib::Client Client(const std::string& token) const {
    httplib::Client c("127.0.0.1", server_->port());
    if (!token.empty()) c.set_default_headers({{"Authorization", "Bearer " + token}});
    c.set_read_timeout(30, 0);
    return c;
  }

  // Structure + the example member in org A; returns the member id.
  std::int64_t CreateMember() {
    auto c = Client(admin_a_);
    auto s = c.Post("/v1/structures", R"({"name": "Old maltings hall"})", "application/json");
    EXPECT_TRUE(s) << httplib::to_string(s.error());
    EXPECT_EQ(s->status, 201) << s->body;
    structure_id_ = json::parse(s->body)["id"].get<std::int64_t>();
    auto m = c.Post("/v1/structures/" + std::to_string(structure_id_) + "/members", member_text_,
                    "application/json");
    EXPECT_EQ(m->status, 201) << m->body;
    return json::parse(m->body)["id"].get<std::int64_t>();
  }

  std::filesystem::path dir_;
  std::string db_path_;
  std::unique_ptr<ApiServer> server_;
  std::atomic<int> queued_{0};
  storage::Id org_a_ = 0, org_b_ = 0;
  std::string admin_a_, upload_a_, read_a_, admin_b_;
  std::string member_text_;
  std::int64_t structure_id_ = 0;
};
TAUT_BOTH_BACKENDS(HttpApiTest);

TEST_P(HttpApiTest, HealthNeedsNoTokenAndReportsTheSchema) {
  auto r = Client("").Get("/v1/health");
  ASSERT_TRUE(r);
  EXPECT_EQ(r->status, 200);
  const json j = json::parse(r->body);
  EXPECT_EQ(j["status"], "ok");
  EXPECT_EQ(j["schema_version"].get<int>(), storage::LatestSchemaVersion());
}

TEST_P(HttpApiTest, MissingMalformedOrWrongTokensAre401WithTheErrorBody) {
  auto none = Client("").Get("/v1/structures");
  EXPECT_EQ(none->status, 401);
  EXPECT_EQ(json::parse(none->body)["error"]["code"], "unauthorized");
  EXPECT_EQ(Client("not-a-token").Get("/v1/structures")->status, 401);
  // Right shape, wrong secret (last hex digit changed).
  std::string forged = admin_a_;
  forged.back() = forged.back() == '0' ? '1' : '0';
  EXPECT_EQ(Client(forged).Get("/v1/structures")->status, 401);
  EXPECT_EQ(Client(admin_a_).Get("/v1/structures")->status, 200);
}

TEST_P(HttpApiTest, RolesAreEnforcedReadBelowUploadBelowAdmin) {
  const auto member = CreateMember();
  const std::string csv = SyntheticCsv(dir_.string(), 1);
  const std::string path = "/v1/members/" + std::to_string(member) + "/records";
  auto denied = Client(read_a_).Post(path, csv, "text/csv");
  EXPECT_EQ(denied->status, 403);
  EXPECT_EQ(json::parse(denied->body)["error"]["code"], "forbidden");
  EXPECT_EQ(Client(upload_a_).Post("/v1/structures", R"({"name": "x"})", "application/json")->status, 403);
  EXPECT_EQ(Client(upload_a_).Post(path, csv, "text/csv")->status, 202);
  EXPECT_EQ(Client(read_a_).Get("/v1/members/" + std::to_string(member))->status, 200);
}

TEST_P(HttpApiTest, AnotherOrganisationsIdsAre404NotForbidden) {
  const auto member = CreateMember();
  auto up = Client(upload_a_).Post("/v1/members/" + std::to_string(member) + "/records",
                                   SyntheticCsv(dir_.string(), 2), "text/csv");
  ASSERT_EQ(up->status, 202) << up->body;
  const json ids = json::parse(up->body);
  const std::string m = std::to_string(member), s = std::to_string(structure_id_),
                    rec = std::to_string(ids["record_id"].get<std::int64_t>()),
                    job = std::to_string(ids["job_id"].get<std::int64_t>());
  auto b = Client(admin_b_);
  for (const std::string& path :
       {"/v1/structures/" + s, "/v1/structures/" + s + "/members", "/v1/structures/" + s + "/portfolio",
        "/v1/members/" + m, "/v1/members/" + m + "/versions/1", "/v1/members/" + m + "/force",
        "/v1/members/" + m + "/force/history", "/v1/records/" + rec, "/v1/records/" + rec + "/csv",
        "/v1/jobs/" + job}) {
    auto r = b.Get(path);
    ASSERT_TRUE(r) << path;
    EXPECT_EQ(r->status, 404) << path << ": " << r->body;
    EXPECT_EQ(json::parse(r->body)["error"]["code"], "not-found") << path;
  }
  EXPECT_EQ(b.Post("/v1/members/" + m + "/records", SyntheticCsv(dir_.string(), 3), "text/csv")->status, 404);
  EXPECT_EQ(b.Delete("/v1/members/" + m)->status, 404);
  // And organisation B's list does not show A's structure.
  EXPECT_EQ(json::parse(b.Get("/v1/structures")->body)["structures"].size(), 0u);
}

TEST_P(HttpApiTest, UnknownRoutes404WrongMethods405WithAllow) {
  auto c = Client(admin_a_);
  EXPECT_EQ(c.Get("/v1/nothing-here")->status, 404);
  auto r = c.Put("/v1/structures", "{}", "application/json");
  EXPECT_EQ(r->status, 405);
  EXPECT_EQ(json::parse(r->body)["error"]["code"], "method-not-allowed");
  EXPECT_NE(r->get_header_value("Allow").find("POST"), std::string::npos);
  EXPECT_NE(r->get_header_value("Allow").find("GET"), std::string::npos);
}

TEST_P(HttpApiTest, OversizedBodiesAre413) {
  StartServer(1u << 20);  // 1 MiB
  const auto member = CreateMember();
  const std::string big(2u << 20, 'x');
  auto r = Client(upload_a_).Post("/v1/members/" + std::to_string(member) + "/records", big, "text/csv");
  ASSERT_TRUE(r);
  EXPECT_EQ(r->status, 413);
  EXPECT_EQ(json::parse(r->body)["error"]["code"], "payload-too-large");
}

TEST_P(HttpApiTest, MembersAreVersionedAndSoftDeleted) {
  const auto member = CreateMember();
  const std::string path = "/v1/members/" + std::to_string(member);
  auto c = Client(admin_a_);
  json edited = json::parse(member_text_);
  edited["design_axial_force_n"] = 38000;
  auto put = c.Put(path, edited.dump(), "application/json");
  ASSERT_EQ(put->status, 200) << put->body;
  EXPECT_EQ(json::parse(put->body)["version"], 2);
  EXPECT_EQ(json::parse(c.Get(path + "/versions/1")->body)["description"]["design_axial_force_n"], 35000);
  EXPECT_EQ(json::parse(c.Get(path)->body)["description"]["design_axial_force_n"], 38000);
  // A description that breaks a docs/FORMATS.md rule: 422 naming the JSON path.
  edited["sensors"][0]["position_m"] = 9.0;
  auto bad = c.Put(path, edited.dump(), "application/json");
  EXPECT_EQ(bad->status, 422);
  EXPECT_NE(json::parse(bad->body)["error"]["message"].get<std::string>().find("$.sensors[0].position_m"),
            std::string::npos)
      << bad->body;
  EXPECT_EQ(c.Delete(path)->status, 204);
  EXPECT_EQ(c.Get(path)->status, 404);
  EXPECT_EQ(c.Get(path + "/versions/2")->status, 200);  // history stays readable
}

TEST_P(HttpApiTest, SuppliedModesAreIdentifiedSynchronouslyAndNotStored) {
  // Issue 17, docs/API.md "Modes measured elsewhere": the example tie's
  // modes 1-3 at 35 kN with fixities 0.5 from the forward model on a fine
  // mesh (the route's plumbing is under test here; the estimation against
  // published frequencies is test_cli_identify and test_tolerance_budget),
  // supplied with 0.2 % stds: the force comes back inside its interval.
  const std::int64_t member_id = CreateMember();
  model::Member member;
  ASSERT_TRUE(ParseMember(member_text_, &member).ok());
  model::ModalParameters truth;
  truth.axial_force_n = 35e3;
  truth.fixity_left = truth.fixity_right = 0.5;
  model::ModalResult r;
  ASSERT_TRUE(model::ComputeModes(member, model::Direction::kVertical, truth, 3, &r, {160}).ok());
  json body = {{"source", "hand-held analyser"}, {"modes", json::array()}};
  for (const auto& m : r.modes) {
    json shape;
    for (size_t c = 0; c < r.channels.size(); ++c) shape[r.channels[c]] = m.shape_at_sensors[c];
    body["modes"].push_back(
        {{"frequency_hz", m.frequency_hz}, {"frequency_std_hz", 2e-3 * m.frequency_hz}, {"shape", shape}});
  }
  const std::string path = "/v1/members/" + std::to_string(member_id) + "/modes";
  EXPECT_EQ(Client(read_a_).Post(path, body.dump(), "application/json")->status, 403);
  auto res = Client(upload_a_).Post(path, body.dump(), "application/json");
  ASSERT_EQ(res->status, 200) << res->body;
  const json j = json::parse(res->body);
  EXPECT_FALSE(j["stored"].get<bool>());
  EXPECT_EQ(j["cautions"][0]["code"], "modes-supplied");
  EXPECT_LE(j["axial_force_n"]["ci95"][0].get<double>(), 35e3);
  EXPECT_GE(j["axial_force_n"]["ci95"][1].get<double>(), 35e3);
  EXPECT_TRUE(j.contains("uncertainty_budget"));
  // Not stored: the member still has no estimate.
  EXPECT_EQ(Client(read_a_).Get("/v1/members/" + std::to_string(member_id) + "/force")->status, 404);
  // A body that breaks the format: 422 naming the path.
  body["modes"][1].erase("frequency_std_hz");
  res = Client(upload_a_).Post(path, body.dump(), "application/json");
  EXPECT_EQ(res->status, 422);
  EXPECT_NE(res->body.find("$.modes[1].frequency_std_hz"), std::string::npos) << res->body;
}

TEST_P(HttpApiTest, UploadIsIdempotentAndTheStoredSamplesRoundTrip) {
  const auto member = CreateMember();
  const std::string path = "/v1/members/" + std::to_string(member) + "/records";
  const std::string csv = SyntheticCsv(dir_.string(), 4);
  auto c = Client(upload_a_);
  auto first = c.Post(path, {{"Idempotency-Key", "gw7-0001"}}, csv, "text/csv");
  ASSERT_EQ(first->status, 202) << first->body;
  EXPECT_EQ(queued_.load(), 1);
  const json a = json::parse(first->body);
  EXPECT_FALSE(a["duplicate"].get<bool>());
  // Same content again (no key): the original ids, no second job.
  auto again = c.Post(path, csv, "text/csv");
  ASSERT_EQ(again->status, 200);
  const json b = json::parse(again->body);
  EXPECT_TRUE(b["duplicate"].get<bool>());
  EXPECT_EQ(a["record_id"], b["record_id"]);
  EXPECT_EQ(a["job_id"], b["job_id"]);
  EXPECT_EQ(queued_.load(), 1);
  // The same key with other content is a client bug: 409.
  auto reused = c.Post(path, {{"Idempotency-Key", "gw7-0001"}}, SyntheticCsv(dir_.string(), 5), "text/csv");
  EXPECT_EQ(reused->status, 409) << reused->body;

  // Download: the samples come back within binary32 precision (relative
  // 2^-24 = 6e-8, IEEE 754; the CSV has 7 significant digits, so compare
  // with the CSV's own rounding, 5e-7 relative).
  const std::string rec = std::to_string(a["record_id"].get<std::int64_t>());
  auto meta = Client(read_a_).Get("/v1/records/" + rec);
  const json m = json::parse(meta->body);
  EXPECT_EQ(m["sample_count"], 20 * 256);
  EXPECT_EQ(m["recorded_at"], "2026-11-20T10:00:00Z");
  EXPECT_DOUBLE_EQ(m["temperature_c"].get<double>(), 12.5);
  EXPECT_EQ(m["content_sha256"], Sha256Hex(csv));
  auto down = Client(read_a_).Get("/v1/records/" + rec + "/csv");
  ASSERT_EQ(down->status, 200);
  std::istringstream orig(csv), back(down->body);
  std::string lo, lb;
  auto skip_meta = [](std::istringstream& in, std::string& line) {
    while (std::getline(in, line) && line.rfind("#", 0) == 0) {
    }
  };
  skip_meta(orig, lo);
  skip_meta(back, lb);
  EXPECT_EQ(lo, lb);  // header
  int rows = 0;
  double worst = 0;
  while (std::getline(orig, lo) && std::getline(back, lb)) {
    std::istringstream so(lo), sb(lb);
    std::string co, cb;
    std::getline(so, co, ',');
    std::getline(sb, cb, ',');
    EXPECT_NEAR(std::stod(co), std::stod(cb), 1e-6);
    while (std::getline(so, co, ',') && std::getline(sb, cb, ',')) {
      const double x = std::stod(co), y = std::stod(cb);
      worst = std::max(worst, std::abs(x - y) / std::max(std::abs(x), 1e-30));
    }
    ++rows;
  }
  EXPECT_EQ(rows, 20 * 256);
  EXPECT_LT(worst, 1e-6);
}

TEST_P(HttpApiTest, EveryReaderErrorIsA4xxWithItsMessage) {
  const auto member = CreateMember();
  const std::string path = "/v1/members/" + std::to_string(member) + "/records";
  auto c = Client(upload_a_);
  std::string csv = SyntheticCsv(dir_.string(), 6);
  // A non-finite cell on data line 3 (file line 7: 3 metadata lines + header).
  std::string broken = csv;
  std::size_t pos = 0;
  for (int i = 0; i < 6; ++i) pos = broken.find('\n', pos) + 1;
  const std::size_t comma = broken.find(',', pos);
  broken.replace(comma + 1, broken.find(',', comma + 1) - comma - 1, "nan");
  auto r = c.Post(path, broken, "text/csv");
  EXPECT_EQ(r->status, 400);
  EXPECT_NE(json::parse(r->body)["error"]["message"].get<std::string>().find("line 7"), std::string::npos)
      << r->body;
  // A channel that is not a sensor of the member.
  std::string renamed = csv;
  renamed.replace(renamed.find(",v2"), 3, ",v9");
  r = c.Post(path, renamed, "text/csv");
  EXPECT_EQ(r->status, 422);  // a rule, not a malformed file (docs/API.md)
  EXPECT_NE(r->body.find("v9"), std::string::npos) << r->body;
  // Too short (docs/FORMATS.md: at least 10 s): a rule, 422 (docs/API.md).
  r = c.Post(path, SyntheticCsv(dir_.string(), 7, 5.0), "text/csv");
  EXPECT_EQ(r->status, 422);
  EXPECT_NE(r->body.find("10"), std::string::npos) << r->body;
  // Garbage, an unsupported media type, a bad override.
  EXPECT_EQ(c.Post(path, "hello", "text/csv")->status, 400);
  EXPECT_EQ(c.Post(path, csv, "image/png")->status, 415);
  EXPECT_EQ(c.Post(path + "?recorded_at=yesterday", csv, "text/csv")->status, 422);
  EXPECT_EQ(queued_.load(), 0);
}

TEST_P(HttpApiTest, JsonUploadsFollowTheSameRules) {
  const auto member = CreateMember();
  const std::string path = "/v1/members/" + std::to_string(member) + "/records";
  json body = {{"recorded_at", "2026-11-21T08:00:00Z"},
               {"temperature_c", 4.0},
               {"sample_rate_hz", 128.0},
               {"channels", {"v1", "v2"}}};
  json rows = json::array();
  for (int i = 0; i < 128 * 12; ++i) rows.push_back({std::sin(0.3 * i), std::cos(0.17 * i)});
  body["samples"] = rows;
  auto c = Client(upload_a_);
  auto r = c.Post(path, body.dump(), "application/json");
  ASSERT_EQ(r->status, 202) << r->body;
  body["channels"] = {"v1", "x7"};
  r = c.Post(path, body.dump(), "application/json");
  EXPECT_EQ(r->status, 422);
  EXPECT_NE(r->body.find("$.channels[1]"), std::string::npos) << r->body;
  body["channels"] = {"v1", "v2"};
  body["samples"][5] = {1.0};
  r = c.Post(path, body.dump(), "application/json");
  EXPECT_EQ(r->status, 422);
  EXPECT_NE(r->body.find("$.samples[5]"), std::string::npos) << r->body;
}

TEST_P(HttpApiTest, ConcurrentUploadsLoseNothingAndDuplicateNothing) {
  const auto member = CreateMember();
  const std::string path = "/v1/members/" + std::to_string(member) + "/records";
  // 8 threads x 3 distinct records, each sent twice (a gateway retry).
  std::vector<std::string> csv;
  for (unsigned i = 0; i < 24; ++i) csv.push_back(SyntheticCsv(dir_.string(), 100 + i, 12.0));
  std::vector<std::thread> threads;
  std::mutex mu;
  std::vector<int> statuses;
  std::set<std::int64_t> record_ids;
  for (int t = 0; t < 8; ++t) {
    threads.emplace_back([&, t] {
      auto c = Client(upload_a_);
      for (int k = 0; k < 6; ++k) {
        const auto& body = csv[static_cast<std::size_t>(t * 3 + k / 2)];
        auto r = c.Post(path, body, "text/csv");
        std::lock_guard<std::mutex> lock(mu);
        statuses.push_back(r ? r->status : -1);
        if (r && (r->status == 202 || r->status == 200)) {
          record_ids.insert(json::parse(r->body)["record_id"].get<std::int64_t>());
        }
      }
    });
  }
  for (auto& t : threads) t.join();
  EXPECT_EQ(std::count(statuses.begin(), statuses.end(), 202), 24);  // one new record per body
  EXPECT_EQ(std::count(statuses.begin(), statuses.end(), 200), 24);  // the retries: duplicates
  EXPECT_EQ(record_ids.size(), 24u);
  EXPECT_EQ(queued_.load(), 24);
  auto metrics = Client("").Get("/metrics");
  EXPECT_NE(metrics->body.find("taut_jobs{state=\"queued\"} 24"), std::string::npos) << metrics->body;
}

// The read side: estimates stored by the worker's repository calls come
// back unchanged through force, history (ordered by record time, not by
// upload order), portfolio (force ratio = force / design force) and alerts.
TEST_P(HttpApiTest, ForceHistoryPortfolioAndAlerts) {
  const auto member = CreateMember();
  const std::string path = "/v1/members/" + std::to_string(member) + "/records";
  auto c = Client(upload_a_);
  // Uploaded out of time order: 22nd, 20th, 21st November.
  const std::vector<std::string> days = {"2026-11-22T06:00:00Z", "2026-11-20T06:00:00Z",
                                         "2026-11-21T06:00:00Z"};
  const std::vector<double> force = {31000, 29000, 30000};
  for (std::size_t i = 0; i < days.size(); ++i) {
    auto r = c.Post(path + "?recorded_at=" + days[i], SyntheticCsv(dir_.string(), 200 + i), "text/csv");
    ASSERT_EQ(r->status, 202) << r->body;
  }
  {
    storage::Database db;
    ASSERT_TRUE(db.Open(db_path_).ok());
    storage::Repository repo(db);
    for (std::size_t i = 0; i < days.size(); ++i) {
      storage::Job job;
      bool claimed = false;
      ASSERT_TRUE(repo.ClaimNextJob(NowUnixMs(), &job, &claimed).ok());
      ASSERT_TRUE(claimed);
      storage::NewEstimate e;
      e.record_id = job.record_id;
      e.axial_force_n = force[i];
      e.force_std_n = 400;
      e.force_ci95_low_n = force[i] - 800;
      e.force_ci95_high_n = force[i] + 800;
      e.result_json = json{{"axial_force_n", {{"value", force[i]}}}, {"cautions", json::array()}}.dump();
      storage::Id id = 0;
      ASSERT_TRUE(repo.CompleteJobWithEstimate(job.id, e, NowUnixMs(), &id).ok());
    }
    storage::NewAlert alert;
    alert.member_id = member;
    alert.rule = "force-residual";
    alert.message = "inspect the anchorages";
    alert.evidence = R"({"points": []})";
    storage::Id alert_id = 0;
    ASSERT_TRUE(repo.RaiseAlert(org_a_, alert, NowUnixMs(), &alert_id).ok());
  }
  auto r = Client(read_a_);
  const std::string m = std::to_string(member);
  const json latest = json::parse(r.Get("/v1/members/" + m + "/force")->body);
  EXPECT_EQ(latest["measured_at"], "2026-11-22T06:00:00Z");
  EXPECT_DOUBLE_EQ(latest["result"]["axial_force_n"]["value"].get<double>(), 31000);
  const json h = json::parse(
      r.Get("/v1/members/" + m + "/force/history?from=2026-11-01T00:00:00Z&to=2026-12-01T00:00:00Z")->body);
  ASSERT_EQ(h["points"].size(), 3u);
  EXPECT_EQ(h["points"][0]["measured_at"], "2026-11-20T06:00:00Z");
  EXPECT_EQ(h["points"][2]["measured_at"], "2026-11-22T06:00:00Z");
  EXPECT_DOUBLE_EQ(h["points"][0]["axial_force_n"].get<double>(), 29000);
  EXPECT_DOUBLE_EQ(h["points"][1]["ci95_n"][0].get<double>(), 29200);
  EXPECT_EQ(r.Get("/v1/members/" + m + "/force/history?from=last-week")->status, 400);
  const json p = json::parse(r.Get("/v1/structures/" + std::to_string(structure_id_) + "/portfolio")->body);
  ASSERT_EQ(p["members"].size(), 1u);
  // Force ratio N / N_design with the interval mapped through it:
  // 31000 / 35000 and [30200, 31800] / 35000 (design force of the example).
  const json& ratio = p["members"][0]["force_ratio"];
  EXPECT_NEAR(ratio["value"].get<double>(), 31000.0 / 35000.0, 1e-12);
  EXPECT_NEAR(ratio["ci95"][0].get<double>(), 30200.0 / 35000.0, 1e-12);
  EXPECT_NEAR(ratio["ci95"][1].get<double>(), 31800.0 / 35000.0, 1e-12);
  // 30-day change 31000 - 29000 N, std sqrt(400^2 + 400^2) = 565.685 N
  // (difference of independent estimates), interval +- 1.959964 std
  // (Abramowitz and Stegun 1964, table 26.1): [891.27, 3108.73] N.
  const json& change = p["members"][0]["change_30d"];
  EXPECT_NEAR(change["value_n"].get<double>(), 2000.0, 1e-9);
  EXPECT_NEAR(change["std_n"].get<double>(), 565.685, 1e-3);
  EXPECT_NEAR(change["ci95_n"][0].get<double>(), 891.27, 0.01);
  EXPECT_NEAR(change["ci95_n"][1].get<double>(), 3108.73, 0.01);
  EXPECT_FALSE(p["members"][0].contains("utilisation")) << "renamed: force_ratio";
  EXPECT_EQ(p["members"][0]["open_alerts"], 1);
  EXPECT_EQ(p["members"][0]["last_record_at"], "2026-11-22T06:00:00Z");
  // Alerts: list, a read token cannot acknowledge, an upload token can; a
  // second acknowledge is a state conflict.
  const json alerts = json::parse(r.Get("/v1/alerts?state=open")->body);
  ASSERT_EQ(alerts["alerts"].size(), 1u);
  const std::string a = std::to_string(alerts["alerts"][0]["id"].get<std::int64_t>());
  EXPECT_EQ(alerts["alerts"][0]["evidence"]["points"].size(), 0u);
  EXPECT_EQ(r.Post("/v1/alerts/" + a + "/acknowledge", "", "application/json")->status, 403);
  auto ack = c.Post("/v1/alerts/" + a + "/acknowledge", "", "application/json");
  ASSERT_EQ(ack->status, 200) << ack->body;
  EXPECT_EQ(json::parse(ack->body)["state"], "acknowledged");
  EXPECT_EQ(c.Post("/v1/alerts/" + a + "/acknowledge", "", "application/json")->status, 409);
  EXPECT_EQ(json::parse(c.Post("/v1/alerts/" + a + "/resolve", "", "application/json")->body)["state"],
            "resolved");
  EXPECT_EQ(Client(admin_b_).Get("/v1/alerts/" + a)->status, 404);
}

// Uploads a record of `member` at `recorded_at` and stores its estimate
// (force +- 800 N at 95 %, std 400 N) as the worker would, with `verdict`
// in the result ("" = none). Returns the estimate id.
storage::Id StoreEstimate(const std::string& db_path, httplib::Client& upload, std::int64_t member,
                          const std::string& recorded_at, double force, const std::string& verdict,
                          const std::string& csv) {
  auto r = upload.Post("/v1/members/" + std::to_string(member) + "/records?recorded_at=" + recorded_at, csv,
                       "text/csv");
  EXPECT_EQ(r->status, 202) << r->body;
  storage::Database db;
  EXPECT_TRUE(db.Open(db_path).ok());
  storage::Repository repo(db);
  storage::Job job;
  bool claimed = false;
  EXPECT_TRUE(repo.ClaimNextJob(NowUnixMs(), &job, &claimed).ok());
  EXPECT_TRUE(claimed);
  storage::NewEstimate e;
  e.record_id = job.record_id;
  e.axial_force_n = force;
  e.force_std_n = 400;
  e.force_ci95_low_n = force - 800;
  e.force_ci95_high_n = force + 800;
  e.bending_stiffness_nm2 = 9000;
  e.bending_stiffness_std_nm2 = 300;
  json result = {
      {"axial_force_n", {{"value", force}}},
      {"end_fixity", {{"left", {{"value", 0.4}, {"ci95", {0.3, 0.5}}}}, {"right", {{"value", 0.6}}}}},
      {"modes",
       json::array({{{"order", 1}, {"frequency_hz", 11.5}, {"model_frequency_hz", 11.49}, {"mac", 0.99}}})},
      {"cautions", json::array()}};
  if (!verdict.empty()) result["verdict"] = {{"code", verdict}, {"summary", "."}};
  e.result_json = result.dump();
  storage::Id id = 0;
  EXPECT_TRUE(repo.CompleteJobWithEstimate(job.id, e, NowUnixMs(), &id).ok());
  return id;
}

// RFC 4180 lines of a CSV body (CRLF), without the empty tail.
std::vector<std::string> CsvLines(const std::string& body) {
  std::vector<std::string> lines;
  std::size_t start = 0;
  for (std::size_t end; (end = body.find("\r\n", start)) != std::string::npos; start = end + 2) {
    lines.push_back(body.substr(start, end - start));
  }
  return lines;
}

TEST_P(HttpApiTest, CsvExportsCarryUnitsInTheColumnNamesAndFollowRfc4180) {
  const auto member = CreateMember();
  auto up = Client(upload_a_);
  const std::string m = std::to_string(member);
  StoreEstimate(db_path_, up, member, "2026-11-20T06:00:00Z", 29000, "", SyntheticCsv(dir_.string(), 301));
  const auto e2 = StoreEstimate(db_path_, up, member, "2026-11-21T06:00:00Z", 30000, "usable",
                                SyntheticCsv(dir_.string(), 302));
  auto r = Client(read_a_);
  auto h = r.Get("/v1/members/" + m +
                 "/force/history?from=2026-11-01T00:00:00Z&to=2026-12-01T00:00:00Z&format=csv");
  ASSERT_EQ(h->status, 200) << h->body;
  EXPECT_EQ(h->get_header_value("Content-Type").rfind("text/csv", 0), 0u);
  EXPECT_NE(h->get_header_value("Content-Disposition").find("attachment"), std::string::npos);
  std::vector<std::string> lines = CsvLines(h->body);
  ASSERT_EQ(lines.size(), 3u) << h->body;
  EXPECT_EQ(lines[0],
            "estimate_id,record_id,measured_at_utc,temperature_c,force_n,force_std_n,force_ci95_low_n,"
            "force_ci95_high_n,ei_nm2,ei_std_nm2,verdict");
  EXPECT_NE(lines[2].find(",2026-11-21T06:00:00Z,"), std::string::npos) << lines[2];
  EXPECT_NE(lines[2].find(",30000.0,400.0,29200.0,30800.0,9000.0,300.0,usable"), std::string::npos)
      << lines[2];
  // Without format=csv the JSON route answers as before.
  EXPECT_EQ(
      json::parse(r.Get("/v1/members/" + m + "/force/history?from=2026-11-01T00:00:00Z")->body)["points"]
          .size(),
      2u);
  // Portfolio and triage rows; member estimates with fixity; the modes of one estimate.
  lines = CsvLines(r.Get("/v1/structures/" + std::to_string(structure_id_) + "/portfolio?format=csv")->body);
  ASSERT_EQ(lines.size(), 2u);
  EXPECT_EQ(lines[0].rfind("structure,member_id,member,open_alerts,open_alerts_confident,open_alerts_watch,"
                           "measured_at_utc,force_n,",
                           0),
            0u)
      << lines[0];
  EXPECT_NE(lines[0].find("force_ratio,force_ratio_ci95_low,force_ratio_ci95_high,change_30d_n,"),
            std::string::npos);
  EXPECT_NE(lines[1].find("Old maltings hall," + m + ",maltings-east-tie-2,0,0,0,"), std::string::npos)
      << lines[1];
  lines = CsvLines(r.Get("/v1/members/" + m + "/estimates?from=2026-11-01T00:00:00Z&format=csv")->body);
  ASSERT_EQ(lines.size(), 3u);
  EXPECT_NE(lines[0].find("fixity_left,fixity_left_ci95_low,fixity_left_ci95_high,fixity_right"),
            std::string::npos);
  EXPECT_NE(lines[1].find(",0.4,0.3,0.5,0.6,,,"), std::string::npos) << lines[1];
  const json est = json::parse(r.Get("/v1/members/" + m + "/estimates?from=2026-11-01T00:00:00Z")->body);
  ASSERT_EQ(est["estimates"].size(), 2u);
  EXPECT_EQ(est["estimates"][1]["verdict"], "usable");
  EXPECT_TRUE(est["estimates"][0]["verdict"].is_null());
  lines = CsvLines(r.Get("/v1/estimates/" + std::to_string(e2) + "?format=csv")->body);
  ASSERT_EQ(lines.size(), 2u);
  EXPECT_EQ(lines[1], std::to_string(e2) + ",1,true,11.5,,11.49,0.99,");
  // Alerts, with the tier; a message with a comma and quotes is quoted
  // (RFC 4180 section 2 items 6 and 7).
  {
    storage::Database db;
    ASSERT_TRUE(db.Open(db_path_).ok());
    storage::Repository repo(db);
    storage::Id id = 0;
    ASSERT_TRUE(repo.RaiseAlert(org_a_,
                                {member, e2, "force-below-design-watch", R"(possibly "low", inspect)", "{}"},
                                NowUnixMs(), &id)
                    .ok());
  }
  lines = CsvLines(r.Get("/v1/alerts?format=csv&state=open")->body);
  ASSERT_EQ(lines.size(), 2u);
  EXPECT_EQ(lines[0],
            "alert_id,member_id,member,rule,tier,state,raised_at_utc,acknowledged_at_utc,resolved_at_utc,"
            "estimate_id,message");
  EXPECT_NE(lines[1].find(",maltings-east-tie-2,force-below-design-watch,watch,open,"), std::string::npos)
      << lines[1];
  EXPECT_NE(lines[1].find(R"(,"possibly ""low"", inspect")"), std::string::npos) << lines[1];
  // Scoping and roles as the JSON routes: another organisation gets 404 and
  // an empty list; no token, 401.
  auto b = Client(admin_b_);
  EXPECT_EQ(b.Get("/v1/members/" + m + "/force/history?format=csv")->status, 404);
  EXPECT_EQ(b.Get("/v1/members/" + m + "/estimates?format=csv")->status, 404);
  EXPECT_EQ(b.Get("/v1/estimates/" + std::to_string(e2) + "?format=csv")->status, 404);
  EXPECT_EQ(CsvLines(b.Get("/v1/alerts?format=csv")->body).size(), 1u);
  EXPECT_EQ(Client("").Get("/v1/alerts?format=csv")->status, 401);
}

TEST_P(HttpApiTest, TriageListsEveryMemberWorstFirstAndUnusableEstimatesGiveNoRatio) {
  const auto m1 = CreateMember();
  auto admin = Client(admin_a_);
  // A second structure with two members (the example description under other ids).
  auto s2 = admin.Post("/v1/structures", R"({"name": "Dock shed"})", "application/json");
  const auto st2 = json::parse(s2->body)["id"].get<std::int64_t>();
  std::vector<std::int64_t> ids = {m1};
  for (const char* name : {"dock-tie-1", "dock-tie-2"}) {
    json d = json::parse(member_text_);
    d["id"] = name;
    auto r = admin.Post("/v1/structures/" + std::to_string(st2) + "/members", d.dump(), "application/json");
    ASSERT_EQ(r->status, 201) << r->body;
    ids.push_back(json::parse(r->body)["id"].get<std::int64_t>());
  }
  auto up = Client(upload_a_);
  StoreEstimate(db_path_, up, ids[0], "2026-11-20T06:00:00Z", 30000, "", SyntheticCsv(dir_.string(), 401));
  StoreEstimate(db_path_, up, ids[1], "2026-11-20T06:00:00Z", 20000, "", SyntheticCsv(dir_.string(), 402));
  const auto e3 = StoreEstimate(db_path_, up, ids[2], "2026-11-20T06:00:00Z", 10000, "unusable",
                                SyntheticCsv(dir_.string(), 403));
  {
    storage::Database db;
    ASSERT_TRUE(db.Open(db_path_).ok());
    storage::Repository repo(db);
    storage::Id id = 0;
    ASSERT_TRUE(repo.RaiseAlert(org_a_, {ids[0], std::nullopt, "force-below-design-watch", "watch", "{}"},
                                NowUnixMs(), &id)
                    .ok());
  }
  auto r = Client(read_a_);
  const json t = json::parse(r.Get("/v1/triage")->body);
  ASSERT_EQ(t["members"].size(), 3u);
  // m1 has a watch alert: first. Then by the top of the ratio interval:
  // dock-tie-1 (20800 / 35000) before dock-tie-2, whose only estimate is
  // unusable and so has no ratio.
  EXPECT_EQ(t["members"][0]["member_id"], ids[0]);
  EXPECT_EQ(t["members"][0]["open_alerts_by_tier"]["watch"], 1);
  EXPECT_EQ(t["members"][1]["member_id"], ids[1]);
  EXPECT_NEAR(t["members"][1]["force_ratio"]["ci95"][1].get<double>(), 20800.0 / 35000.0, 1e-12);
  EXPECT_EQ(t["members"][2]["member_id"], ids[2]);
  EXPECT_TRUE(t["members"][2]["force_ratio"].is_null());
  EXPECT_EQ(t["members"][2]["latest"]["estimate_id"], e3) << "the newest estimate is shown with its verdict";
  EXPECT_EQ(t["members"][2]["latest"]["verdict"]["code"], "unusable");
  EXPECT_EQ(t["members"][2]["structure_name"], "Dock shed");
  const json only = json::parse(r.Get("/v1/triage?structure_id=" + std::to_string(st2))->body);
  EXPECT_EQ(only["members"].size(), 2u);
  EXPECT_EQ(r.Get("/v1/triage?structure_id=x")->status, 400);
  EXPECT_EQ(CsvLines(r.Get("/v1/triage?format=csv")->body).size(), 4u);
  EXPECT_EQ(json::parse(Client(admin_b_).Get("/v1/triage")->body)["members"].size(), 0u);
}

TEST_P(HttpApiTest, LogbookEntriesFollowRolesAndScopingAndCanRestartTheBaseline) {
  const auto member = CreateMember();
  const std::string m = std::to_string(member);
  const std::string path = "/v1/members/" + m + "/logbook";
  const std::string body =
      R"({"kind": "re-tensioned", "note": "Turnbuckle, 2 turns", "author": "R. Field",
          "occurred_at": "2026-11-21T09:00:00Z", "new_baseline": true})";
  EXPECT_EQ(Client(read_a_).Post(path, body, "application/json")->status, 403);
  auto made = Client(upload_a_).Post(path, body, "application/json");
  ASSERT_EQ(made->status, 201) << made->body;
  const json entry = json::parse(made->body);
  EXPECT_EQ(entry["kind"], "re-tensioned");
  EXPECT_EQ(entry["occurred_at"], "2026-11-21T09:00:00Z");
  EXPECT_EQ(entry["new_baseline"], true);
  const std::string e = std::to_string(entry["id"].get<std::int64_t>());
  auto r = Client(read_a_);
  const json list = json::parse(r.Get(path)->body);
  ASSERT_EQ(list["entries"].size(), 1u);
  EXPECT_EQ(list["entries"][0]["author"], "R. Field");
  EXPECT_EQ(r.Get("/v1/logbook/" + e)->status, 200);
  std::vector<std::string> lines = CsvLines(r.Get(path + "?format=csv")->body);
  ASSERT_EQ(lines.size(), 2u);
  EXPECT_EQ(lines[0], "entry_id,member_id,member,occurred_at_utc,kind,new_baseline,author,note");
  // Validation names the field.
  auto c = Client(upload_a_);
  auto bad = c.Post(path, R"({"kind": "painted", "author": "x"})", "application/json");
  EXPECT_EQ(bad->status, 422);
  EXPECT_NE(bad->body.find("$.kind"), std::string::npos) << bad->body;
  EXPECT_EQ(c.Post(path, R"({"kind": "inspected"})", "application/json")->status, 422);
  EXPECT_EQ(c.Post(path, R"({"kind": "inspected", "author": "x", "colour": 1})", "application/json")->status,
            422);
  EXPECT_EQ(c.Post(path, R"({"kind": "inspected", "author": "x", "occurred_at": "2099-01-01T00:00:00Z"})",
                   "application/json")
                ->status,
            422);
  // Another organisation: 404 everywhere.
  auto b = Client(admin_b_);
  EXPECT_EQ(b.Get(path)->status, 404);
  EXPECT_EQ(b.Post(path, body, "application/json")->status, 404);
  EXPECT_EQ(b.Get("/v1/logbook/" + e)->status, 404);
  EXPECT_EQ(b.Delete("/v1/logbook/" + e)->status, 404);
  // The drift analysis reads the restart.
  const json drift = json::parse(r.Get("/v1/members/" + m + "/drift")->body);
  bool restarted = false;
  for (const json& k : drift["cautions"]) restarted = restarted || k["code"] == "drift-baseline-restarted";
  EXPECT_TRUE(restarted) << drift["cautions"].dump();
  // Only an admin deletes.
  EXPECT_EQ(c.Delete("/v1/logbook/" + e)->status, 403);
  EXPECT_EQ(Client(admin_a_).Delete("/v1/logbook/" + e)->status, 204);
  EXPECT_EQ(json::parse(r.Get(path)->body)["entries"].size(), 0u);
}

TEST_P(HttpApiTest, InspectionReportIsOneSelfContainedHtmlDocumentScopedToTheOrganisation) {
  const auto member = CreateMember();
  auto up = Client(upload_a_);
  StoreEstimate(db_path_, up, member, "2026-11-20T06:00:00Z", 29000, "reduced-confidence",
                SyntheticCsv(dir_.string(), 501));
  const std::string path = "/v1/structures/" + std::to_string(structure_id_) + "/report";
  auto r = Client(read_a_).Get(path + "?from=2026-11-01&to=2026-12-01&author=R.%20Field");
  ASSERT_EQ(r->status, 200) << r->body;
  EXPECT_EQ(r->get_header_value("Content-Type").rfind("text/html", 0), 0u);
  const std::string& html = r->body;
  for (const char* want :
       {"Old maltings hall", "Member maltings-east-tie-2", "R. Field", "2026-11-01 to 2026-12-01",
        "29.0&nbsp;kN", "28.2 to 29.8&nbsp;kN", "Standing notice", "Welch", "Signature"}) {
    EXPECT_NE(html.find(want), std::string::npos) << want;
  }
  // Self-contained: nothing to fetch, nothing to run.
  EXPECT_EQ(html.find("<script"), std::string::npos);
  EXPECT_EQ(html.find("src="), std::string::npos);
  EXPECT_EQ(html.find("href="), std::string::npos);
  EXPECT_EQ(Client(read_a_).Get(path + "?from=2026-12-01&to=2026-11-01")->status, 400);
  EXPECT_EQ(Client(read_a_).Get(path + "?format=docx")->status, 400);
  EXPECT_EQ(Client(admin_b_).Get(path)->status, 404);
  EXPECT_EQ(Client("").Get(path)->status, 401);
}

TEST(IsoTime, RoundTripsAppliesOffsetsAndRefusesImpossibleTimes) {
  // 2026-11-20 is 20777 days after 1970-01-01 (reference: Python's
  // datetime, (date(2026, 11, 20) - date(1970, 1, 1)).days), plus 10 h.
  std::int64_t ms = 0;
  ASSERT_TRUE(ParseIsoUtc("2026-11-20T10:00:00Z", &ms));
  EXPECT_EQ(ms, (20777LL * 86400 + 36000) * 1000);
  EXPECT_EQ(FormatIsoUtc(ms), "2026-11-20T10:00:00Z");
  ASSERT_TRUE(ParseIsoUtc("2026-11-20T10:00:00.25+00:00", &ms));
  EXPECT_EQ(FormatIsoUtc(ms), "2026-11-20T10:00:00.250Z");
  ASSERT_TRUE(ParseIsoUtc("1970-01-01", &ms));
  EXPECT_EQ(ms, 0);
  ASSERT_TRUE(ParseIsoUtc("2026-11-20T11:30:00+01:30", &ms));  // an offset is applied
  EXPECT_EQ(FormatIsoUtc(ms), "2026-11-20T10:00:00Z");
  for (const char* bad : {"2026-02-30T00:00:00Z", "2026-11-20T24:00:00Z", "2026-11-20T10:00:00+19:00",
                          "20261120", "2026-11-20T10:00Z", ""}) {
    EXPECT_FALSE(ParseIsoUtc(bad, &ms)) << bad;
  }
}

// Issue 13 item 1: a body nested 100,000 levels deep killed the process by
// stack overflow (the error path printed the value recursively). Now it is
// refused before a value is built, and values echoed in errors are bounded.
TEST_P(HttpApiTest, DeeplyNestedJsonIsRefusedAndEchoedValuesAreBounded) {
  CreateMember();
  const std::string deep = std::string(100000, '[') + std::string(100000, ']');
  auto c = Client(admin_a_);
  const std::string members = "/v1/structures/" + std::to_string(structure_id_) + "/members";
  json nested = json::parse(member_text_);
  std::string text = nested.dump();
  text.insert(text.size() - 1, ", \"extra\": " + deep);
  auto r = c.Post(members, text, "application/json");
  ASSERT_TRUE(r) << "the server died";
  EXPECT_EQ(r->status, 422) << r->body;
  EXPECT_NE(json::parse(r->body)["error"]["message"].get<std::string>().find("nested deeper than 64"),
            std::string::npos)
      << r->body;
  auto s = c.Post("/v1/structures", deep, "application/json");
  ASSERT_TRUE(s);
  EXPECT_EQ(s->status, 400) << s->body;
  // A 1 MB id and a 1 MB unknown key: the message quotes at most 80 bytes of each.
  nested["id"] = std::string(1 << 20, 'x');
  auto big_id = c.Post(members, nested.dump(), "application/json");
  EXPECT_EQ(big_id->status, 422);
  EXPECT_LT(big_id->body.size(), 400u) << big_id->body.substr(0, 200);
  json keyed = json::parse(member_text_);
  keyed[std::string(1 << 20, 'k')] = 1;
  auto big_key = c.Post(members, keyed.dump(), "application/json");
  EXPECT_EQ(big_key->status, 422);
  EXPECT_LT(big_key->body.size(), 400u) << big_key->body.substr(0, 200);
  // Still serving.
  EXPECT_EQ(Client("").Get("/v1/health")->status, 200);
}

// The same file through `taut identify --member` exited 139 (SIGSEGV).
TEST_P(HttpApiTest, DeeplyNestedMemberFileIsAnErrorOfTheCli) {
  const std::string path = (dir_ / "deep.json").string();
  {
    std::ofstream out(path);
    out << std::string(100000, '[') << std::string(100000, ']');
  }
  const std::string record = (dir_ / "record.csv").string();
  {
    std::ofstream out(record);
    out << SyntheticCsv(dir_.string(), 9);
  }
  const std::string cmd = std::string(TAUT_BINARY_PATH) + " identify --member " + path + " --record " +
                          record + " > " + (dir_ / "out.txt").string() + " 2>&1";
  const int status = std::system(cmd.c_str());
  ASSERT_TRUE(WIFEXITED(status)) << "killed by a signal";
  EXPECT_NE(WEXITSTATUS(status), 0);
  EXPECT_NE(ReadFile((dir_ / "out.txt").string()).find("nested deeper than 64"), std::string::npos);
}

// Issue 13 item 3: the token is checked before any body byte is read, and a
// chunked body is refused as it streams past --max-body.
TEST_P(HttpApiTest, TokenIsCheckedBeforeTheBodyAndChunkedBodiesStopAtMaxBody) {
  StartServer(1u << 20);  // 1 MiB
  const auto member = CreateMember();
  const std::string path = "/v1/members/" + std::to_string(member) + "/records";
  // Headers only, no token: answered at once although no body byte was sent.
  int fd = taut::testing::ConnectFrom("127.0.0.1", server_->port());
  ASSERT_GE(fd, 0);
  ASSERT_TRUE(taut::testing::SendAll(
      fd, "POST " + path +
              " HTTP/1.1\r\nHost: t\r\nContent-Type: text/csv\r\nTransfer-Encoding: chunked\r\n\r\n"));
  std::string answer = taut::testing::ReadUntilClosed(fd, std::chrono::seconds(5));
  ::close(fd);
  EXPECT_EQ(taut::testing::StatusOf(answer), 401) << answer;
  // 300 MB announced, no token: 413 from the headers alone.
  fd = taut::testing::ConnectFrom("127.0.0.1", server_->port());
  ASSERT_TRUE(taut::testing::SendAll(
      fd, "POST " + path + " HTTP/1.1\r\nHost: t\r\nContent-Length: 300000000\r\n\r\n"));
  answer = taut::testing::ReadUntilClosed(fd, std::chrono::seconds(5));
  ::close(fd);
  EXPECT_EQ(taut::testing::StatusOf(answer), 413) << answer;
  // With a token: 64 KiB chunks until the server answers; 413 after about
  // 1 MiB, long before the 8 MiB the client would send.
  fd = taut::testing::ConnectFrom("127.0.0.1", server_->port());
  ASSERT_TRUE(taut::testing::SendAll(
      fd, "POST " + path + " HTTP/1.1\r\nHost: t\r\nAuthorization: Bearer " + upload_a_ +
              "\r\nContent-Type: text/csv\r\nTransfer-Encoding: chunked\r\n\r\n"));
  const std::string chunk = "10000\r\n" + std::string(0x10000, '1') + "\r\n";
  int sent = 0;
  while (sent < 128 && taut::testing::SendAll(fd, chunk)) {
    ++sent;
    pollfd p{fd, POLLIN, 0};
    if (::poll(&p, 1, 0) > 0) break;  // the answer is there
  }
  answer = taut::testing::ReadUntilClosed(fd, std::chrono::seconds(5));
  ::close(fd);
  EXPECT_EQ(taut::testing::StatusOf(answer), 413) << answer.substr(0, 300);
  EXPECT_LT(sent, 128);
  // A POST without Content-Length or chunked encoding: 411 (it used to be
  // read until the client closed).
  fd = taut::testing::ConnectFrom("127.0.0.1", server_->port());
  ASSERT_TRUE(taut::testing::SendAll(fd, "POST " + path + " HTTP/1.1\r\nHost: t\r\n\r\n"));
  answer = taut::testing::ReadUntilClosed(fd, std::chrono::seconds(5));
  ::close(fd);
  EXPECT_EQ(taut::testing::StatusOf(answer), 411) << answer;
}

// Issue 13 item 2: a client sending a header byte now and then is cut off
// at the header deadline and counted.
TEST_P(HttpApiTest, SlowHeadersAreCutAtTheHeaderDeadline) {
  StartServer(1u << 20, [](ServeOptions& o) { o.header_deadline_s = 1; });
  const int fd = taut::testing::ConnectFrom("127.0.0.1", server_->port());
  ASSERT_GE(fd, 0);
  const auto t0 = std::chrono::steady_clock::now();
  bool alive = taut::testing::SendAll(fd, "GET /v1/health HTTP/1.1\r\n");
  // One byte every 200 ms, for at most 5 s.
  bool closed = false;
  while (alive && std::chrono::steady_clock::now() - t0 < std::chrono::seconds(5)) {
    alive = taut::testing::SendAll(fd, "X");
    taut::testing::ReadUntilClosed(fd, std::chrono::milliseconds(200), &closed);
    if (closed) break;
  }
  const double seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
  ::close(fd);
  EXPECT_TRUE(closed || !alive);
  // Header deadline 1 s plus at most one 1 s poll slice and this loop's 200 ms step.
  EXPECT_LT(seconds, 2.5);
  const std::string metrics = Client("").Get("/metrics")->body;
  EXPECT_NE(metrics.find("taut_http_connection_events_total{event=\"deadline_exceeded\"} 1"),
            std::string::npos)
      << metrics;
}

// Issue 13 item 11: control characters in a logged path are escaped, and a
// request the router never sees is logged and counted.
TEST_P(HttpApiTest, LoggedPathsAreEscapedAndUnroutedRequestsCounted) {
  std::ostringstream log;
  StartServer(1u << 20, [&](ServeOptions& o) { o.access_log = &log; });
  int fd = taut::testing::ConnectFrom("127.0.0.1", server_->port());
  ASSERT_TRUE(taut::testing::SendAll(
      fd, "GET /v1/a%0Atime=forged%20status=200 HTTP/1.1\r\nHost: t\r\nConnection: close\r\n\r\n"));
  EXPECT_EQ(taut::testing::StatusOf(taut::testing::ReadUntilClosed(fd, std::chrono::seconds(5))), 404);
  ::close(fd);
  fd = taut::testing::ConnectFrom("127.0.0.1", server_->port());
  ASSERT_TRUE(taut::testing::SendAll(fd, "\x01\x02 nonsense\r\n\r\n"));
  EXPECT_EQ(taut::testing::StatusOf(taut::testing::ReadUntilClosed(fd, std::chrono::seconds(5))), 400);
  ::close(fd);
  const std::string metrics = Client("").Get("/metrics")->body;
  EXPECT_NE(metrics.find("route=\"unrouted\",status=\"400\"} 1"), std::string::npos) << metrics;
  server_.reset();  // joins the threads that write the log
  const std::string text = log.str();
  EXPECT_NE(text.find("path=/v1/a\\x0atime=forged\\x20status=200"), std::string::npos) << text;
  EXPECT_EQ(text.find("\ntime=forged"), std::string::npos) << text;
  EXPECT_NE(text.find("route=unrouted status=400"), std::string::npos) << text;
}

// Issue 13 item 7: the same body with other overrides is another record,
// not a duplicate that silently drops them; the same key with other
// metadata is a conflict.
TEST_P(HttpApiTest, ReuploadWithOtherOverridesIsANewRecordAndTheSameKeyWithThemIs409) {
  const auto member = CreateMember();
  const std::string path = "/v1/members/" + std::to_string(member) + "/records";
  const std::string csv = SyntheticCsv(dir_.string(), 21);
  auto c = Client(upload_a_);
  auto first = c.Post(path, csv, "text/csv");
  ASSERT_EQ(first->status, 202) << first->body;
  EXPECT_EQ(c.Post(path, csv, "text/csv")->status, 200);  // a true duplicate
  auto warmer = c.Post(path + "?temperature_c=5", csv, "text/csv");
  ASSERT_EQ(warmer->status, 202) << warmer->body;
  const auto id = json::parse(warmer->body)["record_id"].get<std::int64_t>();
  EXPECT_NE(id, json::parse(first->body)["record_id"].get<std::int64_t>());
  EXPECT_EQ(json::parse(c.Get("/v1/records/" + std::to_string(id))->body)["temperature_c"], 5.0);
  EXPECT_EQ(c.Post(path + "?temperature_c=5", csv, "text/csv")->status, 200);
  // The same key, same body, other units: 409.
  const std::string other = SyntheticCsv(dir_.string(), 22);
  httplib::Headers key = {{"Idempotency-Key", "gw-7-0001"}};
  EXPECT_EQ(c.Post(path, key, other, "text/csv")->status, 202);
  EXPECT_EQ(c.Post(path, key, other, "text/csv")->status, 200);
  auto conflict = c.Post(path + "?units=g", key, other, "text/csv");
  EXPECT_EQ(conflict->status, 409) << conflict->body;
}

// Issue 13 item 8 (JSON path): values binary32 storage cannot hold, and
// recorded_at outside 1900 .. now + 15 min, are refused with their place.
TEST_P(HttpApiTest, SampleValuesAndRecordTimesOutOfRangeAre422) {
  const auto member = CreateMember();
  const std::string path = "/v1/members/" + std::to_string(member) + "/records";
  json body = {
      {"recorded_at", "2026-11-21T08:00:00Z"}, {"sample_rate_hz", 128.0}, {"channels", {"v1", "v2"}}};
  json rows = json::array();
  for (int i = 0; i < 128 * 12; ++i) rows.push_back({std::sin(0.3 * i), std::cos(0.17 * i)});
  body["samples"] = rows;
  auto c = Client(upload_a_);
  json huge = body;
  huge["samples"][7][1] = 1e300;
  auto r = c.Post(path, huge.dump(), "application/json");
  EXPECT_EQ(r->status, 422);
  EXPECT_NE(r->body.find("$.samples[7][1]"), std::string::npos) << r->body;
  json overflow = body;  // 1e400 is no double at all: a JSON error naming where
  std::string text = overflow.dump();
  text.replace(text.find("\"samples\":[[") + 12, 1, "1e400,0");
  text.erase(text.find(",0", text.find("1e400")) + 2,
             text.find(']', text.find("1e400")) - text.find(",0", text.find("1e400")) - 2);
  r = c.Post(path, text, "application/json");
  EXPECT_EQ(r->status, 400);
  EXPECT_NE(r->body.find("$.samples[0][0]"), std::string::npos) << r->body;
  for (const std::string& when :
       {std::string("1850-06-01T00:00:00Z"), FormatIsoUtc(NowUnixMs() + 86400000)}) {
    json t = body;
    t["recorded_at"] = when;
    r = c.Post(path, t.dump(), "application/json");
    EXPECT_EQ(r->status, 422) << when;
    EXPECT_NE(r->body.find("recorded_at"), std::string::npos) << r->body;
  }
  EXPECT_EQ(queued_.load(), 0);
}

// Issue 13 item 9: client mistakes are 422 naming the JSON path, not 500
// or 409; member descriptions that describe no monitorable member are 422.
TEST_P(HttpApiTest, ClientMistakesAre422NamingTheJsonPath) {
  auto c = Client(admin_a_);
  auto expect = [&](const httplib::Result& r, int status, const std::string& path) {
    ASSERT_TRUE(r);
    EXPECT_EQ(r->status, status) << r->body;
    EXPECT_NE(r->body.find(path), std::string::npos) << path << " not in " << r->body;
  };
  expect(c.Post("/v1/structures", R"({"name": "Hall", "description": 7})", "application/json"), 422,
         "$.description");
  expect(c.Post("/v1/structures", R"({"name": ""})", "application/json"), 422, "$.name");
  expect(c.Post("/v1/structures", json{{"name", std::string(201, 'n')}}.dump(), "application/json"), 422,
         "$.name");
  expect(c.Post("/v1/webhooks", json{{"url", "https://" + std::string(3000, 'h') + ".example/"}}.dump(),
                "application/json"),
         422, "$.url");
  CreateMember();
  const std::string members = "/v1/structures/" + std::to_string(structure_id_) + "/members";
  const json base = json::parse(member_text_);
  auto with = [&](const std::string& pointer, const json& value) {
    json m = base;
    m["id"] = "variant";
    m[json::json_pointer(pointer)] = value;
    return m.dump();
  };
  expect(c.Post(members, with("/material/elastic_modulus_pa", 1e300), "application/json"), 422,
         "$.material.elastic_modulus_pa");
  expect(c.Post(members, with("/section/diameter_m", 100.0), "application/json"), 422,
         "$.section.diameter_m");
  expect(c.Post(members, with("/sensors", json::array()), "application/json"), 422, "$.sensors");
  expect(c.Post(members, with("/sensors/1/position_m", base["sensors"][0]["position_m"]), "application/json"),
         422, "$.sensors[1].position_m");
  expect(c.Post(members, with("/design_axial_force_n", 0), "application/json"), 422,
         "$.design_axial_force_n");
  json many = base;
  many["id"] = "many";
  many["sensors"] = json::array();
  for (int i = 0; i < 65; ++i) {
    many["sensors"].push_back({{"channel", "c" + std::to_string(i)}, {"position_m", 0.05 + 0.08 * i}});
  }
  expect(c.Post(members, many.dump(), "application/json"), 422, "$.sensors");
  std::string overflow = with("/length_m", 5.8);
  overflow.replace(overflow.find("5.8"), 3, "1e400");
  expect(c.Post(members, overflow, "application/json"), 422, "$.length_m");
  // Versions are 64-bit: 2^32 + 1 is not version 1.
  expect(c.Get("/v1/members/" +
               std::to_string(json::parse(c.Get(members)->body)["members"][0]["id"].get<int>()) +
               "/versions/4294967297"),
         404, "version 4294967297");
}

// Issue 13 item 6: webhooks may not point into the service's own network.
TEST_P(HttpApiTest, WebhooksToNonPublicAddressesAreRefused) {
  auto c = Client(admin_a_);
  for (const char* url : {"http://127.0.0.1:22/", "http://0.0.0.0:8080/", "http://2130706433:80/",
                          "http://[::1]/", "http://169.254.169.254/latest/meta-data/", "http://10.1.2.3/",
                          "http://[::ffff:127.0.0.1]/", "http://localhost:9/"}) {
    auto r = c.Post("/v1/webhooks", json{{"url", url}}.dump(), "application/json");
    ASSERT_TRUE(r);
    EXPECT_EQ(r->status, 422) << url << ": " << r->body;
  }
  // Allowed when the operator says so.
  Cidr ten;
  ASSERT_TRUE(ParseCidr("10.0.0.0/8", &ten));
  StartServer(64u << 20, [&](ServeOptions& o) {
    o.webhook_policy.allow.push_back(ten);
    o.max_webhooks_per_organisation = 2;
  });
  auto d = Client(admin_a_);
  EXPECT_EQ(d.Post("/v1/webhooks", R"({"url": "http://10.1.2.3/a"})", "application/json")->status, 201);
  EXPECT_EQ(d.Post("/v1/webhooks", R"({"url": "http://127.0.0.1/a"})", "application/json")->status, 422);
  EXPECT_EQ(d.Post("/v1/webhooks", R"({"url": "http://10.1.2.4/b"})", "application/json")->status, 201);
  auto third = d.Post("/v1/webhooks", R"({"url": "http://10.1.2.5/c"})", "application/json");
  EXPECT_EQ(third->status, 422) << "per-organisation limit";
}

// Issue 13 item 10: an admin lists and revokes the organisation's tokens.
TEST_P(HttpApiTest, TokensAreListedAndRevokedByAnAdmin) {
  auto c = Client(admin_a_);
  EXPECT_EQ(Client(read_a_).Get("/v1/tokens")->status, 403);
  const json list = json::parse(c.Get("/v1/tokens")->body)["tokens"];
  ASSERT_EQ(list.size(), 3u);  // org A's admin, gateway and viewer; not org B's
  std::int64_t viewer = 0;
  for (const auto& t : list) {
    EXPECT_FALSE(t.contains("hash"));
    EXPECT_FALSE(t.contains("salt"));
    if (t["label"] == "a viewer") viewer = t["id"].get<std::int64_t>();
  }
  ASSERT_NE(viewer, 0);
  EXPECT_EQ(Client(read_a_).Get("/v1/me")->status, 200);
  EXPECT_EQ(Client(admin_b_).Delete("/v1/tokens/" + std::to_string(viewer))->status, 404);
  EXPECT_EQ(c.Delete("/v1/tokens/" + std::to_string(viewer))->status, 204);
  EXPECT_EQ(Client(read_a_).Get("/v1/me")->status, 401);
  EXPECT_FALSE(json::parse(c.Get("/v1/tokens")->body)["tokens"][2]["revoked_at"].is_null());
  // The same from the command line: taut token list / revoke.
  auto run = [&](const std::string& args) {
    const std::string out = (dir_ / "cli.txt").string();
    const int status =
        std::system((std::string(TAUT_BINARY_PATH) + " token " + args + " > " + out + " 2>&1").c_str());
    EXPECT_TRUE(WIFEXITED(status) && WEXITSTATUS(status) == 0) << args << ": " << ReadFile(out);
    return ReadFile(out);
  };
  const std::string listed = run("list --db " + db_path_ + " --org org-a");
  EXPECT_NE(listed.find("a gateway"), std::string::npos) << listed;
  EXPECT_EQ(listed.find("b admin"), std::string::npos) << listed;
  std::int64_t gateway = 0;
  const json tokens = json::parse(c.Get("/v1/tokens")->body)["tokens"];
  for (const auto& t : tokens) {
    if (t["label"] == "a gateway") gateway = t["id"].get<std::int64_t>();
  }
  EXPECT_EQ(Client(upload_a_).Get("/v1/me")->status, 200);
  run("revoke --db " + db_path_ + " --org org-a --id " + std::to_string(gateway));
  EXPECT_EQ(Client(upload_a_).Get("/v1/me")->status, 401);
}

}  // namespace
}  // namespace taut::server
