// Service metrics in the Prometheus text exposition format (version 0.0.4:
// https://prometheus.io/docs/instrumenting/exposition_formats/).
//
// Thread-safe: HTTP handler threads and workers record concurrently (one
// mutex; a record is a few additions, far below a request's cost).
// Durations are in seconds, as the format's conventions ask.
#pragma once

#include <cstdint>
#include <map>
#include <mutex>
#include <string>
#include <vector>

namespace taut::server {

// A cumulative histogram with fixed upper bounds (seconds).
class Histogram {
 public:
  explicit Histogram(std::vector<double> upper_bounds_s);
  void Observe(double value_s);
  // Appends `name_bucket{labels,le="..."}`, `name_sum` and `name_count` lines.
  void Write(const std::string& name, const std::string& labels, std::string* out) const;

 private:
  std::vector<double> bounds_;
  std::vector<std::uint64_t> counts_;  // per bucket (not cumulative)
  double sum_ = 0;
  std::uint64_t count_ = 0;
};

class Metrics {
 public:
  // One HTTP request: `route` is the route pattern ("/v1/members/{id}"),
  // never the raw path, so that the label set stays bounded.
  void RecordRequest(const std::string& method, const std::string& route, int status, double seconds);
  // One identification by a worker (success or failure).
  void RecordIdentify(double seconds, bool ok);
  // One webhook delivery attempt.
  void RecordWebhookAttempt(bool ok);
  // A connection the router never saw a request of: `event` is a fixed
  // word ("refused_per_client_cap", "deadline_exceeded").
  void RecordConnectionEvent(const std::string& event);

  // The exposition text. `jobs_by_state` (state name -> count, read from
  // the database by the caller) becomes the gauge taut_jobs{state=...}.
  std::string Render(const std::map<std::string, std::int64_t>& jobs_by_state) const;

 private:
  mutable std::mutex mu_;
  std::map<std::string, std::uint64_t> requests_;     // key: method\troute\tstatus
  std::map<std::string, Histogram> request_latency_;  // key: route
  Histogram identify_latency_{{0.05, 0.1, 0.2, 0.5, 1, 2, 5, 10, 30, 60}};
  std::uint64_t identify_ok_ = 0, identify_failed_ = 0;
  std::uint64_t webhook_ok_ = 0, webhook_failed_ = 0;
  std::map<std::string, std::uint64_t> connection_events_;
};

}  // namespace taut::server
