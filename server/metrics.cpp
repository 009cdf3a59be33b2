#include "server/metrics.h"

#include <cstdio>

namespace taut::server {

namespace {

// Request latency buckets [s]: the API's targets are 5 ms (queries) and 30 ms
// (uploads); the upper buckets catch slow outliers.
const std::vector<double> kRequestBuckets_s = {0.001, 0.0025, 0.005, 0.01, 0.025, 0.05,
                                               0.1,   0.25,   0.5,   1,    2.5};

std::string Number(double v) {
  char buf[64];
  std::snprintf(buf, sizeof buf, "%.9g", v);
  return buf;
}

// Label values escape backslash, double quote and line feed (exposition format).
std::string Escape(const std::string& s) {
  std::string out;
  for (char c : s) {
    if (c == '\\' || c == '"') {
      out += '\\';
      out += c;
    } else if (c == '\n') {
      out += "\\n";
    } else {
      out += c;
    }
  }
  return out;
}

}  // namespace

Histogram::Histogram(std::vector<double> upper_bounds_s)
    : bounds_(std::move(upper_bounds_s)), counts_(bounds_.size() + 1, 0) {}

void Histogram::Observe(double value_s) {
  std::size_t i = 0;
  while (i < bounds_.size() && value_s > bounds_[i]) ++i;
  ++counts_[i];
  sum_ += value_s;
  ++count_;
}

void Histogram::Write(const std::string& name, const std::string& labels, std::string* out) const {
  const std::string sep = labels.empty() ? "" : ",";
  std::uint64_t cumulative = 0;
  for (std::size_t i = 0; i <= bounds_.size(); ++i) {
    cumulative += counts_[i];
    const std::string le = i < bounds_.size() ? Number(bounds_[i]) : "+Inf";
    *out += name + "_bucket{" + labels + sep + "le=\"" + le + "\"} " + std::to_string(cumulative) + "\n";
  }
  const std::string braces = labels.empty() ? "" : "{" + labels + "}";
  *out += name + "_sum" + braces + " " + Number(sum_) + "\n";
  *out += name + "_count" + braces + " " + std::to_string(count_) + "\n";
}

void Metrics::RecordRequest(const std::string& method, const std::string& route, int status, double seconds) {
  std::lock_guard<std::mutex> lock(mu_);
  ++requests_[method + "\t" + route + "\t" + std::to_string(status)];
  auto it = request_latency_.find(route);
  if (it == request_latency_.end()) it = request_latency_.emplace(route, Histogram(kRequestBuckets_s)).first;
  it->second.Observe(seconds);
}

void Metrics::RecordIdentify(double seconds, bool ok) {
  std::lock_guard<std::mutex> lock(mu_);
  identify_latency_.Observe(seconds);
  ++(ok ? identify_ok_ : identify_failed_);
}

void Metrics::RecordWebhookAttempt(bool ok) {
  std::lock_guard<std::mutex> lock(mu_);
  ++(ok ? webhook_ok_ : webhook_failed_);
}

void Metrics::RecordConnectionEvent(const std::string& event) {
  std::lock_guard<std::mutex> lock(mu_);
  ++connection_events_[event];
}

std::string Metrics::Render(const std::map<std::string, std::int64_t>& jobs_by_state) const {
  std::lock_guard<std::mutex> lock(mu_);
  std::string out;
  out += "# HELP taut_http_requests_total HTTP requests by method, route pattern and status.\n";
  out += "# TYPE taut_http_requests_total counter\n";
  for (const auto& [key, n] : requests_) {
    const auto t1 = key.find('\t'), t2 = key.find('\t', t1 + 1);
    out += "taut_http_requests_total{method=\"" + Escape(key.substr(0, t1)) + "\",route=\"" +
           Escape(key.substr(t1 + 1, t2 - t1 - 1)) + "\",status=\"" + key.substr(t2 + 1) + "\"} " +
           std::to_string(n) + "\n";
  }
  out += "# HELP taut_http_request_duration_seconds Time from request parsed to response ready.\n";
  out += "# TYPE taut_http_request_duration_seconds histogram\n";
  for (const auto& [route, h] : request_latency_) {
    h.Write("taut_http_request_duration_seconds", "route=\"" + Escape(route) + "\"", &out);
  }
  out += "# HELP taut_jobs Identification jobs by state.\n# TYPE taut_jobs gauge\n";
  for (const auto& [state, n] : jobs_by_state) {
    out += "taut_jobs{state=\"" + Escape(state) + "\"} " + std::to_string(n) + "\n";
  }
  out += "# HELP taut_identify_duration_seconds Wall time of one identification job.\n";
  out += "# TYPE taut_identify_duration_seconds histogram\n";
  identify_latency_.Write("taut_identify_duration_seconds", "", &out);
  out += "# HELP taut_identify_total Identification jobs finished, by outcome.\n";
  out += "# TYPE taut_identify_total counter\n";
  out += "taut_identify_total{outcome=\"done\"} " + std::to_string(identify_ok_) + "\n";
  out += "taut_identify_total{outcome=\"failed\"} " + std::to_string(identify_failed_) + "\n";
  out += "# HELP taut_webhook_attempts_total Webhook delivery attempts, by outcome.\n";
  out += "# TYPE taut_webhook_attempts_total counter\n";
  out += "taut_webhook_attempts_total{outcome=\"ok\"} " + std::to_string(webhook_ok_) + "\n";
  out += "taut_webhook_attempts_total{outcome=\"failed\"} " + std::to_string(webhook_failed_) + "\n";
  out += "# HELP taut_http_connection_events_total Connections closed before the router saw a request.\n";
  out += "# TYPE taut_http_connection_events_total counter\n";
  for (const auto& [event, n] : connection_events_) {
    out += "taut_http_connection_events_total{event=\"" + Escape(event) + "\"} " + std::to_string(n) + "\n";
  }
  return out;
}

}  // namespace taut::server
