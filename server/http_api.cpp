#include "server/http_api.h"

#include <algorithm>
#include <chrono>
#include <iomanip>
#include <memory>
#include <mutex>
#include <ostream>
#include <sstream>
#include <thread>
#include <vector>

#include "server/auth.h"
#include "server/connection_pool.h"
#include "server/http_router.h"
#include "server/iso_time.h"
#include "server/routes.h"
#include "storage/migrations.h"
#include "storage/repository.h"

// glibc's <resolv.h>, which httplib pulls in, defines the macro _res (a
// parameter name inside Eigen): include httplib after anything Eigen.
#include <httplib.h>

namespace taut::server {

using storage::Id;
using storage::Role;
using storage::StorageStatus;

ConnectionPool::Lease ConnectionPool::Acquire() {
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

struct ApiServer::Impl {
  explicit Impl(ServeOptions o) : options(std::move(o)), pool(options.db_path) {
    if (!options.metrics) options.metrics = &own_metrics;
    RegisterRoutes(router);
  }

  ServeOptions options;
  Metrics own_metrics;
  ConnectionPool pool;
  httplib::Server http;
  std::thread thread;
  int port = 0;
  bool started = false;
  Router router;

  // The one entry point of every request (see the header's diagram).
  void Dispatch(const httplib::Request& req, httplib::Response& res) {
    const auto t0 = std::chrono::steady_clock::now();
    std::string route_label = "unmatched";
    Id organisation = 0;
    try {
      std::vector<Id> ids;
      std::string allow;
      const Route* route = router.Find(req.method, req.path, &ids, &allow);
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
      Call call{req, res, lease.db(), repo, {}, std::move(ids), NowUnixMs(), options};
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
      route->handler(call);
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
