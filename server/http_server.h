// The connection policy of `taut serve` (internal to server/): cpp-httplib's
// Server with its per-connection loop replaced, so that no client can hold a
// thread for long without sending a request at a reasonable pace.
//
//   accept -> per-client cap (more than max_per_client open connections
//   from one address: 503 and close) -> keep-alive loop: wait for the next
//   request at most keep_alive_idle_s -> the request line and headers must
//   arrive within header_deadline_s, the whole request (body, handler,
//   response) within request_deadline_s; each read or write waits at most
//   read/write_timeout_s -> httplib parses and routes (process_request).
//
// A connection cut by a deadline gets no response (the client was too slow
// to deserve one); it is logged and counted (Metrics::RecordConnectionEvent).
//
// cpp-httplib 0.11 (Debian bookworm) has per-read timeouts only: a client
// sending one header byte every few seconds held a thread indefinitely.
// Server::process_and_close_socket is the documented extension point (its
// SSLServer overrides it); Server::process_request is protected for it.
#pragma once

#include <cstddef>
#include <functional>
#include <map>
#include <mutex>
#include <string>

#include "server/metrics.h"

// After Eigen: glibc's <resolv.h>, which httplib pulls in, defines _res.
#include <httplib.h>

namespace taut::server {

struct ConnectionLimits {
  int header_deadline_s = 10;
  int request_deadline_s = 120;
  int read_timeout_s = 10;
  int write_timeout_s = 30;
  int keep_alive_idle_s = 2;
  std::size_t keep_alive_max_requests = 100;
  int max_per_client = 32;  // 0: no cap
};

class GuardedServer : public httplib::Server {
 public:
  // metrics: not owned, never null. log: one key=value line, may be empty.
  GuardedServer(ConnectionLimits limits, Metrics* metrics, std::function<void(const std::string&)> log);

  // After bind: the accept queue holds `backlog` connections. httplib 0.11.4
  // is built with a backlog of 5 (CPPHTTPLIB_LISTEN_BACKLOG): a burst of
  // connections then waits for the clients' SYN retries (1 s, 3 s, 7 s).
  // Linux lets listen() be called again on a listening socket to change it.
  void WidenBacklog(int backlog);

  // For the request being handled on this thread: close the connection
  // after its response (the request's body was not read, so the stream is
  // no longer at a request boundary). Sets "Connection: close".
  static void CloseAfterResponse(httplib::Response& res);
  // Undoes CloseAfterResponse: the body has been read after all.
  static void KeepAlive();
  // The request line and headers of the current request are complete
  // (called by the pre-routing handler): the header deadline no longer
  // applies, the whole-request deadline still does.
  static void HeadersDone();

 private:
  bool process_and_close_socket(socket_t sock) override;

  ConnectionLimits limits_;
  Metrics* metrics_;
  std::function<void(const std::string&)> log_;
  std::mutex mu_;
  std::map<std::string, int> open_by_client_;  // remote address -> open connections
};

}  // namespace taut::server
