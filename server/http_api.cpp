#include "server/http_api.h"

#include <algorithm>
#include <chrono>
#include <cmath>
#include <functional>
#include <iomanip>
#include <limits>
#include <memory>
#include <mutex>
#include <nlohmann/json.hpp>
#include <optional>
#include <ostream>
#include <sstream>
#include <thread>
#include <vector>

#include "estimation/record.h"
#include "server/alert_rules.h"
#include "server/api_json.h"
#include "server/auth.h"
#include "server/dashboard_data.h"
#include "server/extra_routes.h"
#include "server/iso_time.h"
#include "server/member_json.h"
#include "server/record_csv.h"
#include "server/ui_assets.h"
#include "storage/migrations.h"
#include "storage/repository.h"

// After Eigen (via estimation/record.h): glibc's <resolv.h>, which httplib
// pulls in, defines the macro _res, a parameter name inside Eigen.
#include <httplib.h>

namespace taut::server {

namespace {

using nlohmann::json;
using storage::Id;
using storage::Role;
using storage::StorageStatus;

// ------------------------------------------------------------------ errors

struct ApiError {
  int status;
  std::string code;
  std::string message;
};

[[noreturn]] void Fail(int status, std::string code, std::string message) {
  throw ApiError{status, std::move(code), std::move(message)};
}

// Maps a storage failure onto the HTTP status it means for the client.
void Check(const StorageStatus& s) {
  if (s.ok()) return;
  if (s.not_found()) Fail(404, "not-found", s.message);
  if (s.busy()) Fail(503, "unavailable", "the database stayed busy: " + s.message);
  switch (s.sqlite_code & 0xff) {
    case SQLITE_CONSTRAINT:
      Fail(409, "conflict", s.message);
    case SQLITE_MISUSE:
      Fail(422, "unprocessable", s.message);
    default:
      Fail(500, "internal", "storage: " + s.message);
  }
}

json ErrorBody(const std::string& code, const std::string& message) {
  return {{"error", {{"code", code}, {"message", message}}}};
}

// Sends `text` without cpp-httplib's automatic compression. cpp-httplib
// 0.11 compresses every set_content body of a text-like type when the
// client accepts it, preferring Brotli at the library's default quality
// (11, its slowest): bench_dashboard measured about 0.5 s for a 200 kB
// force history fetched by Chromium (browsers always send
// "Accept-Encoding: br"), against 9 ms uncompressed. A sized content
// provider is sent as it is. Errors keep set_content (small, and the error
// handler looks at res.body).
void SendUncompressed(httplib::Response& res, int status, std::string text, const char* type) {
  res.status = status;
  if (status >= 400 || text.empty()) return res.set_content(std::move(text), type);
  auto shared = std::make_shared<const std::string>(std::move(text));
  res.set_content_provider(shared->size(), type,
                           [shared](std::size_t offset, std::size_t length, httplib::DataSink& sink) {
                             return sink.write(shared->data() + offset, length);
                           });
}

void SendJson(httplib::Response& res, int status, const json& body) {
  SendUncompressed(res, status, body.dump(), "application/json");
}

// --------------------------------------------------------- connection pool

// Connections are opened on demand and returned after each request, so at
// most kHttpThreads are open; each is used by one thread at a time.
class ConnectionPool {
 public:
  explicit ConnectionPool(std::string path) : path_(std::move(path)) {}

  class Lease {
   public:
    Lease(ConnectionPool* pool, std::unique_ptr<storage::Database> db) : pool_(pool), db_(std::move(db)) {}
    ~Lease() {
      if (db_) pool_->Return(std::move(db_));
    }
    Lease(Lease&&) = default;
    storage::Database& db() { return *db_; }

   private:
    ConnectionPool* pool_;  // not owned; outlives the lease
    std::unique_ptr<storage::Database> db_;
  };

  Lease Acquire() {
    {
      std::lock_guard<std::mutex> lock(mu_);
      if (!idle_.empty()) {
        auto db = std::move(idle_.back());
        idle_.pop_back();
        return Lease(this, std::move(db));
      }
    }
    auto db = std::make_unique<storage::Database>();
    if (StorageStatus s = db->Open(path_); !s.ok()) Fail(503, "unavailable", "database: " + s.message);
    return Lease(this, std::move(db));
  }

 private:
  void Return(std::unique_ptr<storage::Database> db) {
    std::lock_guard<std::mutex> lock(mu_);
    idle_.push_back(std::move(db));
  }

  std::string path_;
  std::mutex mu_;
  std::vector<std::unique_ptr<storage::Database>> idle_;
};

// ------------------------------------------------------------ JSON helpers

json Optional(const std::optional<double>& v) { return v ? json(*v) : json(nullptr); }

json ParseBodyJson(const httplib::Request& req) {
  json j = json::parse(req.body, nullptr, /*allow_exceptions=*/false);
  if (j.is_discarded()) Fail(400, "bad-request", "the body is not valid JSON");
  if (!j.is_object()) Fail(400, "bad-request", "the body must be a JSON object");
  return j;
}

json StructureJson(const storage::Structure& s) {
  return {{"id", s.id},
          {"name", s.name},
          {"description", s.description},
          {"created_at", FormatIsoUtc(s.created_at_unix_ms)}};
}

json MemberJson(const storage::Member& m) {
  return {{"id", m.id},
          {"structure_id", m.structure_id},
          {"external_id", m.external_id},
          {"version", m.version},
          {"current_version", m.current_version},
          {"created_at", FormatIsoUtc(m.created_at_unix_ms)},
          {"version_created_at", FormatIsoUtc(m.version_created_at_unix_ms)},
          {"deleted", m.deleted_at_unix_ms.has_value()},
          {"description", StoredJson(m.description_json)}};
}

json EstimateJson(const storage::Estimate& e) {
  json j = {{"id", e.id},
            {"record_id", e.record_id},
            {"member_id", e.member_id},
            {"member_version", e.member_version},
            {"measured_at", FormatIsoUtc(e.measured_at_unix_ms)},
            {"temperature_c", Optional(e.temperature_c)},
            {"created_at", FormatIsoUtc(e.created_at_unix_ms)}};
  if (e.job_id) j["job_id"] = *e.job_id;
  j["result"] = StoredJson(e.result_json);
  return j;
}

json HistoryPointJson(const storage::Estimate& e) {
  return {{"estimate_id", e.id},
          {"record_id", e.record_id},
          {"measured_at", FormatIsoUtc(e.measured_at_unix_ms)},
          {"temperature_c", Optional(e.temperature_c)},
          {"axial_force_n", e.axial_force_n},
          {"std_n", Optional(e.force_std_n)},
          {"ci95_n", {e.force_ci95_low_n, e.force_ci95_high_n}},
          {"bending_stiffness_nm2", Optional(e.bending_stiffness_nm2)},
          {"bending_stiffness_std_nm2", Optional(e.bending_stiffness_std_nm2)}};
}

json JobJson(const storage::Job& job) {
  json j = {{"id", job.id},
            {"record_id", job.record_id},
            {"state", storage::JobStateName(job.state)},
            {"progress", job.progress},
            {"attempts", job.attempts},
            {"created_at", FormatIsoUtc(job.created_at_unix_ms)}};
  if (job.state == storage::JobState::kFailed) j["failure_reason"] = job.failure_reason;
  if (job.started_at_unix_ms) j["started_at"] = FormatIsoUtc(*job.started_at_unix_ms);
  if (job.finished_at_unix_ms) j["finished_at"] = FormatIsoUtc(*job.finished_at_unix_ms);
  return j;
}

json RecordJson(const storage::Record& r) {
  return {{"id", r.id},
          {"member_id", r.member_id},
          {"member_version", r.member_version},
          {"recorded_at", FormatIsoUtc(r.recorded_at_unix_ms)},
          {"temperature_c", Optional(r.temperature_c)},
          {"units", r.units},
          {"excitation", r.excitation},
          {"sample_rate_hz", r.sample_rate_hz},
          {"channels", r.channels},
          {"sample_count", r.sample_count},
          {"content_sha256", r.content_sha256},
          {"created_at", FormatIsoUtc(r.created_at_unix_ms)}};
}

// ------------------------------------------------------- query parameters

std::optional<std::string> Query(const httplib::Request& req, const char* name) {
  if (!req.has_param(name)) return std::nullopt;
  return req.get_param_value(name);
}

std::optional<std::int64_t> QueryTime(const httplib::Request& req, const char* name) {
  auto text = Query(req, name);
  if (!text) return std::nullopt;
  std::int64_t ms = 0;
  if (!ParseIsoUtc(*text, &ms)) {
    Fail(400, "bad-request",
         std::string(name) + " = \"" + *text + "\": not an ISO 8601 UTC time (e.g. 2026-11-20T10:00:00Z)");
  }
  return ms;
}

std::optional<double> QueryNumber(const httplib::Request& req, const char* name) {
  auto text = Query(req, name);
  if (!text) return std::nullopt;
  char* end = nullptr;
  const double v = std::strtod(text->c_str(), &end);
  if (text->empty() || end != text->c_str() + text->size() || !std::isfinite(v)) {
    Fail(400, "bad-request", std::string(name) + " = \"" + *text + "\": not a finite number");
  }
  return v;
}

std::optional<Id> QueryId(const httplib::Request& req, const char* name) {
  auto text = Query(req, name);
  if (!text) return std::nullopt;
  if (text->empty() || text->size() > 18 || text->find_first_not_of("0123456789") != std::string::npos) {
    Fail(400, "bad-request", std::string(name) + " = \"" + *text + "\": not an id");
  }
  return std::stoll(*text);
}

// --------------------------------------------------------- record uploads

// Builds the record from a JSON body (docs/API.md), checking the same rules
// as the CSV reader (FORMATS.md section 2) with JSON paths in the messages.
estimation::Record RecordFromJson(const json& j, const model::Member& member) {
  static const std::vector<std::string> kKeys = {"recorded_at",    "temperature_c", "units",  "excitation",
                                                 "sample_rate_hz", "channels",      "samples"};
  for (const auto& [key, value] : j.items()) {
    if (std::find(kKeys.begin(), kKeys.end(), key) == kKeys.end()) {
      Fail(422, "unprocessable",
           "$." + key +
               ": unknown key (known: recorded_at, temperature_c, units, "
               "excitation, sample_rate_hz, channels, samples)");
    }
  }
  estimation::Record r;
  if (!j.contains("sample_rate_hz") || !j["sample_rate_hz"].is_number() ||
      !(j["sample_rate_hz"].get<double>() > 0) || !std::isfinite(j["sample_rate_hz"].get<double>())) {
    Fail(422, "unprocessable", "$.sample_rate_hz: required, a number > 0");
  }
  r.sample_rate_hz = j["sample_rate_hz"].get<double>();
  if (!j.contains("channels") || !j["channels"].is_array() || j["channels"].empty()) {
    Fail(422, "unprocessable", "$.channels: required, a non-empty array of channel names");
  }
  for (std::size_t c = 0; c < j["channels"].size(); ++c) {
    const json& name = j["channels"][c];
    const std::string path = "$.channels[" + std::to_string(c) + "]";
    if (!name.is_string()) Fail(422, "unprocessable", path + ": must be a string");
    const std::string s = name.get<std::string>();
    const bool sensor = std::any_of(member.sensors.begin(), member.sensors.end(),
                                    [&](const model::Sensor& x) { return x.channel == s; });
    if (!sensor)
      Fail(422, "unprocessable", path + " = \"" + s + "\": not a sensor channel of member " + member.id);
    if (std::find(r.channels.begin(), r.channels.end(), s) != r.channels.end()) {
      Fail(422, "unprocessable", path + " = \"" + s + "\": channel listed twice");
    }
    r.channels.push_back(s);
  }
  if (static_cast<int>(r.channels.size()) > estimation::kMaxChannels) {
    Fail(422, "unprocessable",
         "$.channels: more than " + std::to_string(estimation::kMaxChannels) + " channels");
  }
  if (!j.contains("samples") || !j["samples"].is_array()) {
    Fail(422, "unprocessable", "$.samples: required, an array of rows (one value per channel)");
  }
  const json& rows = j["samples"];
  const auto n = static_cast<std::int64_t>(rows.size()), nc = static_cast<std::int64_t>(r.channels.size());
  if (n * nc > estimation::kMaxCells) {
    Fail(422, "unprocessable", "$.samples: more than " + std::to_string(estimation::kMaxCells) + " cells");
  }
  r.samples.resize(n, nc);
  for (std::int64_t i = 0; i < n; ++i) {
    const json& row = rows[i];
    if (!row.is_array() || static_cast<std::int64_t>(row.size()) != nc) {
      Fail(422, "unprocessable",
           "$.samples[" + std::to_string(i) + "]: must hold " + std::to_string(nc) +
               " numbers (one per channel)");
    }
    for (std::int64_t c = 0; c < nc; ++c) {
      const json& v = row[c];
      if (!v.is_number() || !std::isfinite(v.get<double>())) {
        Fail(422, "unprocessable",
             "$.samples[" + std::to_string(i) + "][" + std::to_string(c) + "]: not a finite number");
      }
      r.samples(i, c) = v.get<double>();
    }
  }
  if (n < estimation::kMinSamples || n / r.sample_rate_hz < estimation::kMinRecordDuration_s) {
    Fail(422, "unprocessable",
         "$.samples: " + std::to_string(n) + " samples at " + std::to_string(r.sample_rate_hz) +
             " Hz; a record needs at least " + std::to_string(estimation::kMinSamples) + " samples and " +
             std::to_string(static_cast<int>(estimation::kMinRecordDuration_s)) + " s");
  }
  if (j.contains("recorded_at")) {
    if (!j["recorded_at"].is_string())
      Fail(422, "unprocessable", "$.recorded_at: must be an ISO 8601 string");
    r.recorded_at = j["recorded_at"].get<std::string>();
  }
  if (j.contains("temperature_c") && !j["temperature_c"].is_null()) {
    if (!j["temperature_c"].is_number()) Fail(422, "unprocessable", "$.temperature_c: must be a number");
    r.temperature_c = j["temperature_c"].get<double>();
  }
  if (j.contains("units")) {
    const std::string u = j["units"].is_string() ? j["units"].get<std::string>() : "";
    if (u != "m/s2" && u != "g") Fail(422, "unprocessable", "$.units: must be \"m/s2\" or \"g\"");
    r.units = u;
    if (u == "g") r.samples *= estimation::kStandardGravity_m_s2;
  }
  if (j.contains("excitation")) {
    const std::string e = j["excitation"].is_string() ? j["excitation"].get<std::string>() : "";
    if (!estimation::ParseExcitation(e, &r.excitation)) {
      Fail(422, "unprocessable", "$.excitation: must be \"ambient\" or \"impact\"");
    }
  }
  return r;
}

// -------------------------------------------------------------- the routes

struct Call {
  const httplib::Request& req;
  httplib::Response& res;
  storage::Database& db;
  storage::Repository& repo;
  Principal who;
  std::vector<Id> ids;  // the path's numeric captures, in order
  std::int64_t now_unix_ms;
};

}  // namespace

struct ApiServer::Impl {
  using Handler = std::function<void(Impl&, Call&)>;
  using Condition = std::function<bool(const httplib::Request&)>;
  struct Route {
    std::string method;
    std::string pattern;                // "/v1/members/{id}": the metrics label
    std::vector<std::string> segments;  // "v1", "members", "{id}"
    bool auth;
    Role min_role;
    Handler handler;
    Condition when;  // empty: always; else the route answers only when it holds
  };

  explicit Impl(ServeOptions o) : options(std::move(o)), pool(options.db_path) {
    if (!options.metrics) options.metrics = &own_metrics;
    AddRoutes();
  }

  ServeOptions options;
  Metrics own_metrics;
  ConnectionPool pool;
  httplib::Server http;
  std::thread thread;
  int port = 0;
  bool started = false;
  std::vector<Route> routes;

  void Add(const std::string& method, const std::string& pattern, Role role, Handler h, bool auth = true,
           Condition when = {}) {
    routes.push_back({method, pattern, Segments(pattern), auth, role, std::move(h), std::move(when)});
  }
  // The routes of server/extra_routes.h, ahead of the core table.
  void AddExtraRoutes() {
    for (ExtraRoute& x : AssetFileRoutes()) {
      Add(
          x.method, x.pattern, x.min_role,
          [h = std::move(x.handler)](Impl&, Call& c) {
            RouteCall rc{c.req, c.res, c.repo, c.who.organisation_id, c.who.role, c.ids, c.now_unix_ms};
            try {
              h(rc);
            } catch (const RouteError& e) {
              Fail(e.status, e.code, e.message);
            }
          },
          true, std::move(x.when));
    }
  }

  // "/v1/members/12" -> {"v1", "members", "12"}.
  static std::vector<std::string> Segments(const std::string& path) {
    std::vector<std::string> out;
    std::size_t start = 1;
    while (start <= path.size()) {
      const std::size_t end = std::min(path.find('/', start), path.size());
      out.push_back(path.substr(start, end - start));
      start = end + 1;
    }
    return out;
  }

  // A "{name}" segment of the pattern matches 1..18 digits (an id) and is
  // captured; a last segment "**" matches the rest of the path, zero or
  // more segments (the dashboard's files); every other segment matches
  // itself.
  static bool Match(const Route& r, const std::vector<std::string>& path, std::vector<Id>* ids) {
    const bool rest = !r.segments.empty() && r.segments.back() == "**";
    const std::size_t fixed = r.segments.size() - (rest ? 1 : 0);
    if (rest ? path.size() < fixed : path.size() != fixed) return false;
    ids->clear();
    for (std::size_t i = 0; i < fixed; ++i) {
      const std::string& want = r.segments[i];
      if (!want.empty() && want.front() == '{') {
        const std::string& got = path[i];
        if (got.empty() || got.size() > 18 || got.find_first_not_of("0123456789") != std::string::npos) {
          return false;
        }
        ids->push_back(std::stoll(got));
      } else if (want != path[i]) {
        return false;
      }
    }
    return true;
  }

  void AddRoutes() {
    AddExtraRoutes();
    Add("GET", "/v1/health", Role::kRead, &Impl::Health, /*auth=*/false);
    Add("GET", "/metrics", Role::kRead, &Impl::MetricsText, /*auth=*/false);
    Add("GET", "/v1/me", Role::kRead, &Impl::Me);
    Add("POST", "/v1/structures", Role::kAdmin, &Impl::CreateStructure);
    Add("GET", "/v1/structures", Role::kRead, &Impl::ListStructures);
    Add("GET", "/v1/structures/{id}", Role::kRead, &Impl::GetStructure);
    Add("DELETE", "/v1/structures/{id}", Role::kAdmin, &Impl::DeleteStructure);
    Add("POST", "/v1/structures/{id}/members", Role::kAdmin, &Impl::CreateMember);
    Add("GET", "/v1/structures/{id}/members", Role::kRead, &Impl::ListMembers);
    Add("GET", "/v1/members/{id}", Role::kRead, &Impl::GetMember);
    Add("PUT", "/v1/members/{id}", Role::kAdmin, &Impl::UpdateMember);
    Add("DELETE", "/v1/members/{id}", Role::kAdmin, &Impl::DeleteMember);
    Add("GET", "/v1/members/{id}/drift-settings", Role::kRead, &Impl::GetDriftSettings);
    Add("PUT", "/v1/members/{id}/drift-settings", Role::kAdmin, &Impl::PutDriftSettings);
    Add("GET", "/v1/members/{id}/versions/{version}", Role::kRead, &Impl::GetMemberVersion);
    Add("POST", "/v1/members/{id}/records", Role::kUpload, &Impl::UploadRecord);
    Add("GET", "/v1/members/{id}/force", Role::kRead, &Impl::LatestForce);
    Add("GET", "/v1/members/{id}/force/history", Role::kRead, &Impl::ForceHistory);
    Add("GET", "/v1/records/{id}", Role::kRead, &Impl::GetRecord);
    Add("GET", "/v1/records/{id}/csv", Role::kRead, &Impl::GetRecordCsv);
    Add("GET", "/v1/records/{id}/estimate", Role::kRead, &Impl::GetRecordEstimate);
    Add("GET", "/v1/jobs/{id}", Role::kRead, &Impl::GetJob);
    Add("GET", "/v1/estimates/{id}", Role::kRead, &Impl::GetEstimate);
    Add("GET", "/v1/alerts", Role::kRead, &Impl::ListAlerts);
    Add("GET", "/v1/alerts/{id}", Role::kRead, &Impl::GetAlert);
    Add("POST", "/v1/alerts/{id}/acknowledge", Role::kUpload, &Impl::AcknowledgeAlert);
    Add("POST", "/v1/alerts/{id}/resolve", Role::kUpload, &Impl::ResolveAlert);
    Add("GET", "/v1/alerts/{id}/deliveries", Role::kRead, &Impl::ListDeliveries);
    Add("POST", "/v1/webhooks", Role::kAdmin, &Impl::CreateWebhook);
    Add("GET", "/v1/webhooks", Role::kAdmin, &Impl::ListWebhooks);
    Add("DELETE", "/v1/webhooks/{id}", Role::kAdmin, &Impl::DeleteWebhook);
    // The dashboard's data (docs/API.md "Dashboard") and its static files:
    // the files need no token (they hold no data; every call they make does).
    Add("GET", "/v1/estimates/{id}/spectrum", Role::kRead, &Impl::EstimateSpectrum);
    Add("GET", "/v1/estimates/{id}/model-shapes", Role::kRead, &Impl::EstimateModelShapes);
    Add("GET", "/v1/members/{id}/drift", Role::kRead, &Impl::MemberDrift);
    Add("GET", "/v1/members/{id}/fixity/history", Role::kRead, &Impl::FixityHistory);
    Add("GET", "/", Role::kRead, &Impl::UiRedirect, /*auth=*/false);
    Add("GET", "/ui/**", Role::kRead, &Impl::UiFile, /*auth=*/false);
  }

  // The one entry point of every request (see the header's diagram).
  void Dispatch(const httplib::Request& req, httplib::Response& res) {
    const auto t0 = std::chrono::steady_clock::now();
    std::string route_label = "unmatched";
    Id organisation = 0;
    try {
      const Route* route = nullptr;
      std::vector<Id> ids;
      std::string allow;
      const std::vector<std::string> path = Segments(req.path);
      for (const Route& r : routes) {
        if (!Match(r, path, &ids) || (r.when && !r.when(req))) continue;
        if (r.method == req.method) {
          route = &r;
          break;
        }
        allow += (allow.empty() ? "" : ", ") + r.method;
      }
      if (!route) {
        if (!allow.empty()) {
          res.set_header("Allow", allow);
          Fail(405, "method-not-allowed",
               req.method + " is not allowed on " + req.path + " (allowed: " + allow + ")");
        }
        Fail(404, "not-found", "no route " + req.path);
      }
      route_label = route->pattern;
      auto lease = pool.Acquire();
      storage::Repository repo(lease.db());
      Call call{req, res, lease.db(), repo, {}, std::move(ids), NowUnixMs()};
      if (route->auth) {
        std::string storage_error;
        switch (Authenticate(repo, req.get_header_value("Authorization"), &call.who, &storage_error)) {
          case AuthOutcome::kOk:
            break;
          case AuthOutcome::kMissing:
            Fail(401, "unauthorized", "missing Authorization header (Bearer token)");
          case AuthOutcome::kMalformed:
            Fail(401, "unauthorized",
                 "malformed Authorization header: expected \"Bearer taut_<id>_<secret>\"");
          case AuthOutcome::kRejected:
            Fail(401, "unauthorized", "unknown or revoked token");
          case AuthOutcome::kStorageError:
            Fail(503, "unavailable", "token lookup: " + storage_error);
        }
        organisation = call.who.organisation_id;
        if (!RoleAtLeast(call.who.role, route->min_role)) {
          Fail(403, "forbidden",
               std::string("this route needs the ") + storage::RoleName(route->min_role) +
                   " role; the token has " + storage::RoleName(call.who.role));
        }
      }
      route->handler(*this, call);
    } catch (const ApiError& e) {
      SendJson(res, e.status, ErrorBody(e.code, e.message));
    } catch (const std::exception& e) {
      Log("error", req, "exception: " + std::string(e.what()));
      SendJson(res, 500, ErrorBody("internal", std::string("internal error: ") + e.what()));
    } catch (...) {
      Log("error", req, "unknown exception");
      SendJson(res, 500, ErrorBody("internal", "internal error"));
    }
    const double seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
    options.metrics->RecordRequest(req.method, route_label, res.status, seconds);
    if (options.access_log) {
      std::ostringstream line;
      line << "time=" << FormatIsoUtc(NowUnixMs()) << " remote=" << req.remote_addr
           << " method=" << req.method << " path=" << req.path << " route=" << route_label
           << " status=" << res.status << " ms=" << std::fixed << std::setprecision(2) << seconds * 1e3
           << " org=" << organisation << " in=" << req.body.size()
           << " out=" << std::max(res.body.size(), res.content_length_) << "\n";
      std::lock_guard<std::mutex> lock(log_mu);
      *options.access_log << line.str() << std::flush;
    }
  }

  std::mutex log_mu;
  void Log(const char* level, const httplib::Request& req, const std::string& what) {
    if (!options.access_log) return;
    std::lock_guard<std::mutex> lock(log_mu);
    *options.access_log << "time=" << FormatIsoUtc(NowUnixMs()) << " level=" << level
                        << " method=" << req.method << " path=" << req.path << " " << what << "\n"
                        << std::flush;
  }

  // ---- operations
  void Health(Call& c) {
    int version = 0;
    Check(storage::SchemaVersion(c.db, &version));
    SendJson(c.res, 200, {{"status", "ok"}, {"version", TAUT_VERSION_STRING}, {"schema_version", version}});
  }
  void MetricsText(Call& c) {
    std::map<std::string, std::int64_t> jobs;
    Check(c.repo.CountJobsByState(&jobs));
    c.res.status = 200;
    c.res.set_content(options.metrics->Render(jobs), "text/plain; version=0.0.4");
  }
  void Me(Call& c) {
    storage::Organisation org;
    Check(c.repo.GetOrganisation(c.who.organisation_id, &org));
    SendJson(
        c.res, 200,
        {{"organisation", {{"id", org.id}, {"name", org.name}}}, {"role", storage::RoleName(c.who.role)}});
  }

  // ---- structures
  void CreateStructure(Call& c) {
    const json j = ParseBodyJson(c.req);
    for (const auto& [key, v] : j.items()) {
      if (key != "name" && key != "description") {
        Fail(422, "unprocessable", "$." + key + ": unknown key (known: name, description)");
      }
    }
    if (!j.contains("name") || !j["name"].is_string()) Fail(422, "unprocessable", "$.name: required string");
    const std::string description = j.value("description", std::string());
    Id id = 0;
    Check(c.repo.CreateStructure(c.who.organisation_id, j["name"].get<std::string>(), description,
                                 c.now_unix_ms, &id));
    storage::Structure s;
    Check(c.repo.GetStructure(c.who.organisation_id, id, &s));
    SendJson(c.res, 201, StructureJson(s));
  }
  void ListStructures(Call& c) {
    std::vector<storage::Structure> list;
    Check(c.repo.ListStructures(c.who.organisation_id, &list));
    json out = json::array();
    for (const auto& s : list) out.push_back(StructureJson(s));
    SendJson(c.res, 200, {{"structures", out}});
  }
  void GetStructure(Call& c) {
    storage::Structure s;
    Check(c.repo.GetStructure(c.who.organisation_id, c.ids[0], &s));
    SendJson(c.res, 200, StructureJson(s));
  }
  void DeleteStructure(Call& c) {
    Check(c.repo.DeleteStructure(c.who.organisation_id, c.ids[0], c.now_unix_ms));
    c.res.status = 204;
  }

  // ---- members
  // Validates a member description body (FORMATS.md section 1, id required).
  model::Member ParseMemberBody(const httplib::Request& req) {
    model::Member member;
    if (Status s = ParseMember(req.body, &member, MemberReadOptions{.require_id = true}); !s.ok()) {
      Fail(422, "unprocessable", s.message);
    }
    return member;
  }
  void CreateMember(Call& c) {
    const model::Member member = ParseMemberBody(c.req);
    Id id = 0;
    Check(c.repo.CreateMember(c.who.organisation_id, c.ids[0], member.id, c.req.body, c.now_unix_ms, &id));
    storage::Member m;
    Check(c.repo.GetMember(c.who.organisation_id, id, &m));
    SendJson(c.res, 201, MemberJson(m));
  }
  void ListMembers(Call& c) {
    storage::Structure s;
    Check(c.repo.GetStructure(c.who.organisation_id, c.ids[0], &s));
    std::vector<storage::Member> list;
    Check(c.repo.ListMembers(c.who.organisation_id, c.ids[0], &list));
    json out = json::array();
    for (const auto& m : list) out.push_back(MemberJson(m));
    SendJson(c.res, 200, {{"members", out}});
  }
  void GetMember(Call& c) {
    storage::Member m;
    Check(c.repo.GetMember(c.who.organisation_id, c.ids[0], &m));
    SendJson(c.res, 200, MemberJson(m));
  }
  void GetMemberVersion(Call& c) {
    storage::Member m;
    Check(c.repo.GetMemberVersion(c.who.organisation_id, c.ids[0], static_cast<int>(c.ids[1]), &m));
    SendJson(c.res, 200, MemberJson(m));
  }
  void UpdateMember(Call& c) {
    storage::Member current;
    Check(c.repo.GetMember(c.who.organisation_id, c.ids[0], &current));
    const model::Member member = ParseMemberBody(c.req);
    if (member.id != current.external_id) {
      Fail(422, "unprocessable",
           "$.id = \"" + member.id + "\": a member keeps its id (\"" + current.external_id + "\")");
    }
    int version = 0;
    Check(c.repo.UpdateMember(c.who.organisation_id, c.ids[0], c.req.body, c.now_unix_ms, &version));
    storage::Member m;
    Check(c.repo.GetMember(c.who.organisation_id, c.ids[0], &m));
    SendJson(c.res, 200, MemberJson(m));
  }
  void DeleteMember(Call& c) {
    Check(c.repo.DeleteMember(c.who.organisation_id, c.ids[0], c.now_unix_ms));
    c.res.status = 204;
  }

  // Drift settings of a member: the stored ones over the defaults, and the
  // values taken from its description (design force, nominal EI).
  json DriftSettingsBody(Call& c, const storage::Member& m) {
    estimation::DriftSettings settings;
    std::string text;
    StorageStatus st = c.repo.GetDriftSettings(c.who.organisation_id, m.id, &text);
    if (!st.ok() && !st.not_found()) Check(st);
    const bool stored = st.ok();
    if (stored) {
      if (Status s = DriftSettingsFromJson(StoredJson(text), &settings); !s.ok()) {
        Fail(500, "internal", "stored drift settings of member " + std::to_string(m.id) + ": " + s.message);
      }
    }
    json j = DriftSettingsToJson(settings);
    j["defaults"] = !stored;
    return j;
  }
  void GetDriftSettings(Call& c) {
    storage::Member m;
    Check(c.repo.GetMember(c.who.organisation_id, c.ids[0], &m));
    SendJson(c.res, 200, DriftSettingsBody(c, m));
  }
  void PutDriftSettings(Call& c) {
    storage::Member m;
    Check(c.repo.GetMember(c.who.organisation_id, c.ids[0], &m));
    estimation::DriftSettings settings;  // a PUT replaces: absent keys take the defaults
    if (Status s = DriftSettingsFromJson(ParseBodyJson(c.req), &settings); !s.ok()) {
      Fail(422, "unprocessable", s.message);
    }
    Check(c.repo.SetDriftSettings(c.who.organisation_id, m.id, DriftSettingsToJson(settings).dump(),
                                  c.now_unix_ms));
    SendJson(c.res, 200, DriftSettingsBody(c, m));
  }

  // ---- records and jobs
  void UploadRecord(Call& c) {
    storage::Member stored;
    Check(c.repo.GetMember(c.who.organisation_id, c.ids[0], &stored));
    model::Member member;
    if (Status s = ParseMember(stored.description_json, &member, MemberReadOptions{.require_id = true});
        !s.ok()) {
      Fail(500, "internal", "stored description of member " + std::to_string(stored.id) + ": " + s.message);
    }
    const std::string content_type = c.req.get_header_value("Content-Type");
    estimation::Record record;
    if (content_type.rfind("application/json", 0) == 0) {
      record = RecordFromJson(ParseBodyJson(c.req), member);
    } else if (content_type.empty() || content_type.rfind("text/csv", 0) == 0 ||
               content_type.rfind("text/plain", 0) == 0) {
      estimation::RecordReadOptions ro;
      ro.member = &member;
      std::istringstream in(c.req.body);
      if (Status s = estimation::ParseRecordCsv(in, ro, &record); !s.ok())
        Fail(400, "bad-request", s.message);
    } else {
      Fail(415, "unsupported-media-type",
           "Content-Type \"" + content_type + "\": send text/csv (FORMATS.md section 2) or application/json");
    }
    // Query parameters override the record's own metadata (FORMATS.md section 2).
    if (auto v = Query(c.req, "recorded_at")) record.recorded_at = *v;
    if (auto v = QueryNumber(c.req, "temperature_c")) record.temperature_c = *v;
    if (auto v = Query(c.req, "units")) {
      if (*v != "m/s2" && *v != "g") Fail(400, "bad-request", "units = \"" + *v + "\": must be m/s2 or g");
      if (*v != record.units) {
        record.samples *=
            (*v == "g") ? estimation::kStandardGravity_m_s2 : 1.0 / estimation::kStandardGravity_m_s2;
        record.units = *v;
      }
    }
    if (auto v = Query(c.req, "excitation")) {
      if (!estimation::ParseExcitation(*v, &record.excitation)) {
        Fail(400, "bad-request", "excitation = \"" + *v + "\": must be ambient or impact");
      }
    }
    if (record.temperature_c && (*record.temperature_c < estimation::kMinTemperature_c ||
                                 *record.temperature_c > estimation::kMaxTemperature_c)) {
      Fail(422, "unprocessable",
           "temperature_c = " + std::to_string(*record.temperature_c) + ": outside " +
               std::to_string(static_cast<int>(estimation::kMinTemperature_c)) + ".." +
               std::to_string(static_cast<int>(estimation::kMaxTemperature_c)) + " C");
    }
    if (record.recorded_at.empty()) {
      Fail(422, "unprocessable",
           "recorded_at is required: a '# recorded_at=...' line in the CSV, the JSON field or the query "
           "parameter");
    }
    storage::NewRecord nr;
    nr.member_id = stored.id;
    if (!ParseIsoUtc(record.recorded_at, &nr.recorded_at_unix_ms)) {
      Fail(422, "unprocessable", "recorded_at = \"" + record.recorded_at + "\": not an ISO 8601 UTC time");
    }
    nr.temperature_c = record.temperature_c;
    // Samples are kept in m/s^2 whatever the upload's units (the reader
    // converted them); the original bytes keep their hash.
    nr.units = "m/s2";
    nr.excitation = estimation::ToString(record.excitation);
    nr.sample_rate_hz = record.sample_rate_hz;
    nr.channels = record.channels;
    const Eigen::Index n = record.samples.rows(), nc = record.samples.cols();
    nr.samples.resize(static_cast<std::size_t>(n * nc));
    for (Eigen::Index i = 0; i < n; ++i) {
      for (Eigen::Index j = 0; j < nc; ++j)
        nr.samples[static_cast<std::size_t>(i * nc + j)] = record.samples(i, j);
    }
    nr.content_sha256 = Sha256Hex(c.req.body);
    nr.samples_sha256 = Sha256Hex(storage::EncodeSamples(nr.samples));
    nr.idempotency_key = c.req.get_header_value("Idempotency-Key");
    if (nr.idempotency_key.size() > kMaxIdempotencyKeyLength) {
      Fail(400, "bad-request", "Idempotency-Key longer than " + std::to_string(kMaxIdempotencyKeyLength));
    }
    storage::RecordInsertResult result;
    Check(c.repo.InsertRecord(c.who.organisation_id, nr, c.now_unix_ms, &result));
    if (!result.duplicate && options.on_job_queued) options.on_job_queued();
    json body = {{"record_id", result.record_id}, {"job_id", result.job_id}, {"duplicate", result.duplicate}};
    if (!record.cautions.empty()) {
      json cautions = json::array();
      for (const auto& k : record.cautions) cautions.push_back({{"code", k.code}, {"message", k.message}});
      body["record_cautions"] = cautions;
    }
    SendJson(c.res, result.duplicate ? 200 : 202, body);
  }
  void GetRecord(Call& c) {
    storage::Record r;
    Check(c.repo.GetRecord(c.who.organisation_id, c.ids[0], &r));
    SendJson(c.res, 200, RecordJson(r));
  }
  void GetRecordCsv(Call& c) {
    storage::Record r;
    Check(c.repo.GetRecord(c.who.organisation_id, c.ids[0], &r));
    if (Sha256Hex(storage::EncodeSamples(r.samples)) != r.samples_sha256) {
      Fail(500, "internal", "record " + std::to_string(r.id) + ": stored samples do not match their SHA-256");
    }
    RecordCsvHeader header;
    header.recorded_at = FormatIsoUtc(r.recorded_at_unix_ms);
    header.temperature_c = r.temperature_c;
    header.units = r.units;
    header.excitation = r.excitation;
    const std::size_t nc = r.channels.size();
    std::string out = FormatRecordCsv(
        header, r.channels, r.sample_rate_hz, r.sample_count,
        [&](std::int64_t i, std::size_t j) { return r.samples[static_cast<std::size_t>(i) * nc + j]; });
    c.res.status = 200;
    c.res.set_header("Content-Disposition",
                     "attachment; filename=\"record-" + std::to_string(r.id) + ".csv\"");
    SendUncompressed(c.res, 200, std::move(out), "text/csv");
  }
  void GetRecordEstimate(Call& c) {
    storage::Record r;
    Check(c.repo.GetRecord(c.who.organisation_id, c.ids[0], &r));
    storage::Estimate e;
    Check(c.repo.EstimateForRecord(c.who.organisation_id, c.ids[0], &e));
    SendJson(c.res, 200, EstimateJson(e));
  }
  void GetJob(Call& c) {
    storage::Job job;
    Check(c.repo.GetJob(c.who.organisation_id, c.ids[0], &job));
    json j = JobJson(job);
    if (job.state == storage::JobState::kDone) {
      storage::Estimate e;
      if (c.repo.EstimateForRecord(c.who.organisation_id, job.record_id, &e).ok()) j["estimate_id"] = e.id;
    }
    SendJson(c.res, 200, j);
  }

  // ---- estimates and force
  void GetEstimate(Call& c) {
    storage::Estimate e;
    Check(c.repo.GetEstimate(c.who.organisation_id, c.ids[0], &e));
    SendJson(c.res, 200, EstimateJson(e));
  }
  void LatestForce(Call& c) {
    storage::Member m;
    Check(c.repo.GetMember(c.who.organisation_id, c.ids[0], &m));
    storage::Estimate e;
    Check(c.repo.LatestEstimate(c.who.organisation_id, c.ids[0], &e));
    SendJson(c.res, 200, EstimateJson(e));
  }
  // [from, to) of a history query: default the last 30 days.
  static std::pair<std::int64_t, std::int64_t> HistoryWindow(const Call& c) {
    const std::int64_t to = QueryTime(c.req, "to").value_or(c.now_unix_ms + 1);
    const std::int64_t from = QueryTime(c.req, "from").value_or(to - kDefaultHistoryWindow_ms);
    if (from > to) Fail(400, "bad-request", "from is after to");
    return {from, to};
  }
  // A member's history in the query's window: `read(member, from, to,
  // &rows)` fetches the rows (a storage range query), `point(row)` makes
  // one JSON point of each.
  template <typename Row, typename ReadFn, typename PointFn>
  void SendHistory(Call& c, ReadFn read, PointFn point) {
    storage::Member m;
    Check(c.repo.GetMember(c.who.organisation_id, c.ids[0], &m));
    const auto [from, to] = HistoryWindow(c);
    std::vector<Row> rows;
    Check(read(m.id, from, to, &rows));
    json points = json::array();
    for (const auto& r : rows) points.push_back(point(r));
    SendJson(c.res, 200,
             {{"member_id", m.id},
              {"from", FormatIsoUtc(from)},
              {"to", FormatIsoUtc(to)},
              {"truncated", rows.size() >= storage::kMaxHistoryRows},
              {"points", points}});
  }
  void ForceHistory(Call& c) {
    SendHistory<storage::Estimate>(
        c,
        [&](Id m, std::int64_t from, std::int64_t to, auto* rows) {
          return c.repo.ForceHistory(c.who.organisation_id, m, from, to, rows);
        },
        HistoryPointJson);
  }
  // The end fixities of the stored results (dashboard_data.h).
  void FixityHistory(Call& c) {
    SendHistory<storage::Repository::FixityRow>(
        c,
        [&](Id m, std::int64_t from, std::int64_t to, auto* rows) {
          return c.repo.FixityHistory(c.who.organisation_id, m, from, to, rows);
        },
        [](const storage::Repository::FixityRow& r) { return FixityPointJson(r); });
  }
  // ---- dashboard data (thin: the computations are in dashboard_data.h)
  model::Member StoredDescription(const storage::Member& m) {
    model::Member member;
    if (Status s = ParseMember(m.description_json, &member, MemberReadOptions{.require_id = true}); !s.ok()) {
      Fail(500, "internal", "stored description of member " + std::to_string(m.id) + ": " + s.message);
    }
    return member;
  }
  void EstimateSpectrum(Call& c) {
    storage::Estimate e;
    Check(c.repo.GetEstimate(c.who.organisation_id, c.ids[0], &e));
    storage::Record r;
    Check(c.repo.GetRecord(c.who.organisation_id, e.record_id, &r));
    const double points = QueryNumber(c.req, "max_points").value_or(kDefaultSpectrumPoints);
    if (points != std::floor(points) || points < kMinSpectrumPoints || points > kMaxSpectrumPoints) {
      Fail(400, "bad-request",
           "max_points must be an integer in " + std::to_string(kMinSpectrumPoints) + ".." +
               std::to_string(kMaxSpectrumPoints));
    }
    json out;
    if (Status s = EstimateSpectrumJson(e, r, static_cast<int>(points), &out); !s.ok())
      Fail(422, "unprocessable", s.message);
    SendJson(c.res, 200, out);
  }
  void EstimateModelShapes(Call& c) {
    storage::Estimate e;
    Check(c.repo.GetEstimate(c.who.organisation_id, c.ids[0], &e));
    storage::Member version;
    Check(c.repo.GetMemberVersion(c.who.organisation_id, e.member_id, e.member_version, &version));
    json out;
    if (Status s = ModelShapesJson(e, StoredDescription(version), &out); !s.ok())
      Fail(422, "unprocessable", s.message);
    SendJson(c.res, 200, out);
  }
  void MemberDrift(Call& c) {
    storage::Member m;
    Check(c.repo.GetMember(c.who.organisation_id, c.ids[0], &m));
    const model::Member member = StoredDescription(m);
    const auto [from, to] = HistoryWindow(c);
    std::string text;
    const StorageStatus st = c.repo.GetDriftSettings(c.who.organisation_id, m.id, &text);
    if (!st.ok() && !st.not_found()) Check(st);
    estimation::DriftSettings settings;
    if (Status s =
            EffectiveDriftSettings(member, st.ok() ? &text : nullptr, member.MajorityPlane(), &settings);
        !s.ok()) {
      Fail(500, "internal", "stored drift settings of member " + std::to_string(m.id) + ": " + s.message);
    }
    Check(ApplyLogbookBaseline(c.repo, c.who.organisation_id, m.id, &settings));
    std::vector<storage::Estimate> all;  // the rules run over the whole series, as the workers do
    Check(c.repo.ForceHistory(c.who.organisation_id, m.id, std::numeric_limits<std::int64_t>::min(),
                              std::numeric_limits<std::int64_t>::max(), &all));
    json out;
    if (Status s = MemberDriftJson(member, settings, DriftSettingsBody(c, m), all, from, to, &out); !s.ok())
      Fail(500, "internal", "drift of member " + std::to_string(m.id) + ": " + s.message);
    out["member_id"] = m.id;
    SendJson(c.res, 200, out);
  }
  void UiRedirect(Call& c) {
    c.res.status = 302;
    c.res.set_header("Location", "/ui/");
  }
  // server/ui/ as embedded at build time. Revalidated on every load
  // (no-cache + ETag) so a new build is picked up at once; the policy
  // allows scripts, styles and connections to this origin only.
  void UiFile(Call& c) {
    if (c.req.path == "/ui") {
      c.res.status = 301;
      c.res.set_header("Location", "/ui/");
      return;
    }
    std::string rel = c.req.path.substr(4);  // after "/ui/"
    if (rel.empty()) rel = "index.html";
    const UiAsset* asset = FindUiAsset(rel);
    if (!asset) Fail(404, "not-found", "no dashboard file " + c.req.path);
    c.res.set_header("ETag", std::string(asset->etag));
    c.res.set_header("Cache-Control", "no-cache");
    c.res.set_header("X-Content-Type-Options", "nosniff");
    c.res.set_header("Referrer-Policy", "no-referrer");
    c.res.set_header("Content-Security-Policy",
                     "default-src 'none'; script-src 'self'; style-src 'self'; img-src 'self' data:; "
                     "connect-src 'self'; base-uri 'none'; form-action 'none'; frame-ancestors 'none'");
    if (c.req.get_header_value("If-None-Match") == asset->etag) {
      c.res.status = 304;
      return;
    }
    SendUncompressed(c.res, 200, std::string(asset->body), std::string(asset->content_type).c_str());
  }

  // ---- alerts and webhooks
  void ListAlerts(Call& c) {
    storage::AlertFilter filter;
    filter.member_id = QueryId(c.req, "member_id");
    if (auto state = Query(c.req, "state")) {
      if (*state == "open") {
        filter.state = storage::AlertState::kOpen;
      } else if (*state == "acknowledged") {
        filter.state = storage::AlertState::kAcknowledged;
      } else if (*state == "resolved") {
        filter.state = storage::AlertState::kResolved;
      } else {
        Fail(400, "bad-request", "state = \"" + *state + "\": must be open, acknowledged or resolved");
      }
    }
    std::vector<storage::Alert> list;
    Check(c.repo.ListAlerts(c.who.organisation_id, filter, &list));
    json out = json::array();
    for (const auto& a : list) out.push_back(AlertToJson(a));
    SendJson(c.res, 200, {{"alerts", out}});
  }
  void GetAlert(Call& c) {
    storage::Alert a;
    Check(c.repo.GetAlert(c.who.organisation_id, c.ids[0], &a));
    SendJson(c.res, 200, AlertToJson(a));
  }
  void AcknowledgeAlert(Call& c) {
    Check(c.repo.AcknowledgeAlert(c.who.organisation_id, c.ids[0], c.now_unix_ms));
    GetAlert(c);
  }
  void ResolveAlert(Call& c) {
    Check(c.repo.ResolveAlert(c.who.organisation_id, c.ids[0], c.now_unix_ms));
    GetAlert(c);
  }
  void ListDeliveries(Call& c) {
    storage::Alert a;
    Check(c.repo.GetAlert(c.who.organisation_id, c.ids[0], &a));
    std::vector<storage::DeliveryAttempt> list;
    Check(c.repo.ListDeliveries(c.who.organisation_id, c.ids[0], &list));
    json out = json::array();
    for (const auto& d : list) {
      json j = {{"id", d.id},
                {"webhook_id", d.subscription_id},
                {"attempt", d.attempt},
                {"attempted_at", FormatIsoUtc(d.attempted_at_unix_ms)},
                {"http_status", d.http_status ? json(*d.http_status) : json(nullptr)},
                {"succeeded", d.succeeded},
                {"error", d.error}};
      if (d.next_attempt_at_unix_ms) j["next_attempt_at"] = FormatIsoUtc(*d.next_attempt_at_unix_ms);
      out.push_back(j);
    }
    SendJson(c.res, 200, {{"deliveries", out}});
  }
  void CreateWebhook(Call& c) {
    const json j = ParseBodyJson(c.req);
    for (const auto& [key, v] : j.items()) {
      if (key != "url" && key != "secret")
        Fail(422, "unprocessable", "$." + key + ": unknown key (known: url, secret)");
    }
    if (!j.contains("url") || !j["url"].is_string()) Fail(422, "unprocessable", "$.url: required string");
    const std::string url = j["url"].get<std::string>();
    if (url.rfind("http://", 0) != 0 && url.rfind("https://", 0) != 0) {
      Fail(422, "unprocessable", "$.url = \"" + url + "\": must start with http:// or https://");
    }
    std::string secret;
    if (j.contains("secret")) {
      if (!j["secret"].is_string() || j["secret"].get<std::string>().empty()) {
        Fail(422, "unprocessable", "$.secret: a non-empty string");
      }
      secret = j["secret"].get<std::string>();
    } else {
      secret = RandomHex(kTokenSecretBytes);  // shown once, in this response
    }
    Id id = 0;
    Check(c.repo.CreateWebhook(c.who.organisation_id, url, secret, c.now_unix_ms, &id));
    SendJson(c.res, 201, {{"id", id}, {"url", url}, {"secret", secret}, {"active", true}});
  }
  void ListWebhooks(Call& c) {
    std::vector<storage::Webhook> list;
    Check(c.repo.ListWebhooks(c.who.organisation_id, /*active_only=*/false, &list));
    json out = json::array();
    for (const auto& w : list) {
      out.push_back({{"id", w.id},
                     {"url", w.url},
                     {"active", w.active},
                     {"created_at", FormatIsoUtc(w.created_at_unix_ms)}});
    }
    SendJson(c.res, 200, {{"webhooks", out}});
  }
  void DeleteWebhook(Call& c) {
    Check(c.repo.DeactivateWebhook(c.who.organisation_id, c.ids[0]));
    c.res.status = 204;
  }
};

ApiServer::ApiServer(ServeOptions options) : impl_(std::make_unique<Impl>(std::move(options))) {}

ApiServer::~ApiServer() { Stop(); }

Status ApiServer::Start() {
  Impl& s = *impl_;
  {
    storage::Database db;
    if (StorageStatus st = storage::OpenAndMigrate(db, s.options.db_path); !st.ok()) {
      return Status::InvalidArgument(s.options.db_path + ": " + st.message);
    }
  }
  s.http.new_task_queue = [] { return new httplib::ThreadPool(kHttpThreads); };
  s.http.set_payload_max_length(s.options.max_body_bytes);
  // Responses go out as header and body writes; without TCP_NODELAY the
  // body waits for the peer's delayed ACK (Nagle's algorithm, RFC 896, with
  // delayed ACKs of RFC 1122: about 40 ms on Linux) on keep-alive
  // connections.
  s.http.set_tcp_nodelay(true);
  s.http.set_read_timeout(kReadTimeout_s, 0);
  s.http.set_write_timeout(kWriteTimeout_s, 0);
  auto dispatch = [&s](const httplib::Request& req, httplib::Response& res) { s.Dispatch(req, res); };
  // Every method and path goes to Dispatch, which owns routing (404 vs 405).
  s.http.Get(".*", dispatch).Post(".*", dispatch).Put(".*", dispatch);
  s.http.Delete(".*", dispatch).Patch(".*", dispatch).Options(".*", dispatch);
  // Errors produced by httplib itself (413 body too large, 400 unreadable
  // request) get the API's error body too.
  s.http.set_error_handler([](const httplib::Request&, httplib::Response& res) {
    if (!res.body.empty()) return;
    if (res.status == 413) {
      SendJson(res, 413,
               ErrorBody("payload-too-large", "the request body exceeds the server's --max-body limit"));
    } else {
      SendJson(res, res.status,
               ErrorBody(res.status == 404 ? "not-found" : "bad-request",
                         "HTTP status " + std::to_string(res.status)));
    }
  });
  if (s.options.port == 0) {
    s.port = s.http.bind_to_any_port(s.options.host);
  } else {
    s.port = s.http.bind_to_port(s.options.host, s.options.port) ? s.options.port : -1;
  }
  if (s.port <= 0) {
    return Status::InvalidArgument("cannot listen on " + s.options.host + ":" +
                                   std::to_string(s.options.port));
  }
  s.thread = std::thread([&s] { s.http.listen_after_bind(); });
  s.started = true;
  return Status::Ok();
}

int ApiServer::port() const { return impl_->port; }

void ApiServer::Stop() {
  Impl& s = *impl_;
  if (!s.started) return;
  s.http.stop();
  if (s.thread.joinable()) s.thread.join();
  s.started = false;
}

}  // namespace taut::server
