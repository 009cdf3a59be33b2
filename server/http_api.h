// The v1 HTTP API of `taut serve` (docs/API.md is the contract).
//
// Request flow, in the manner of cpp-httplib's handler diagram:
//
//   socket -> connection policy (http_server.h: per-client cap 503,
//     header and whole-request deadlines, keep-alive idle) -> httplib
//     parses the request line and headers -> PreRoute (Content-Length over
//     --max-body 413, a body on GET/DELETE 400, POST/PUT/PATCH without a
//     length 411) -> Dispatch: route table lookup (unknown path 404, known
//     path with another method 405 + Allow) -> bearer token check (401) ->
//     role check (403) -> body read, refused past --max-body as it streams
//     (413) -> handler (organisation-scoped repository calls; another
//     organisation's id is 404) -> JSON response -> access log line +
//     metrics. Requests httplib answers itself are logged as "unrouted".
//
// Every error body is {"error": {"code", "message"}}. Handlers throw
// ApiError internally; Dispatch is the one place that catches (and turns an
// unexpected exception into a logged 500 that keeps the cause).
//
// Threads: cpp-httplib answers connections on http_threads threads; each
// request borrows a database connection from a pool (one connection per
// thread at a time, storage/database.h). Uploads are stored and queued in
// one transaction; the job workers (worker.h) are started by the caller and
// woken through ServeOptions::on_job_queued.
#pragma once

#include <cstddef>
#include <functional>
#include <iosfwd>
#include <memory>
#include <string>

#include "model/status.h"
#include "server/metrics.h"
#include "server/service_limits.h"
#include "server/webhook_policy.h"

namespace taut::server {

struct ServeOptions {
  std::string db_path;             // SQLite file; created and migrated at Start
  std::string host = "127.0.0.1";  // listen address
  int port = 0;                    // 0: an ephemeral port (see ApiServer::port)
  std::size_t max_body_bytes = kDefaultMaxBody_mib << 20;
  // Connection policy (service_limits.h, http_server.h).
  int header_deadline_s = kDefaultHeaderDeadline_s;
  int request_deadline_s = kDefaultRequestDeadline_s;
  int max_connections_per_client = kDefaultMaxConnectionsPerClient;  // 0: no cap
  int http_threads = kHttpThreads;
  // Webhooks: where they may point (webhook_policy.h) and how many one
  // organisation may keep active.
  WebhookPolicy webhook_policy;
  std::size_t max_webhooks_per_organisation = kMaxWebhooksPerOrganisation;
  // Called after a new record and its job are committed (not for a
  // duplicate upload). May be empty.
  std::function<void()> on_job_queued;
  // Access log: one key=value line per request. Not owned; may be null.
  std::ostream* access_log = nullptr;
  // Shared with the workers; not owned; may be null (a private one is used).
  Metrics* metrics = nullptr;
};

class ApiServer {
 public:
  explicit ApiServer(ServeOptions options);
  ~ApiServer();  // Stop()
  ApiServer(const ApiServer&) = delete;
  ApiServer& operator=(const ApiServer&) = delete;

  // Opens and migrates the database, binds the socket and starts serving on
  // a background thread. Connections are accepted (queued by the kernel)
  // from the moment Start returns ok. Fails with a message naming the file
  // or the address.
  Status Start();
  int port() const;  // the bound port (after a successful Start)
  // Stops accepting, lets requests in flight finish, joins the thread.
  // Idempotent.
  void Stop();

 private:
  struct Impl;
  std::unique_ptr<Impl> impl_;
};

}  // namespace taut::server
