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
#include "server/http_server.h"
#include "server/iso_time.h"
#include "server/routes.h"
#include "server/safe_text.h"
#include "server/service_limits.h"
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

ConnectionLimits LimitsOf(const ServeOptions& o) {
  ConnectionLimits l;
  l.header_deadline_s = o.header_deadline_s;
  l.request_deadline_s = o.request_deadline_s;
  l.read_timeout_s = kReadTimeout_s;
  l.write_timeout_s = kWriteTimeout_s;
  l.keep_alive_idle_s = kKeepAliveIdle_s;
  l.keep_alive_max_requests = kKeepAliveMaxRequests;
  l.max_per_client = o.max_connections_per_client;
  return l;
}

struct ApiServer::Impl {
  explicit Impl(ServeOptions o)
      : options(WithMetrics(std::move(o), &own_metrics)),
        pool(options.db_path),
        http(LimitsOf(options), options.metrics, [this](const std::string& line) { LogLine(line); }) {
    RegisterRoutes(router);
  }
  static ServeOptions WithMetrics(ServeOptions o, Metrics* own) {
    if (!o.metrics) o.metrics = own;
    return o;
  }

  Metrics own_metrics;  // before options: options.metrics may point here
  ServeOptions options;
  ConnectionPool pool;
  GuardedServer http;
  std::thread thread;
  int port = 0;
  bool started = false;
  Router router;

  // Set on the handling thread while Dispatch runs a request: the logger
  // callback then knows the router saw it.
  static thread_local bool t_dispatched;

  // The one entry point of every request (see the header's diagram).
  // `reader`: the body is still unread (POST, PUT, PATCH) and is read here,
  // after the token and role checks, at most max_body_bytes of it; null:
  // httplib read it (other methods, whose bodies the pre-routing check
  // limits to none).
  void Dispatch(const httplib::Request& req, httplib::Response& res, const httplib::ContentReader* reader) {
    t_dispatched = true;
    const auto t0 = std::chrono::steady_clock::now();
    std::string route_label = "unmatched";
    Id organisation = 0;
    std::string body;
    try {
      std::vector<Id> ids;
      std::string allow;
      const Route* route = router.Find(req, &ids, &allow);
      if (!route) {
        if (reader) GuardedServer::CloseAfterResponse(res);  // body left unread
        if (!allow.empty()) {
          res.set_header("Allow", allow);
          Fail(405, "method-not-allowed",
               req.method + " is not allowed on " + Excerpt(req.path) + " (allowed: " + allow + ")");
        }
        Fail(404, "not-found", "no route " + Excerpt(req.path));
      }
      route_label = route->pattern;
      auto lease = pool.Acquire();
      storage::Repository repo(lease.db());
      Call call{req, res, lease.db(), repo, {}, std::move(ids), NowUnixMs(), options, body};
      if (route->auth) {
        if (reader) GuardedServer::CloseAfterResponse(res);  // until the body is read
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
      if (reader) {
        ReadBody(req, *reader, res, &body);
        res.headers.erase("Connection");
        GuardedServer::KeepAlive();
      } else {
        body = req.body;
      }
      route->handler(call);
    } catch (const ApiError& e) {
      SendJson(res, e.status, ErrorBody(e.code, e.message));
    } catch (const std::exception& e) {
      Log("error", req, "exception: " + std::string(e.what()));
      SendJson(res, 500, ErrorBody("internal", std::string("internal error: ") + Excerpt(e.what(), 400)));
    } catch (...) {
      Log("error", req, "unknown exception");
      SendJson(res, 500, ErrorBody("internal", "internal error"));
    }
    const double seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
    options.metrics->RecordRequest(req.method, route_label, res.status, seconds);
    AccessLog(req, res, route_label, seconds, organisation, body.size());
  }

  // Reads the request body through httplib's content reader, refusing it
  // (413) as soon as it passes max_body_bytes: a chunked body has no
  // Content-Length to check up front (one with a length was checked in
  // PreRoute).
  void ReadBody(const httplib::Request& req, const httplib::ContentReader& reader, httplib::Response& res,
                std::string* body) {
    bool too_large = false;
    // A known length is reserved at once (growing by doubling would hold up
    // to twice the body); PreRoute has checked it against the limit.
    if (req.has_header("Content-Length")) {
      body->reserve(std::strtoull(req.get_header_value("Content-Length").c_str(), nullptr, 10));
    }
    const bool ok = reader([&](const char* data, std::size_t n) {
      if (body->size() + n > options.max_body_bytes) {
        too_large = true;
        return false;
      }
      body->append(data, n);
      return true;
    });
    if (too_large) {
      GuardedServer::CloseAfterResponse(res);
      Fail(413, "payload-too-large",
           "the request body exceeds the server's --max-body limit (" +
               std::to_string(options.max_body_bytes >> 20) + " MiB)");
    }
    if (!ok) {
      GuardedServer::CloseAfterResponse(res);
      Fail(400, "bad-request", "the request body could not be read (malformed chunked encoding or timeout)");
    }
  }

  // Runs when the request line and headers are complete, before any body
  // byte is read: refuses bodies that are too large by their
  // Content-Length, bodies on methods that take none, and bodies whose end
  // the server could only learn by the client closing the connection.
  httplib::Server::HandlerResponse PreRoute(const httplib::Request& req, httplib::Response& res) {
    GuardedServer::HeadersDone();
    t_dispatched = false;
    const bool chunked = req.get_header_value("Transfer-Encoding").find("chunked") != std::string::npos;
    const bool has_length = req.has_header("Content-Length");
    const std::uint64_t length =
        has_length ? std::strtoull(req.get_header_value("Content-Length").c_str(), nullptr, 10) : 0;
    const bool takes_body = req.method == "POST" || req.method == "PUT" || req.method == "PATCH";
    int status = 0;
    std::string code, message;
    if (has_length && length > options.max_body_bytes) {
      status = 413;
      code = "payload-too-large";
      message = "the request body (" + std::to_string(length) +
                " bytes) exceeds the server's --max-body limit (" +
                std::to_string(options.max_body_bytes >> 20) + " MiB)";
    } else if (!takes_body && (chunked || length > 0)) {
      status = 400;
      code = "bad-request";
      message = req.method + " takes no request body";
    } else if (takes_body && !chunked && !has_length) {
      status = 411;
      code = "length-required";
      message = "send Content-Length (or Transfer-Encoding: chunked) with a " + req.method;
    }
    if (status == 0) return httplib::Server::HandlerResponse::Unhandled;
    t_dispatched = true;
    GuardedServer::CloseAfterResponse(res);
    SendJson(res, status, ErrorBody(code, message));
    options.metrics->RecordRequest(req.method, "refused-before-routing", status, 0);
    AccessLog(req, res, "refused-before-routing", 0, 0, 0);
    return httplib::Server::HandlerResponse::Handled;
  }

  // Requests httplib answered without routing them (unparsable request
  // line, URI too long, a body that could not be read): logged and counted
  // under the route label "unrouted".
  void LogUnrouted(const httplib::Request& req, const httplib::Response& res) {
    if (t_dispatched) {
      t_dispatched = false;
      return;
    }
    options.metrics->RecordRequest(req.method.empty() ? "-" : req.method, "unrouted", res.status, 0);
    AccessLog(req, res, "unrouted", 0, 0, req.body.size());
  }

  std::mutex log_mu;
  void AccessLog(const httplib::Request& req, const httplib::Response& res, const std::string& route_label,
                 double seconds, Id organisation, std::size_t in_bytes) {
    if (!options.access_log) return;
    std::ostringstream line;
    line << "time=" << FormatIsoUtc(NowUnixMs()) << " remote=" << EscapeForLog(req.remote_addr, 64)
         << " method=" << EscapeForLog(req.method, 16) << " path=" << EscapeForLog(req.path)
         << " route=" << route_label << " status=" << res.status << " ms=" << std::fixed
         << std::setprecision(2) << seconds * 1e3 << " org=" << organisation << " in=" << in_bytes
         << " out=" << std::max(res.body.size(), res.content_length_) << "\n";
    std::lock_guard<std::mutex> lock(log_mu);
    *options.access_log << line.str() << std::flush;
  }
  void Log(const char* level, const httplib::Request& req, const std::string& what) {
    if (!options.access_log) return;
    std::lock_guard<std::mutex> lock(log_mu);
    *options.access_log << "time=" << FormatIsoUtc(NowUnixMs()) << " level=" << level
                        << " method=" << EscapeForLog(req.method, 16) << " path=" << EscapeForLog(req.path)
                        << " " << EscapeForLog(what, 2000) << "\n"
                        << std::flush;
  }
  void LogLine(const std::string& line) {
    if (!options.access_log) return;
    std::lock_guard<std::mutex> lock(log_mu);
    *options.access_log << "time=" << FormatIsoUtc(NowUnixMs()) << " " << line << "\n" << std::flush;
  }
};

thread_local bool ApiServer::Impl::t_dispatched = false;

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
  const int threads = s.options.http_threads;
  s.http.new_task_queue = [threads] { return new httplib::ThreadPool(static_cast<std::size_t>(threads)); };
  s.http.set_payload_max_length(s.options.max_body_bytes);
  // Responses go out as header and body writes; without TCP_NODELAY the
  // body waits for the peer's delayed ACK (Nagle's algorithm, RFC 896, with
  // delayed ACKs of RFC 1122: about 40 ms on Linux) on keep-alive
  // connections.
  s.http.set_tcp_nodelay(true);
  // Read/write timeouts, keep-alive and deadlines: GuardedServer's
  // ConnectionLimits (LimitsOf), not httplib's own settings.
  auto dispatch = [&s](const httplib::Request& req, httplib::Response& res) {
    s.Dispatch(req, res, nullptr);
  };
  auto dispatch_reading = [&s](const httplib::Request& req, httplib::Response& res,
                               const httplib::ContentReader& reader) { s.Dispatch(req, res, &reader); };
  // Every method and path goes to Dispatch, which owns routing (404 vs
  // 405). Methods with a body get it unread, so that the token is checked
  // before the body is read.
  s.http.Get(".*", dispatch).Delete(".*", dispatch).Options(".*", dispatch);
  s.http.Post(".*", dispatch_reading).Put(".*", dispatch_reading).Patch(".*", dispatch_reading);
  s.http.set_pre_routing_handler(
      [&s](const httplib::Request& req, httplib::Response& res) { return s.PreRoute(req, res); });
  s.http.set_logger(
      [&s](const httplib::Request& req, const httplib::Response& res) { s.LogUnrouted(req, res); });
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
  s.http.WidenBacklog(kListenBacklog);
  s.thread = std::thread([&s] { s.http.listen_after_bind(); });
  // httplib's stop() does nothing until the listening thread has marked
  // itself running; a Stop() right after Start() then left that thread
  // blocked in accept() for good (seen under load in test_http_api). Start
  // returns once the thread runs.
  for (int i = 0; i < 10000 && !s.http.is_running(); ++i)
    std::this_thread::sleep_for(std::chrono::milliseconds(1));
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
