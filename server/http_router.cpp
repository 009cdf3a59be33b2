#include "server/http_router.h"

#include <algorithm>
#include <cmath>
#include <cstdlib>
#include <memory>

#include "server/iso_time.h"
#include "server/json_limits.h"
#include "server/safe_text.h"

// glibc's <resolv.h>, which httplib pulls in, defines the macro _res (a
// parameter name inside Eigen): include httplib after anything Eigen.
#include <httplib.h>

namespace taut::server {

using nlohmann::json;
using storage::Id;
using storage::StorageStatus;

[[noreturn]] void Fail(int status, std::string code, std::string message) {
  throw ApiError{status, std::move(code), std::move(message)};
}

// Maps a storage failure onto the HTTP status it means for the client.
void Check(const StorageStatus& s) {
  if (s.ok()) return;
  if (s.not_found()) Fail(404, "not-found", s.message);
  if (s.busy()) Fail(503, "unavailable", "the database stayed busy: " + s.message);
  if (s.unavailable()) Fail(503, "unavailable", "the database cannot be reached: " + s.message);
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

json Optional(const std::optional<double>& v) { return v ? json(*v) : json(nullptr); }

json ParseBodyJson(const std::string& body) {
  json j;
  if (Status s = ParseJsonBounded(body, &j); !s.ok()) Fail(400, "bad-request", "the body: " + s.message);
  if (!j.is_object()) Fail(400, "bad-request", "the body must be a JSON object");
  return j;
}

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
         std::string(name) + " = \"" + Excerpt(*text) +
             "\": not an ISO 8601 UTC time (e.g. 2026-11-20T10:00:00Z)");
  }
  return ms;
}

std::optional<double> QueryNumber(const httplib::Request& req, const char* name) {
  auto text = Query(req, name);
  if (!text) return std::nullopt;
  char* end = nullptr;
  const double v = std::strtod(text->c_str(), &end);
  if (text->empty() || end != text->c_str() + text->size() || !std::isfinite(v)) {
    Fail(400, "bad-request", std::string(name) + " = \"" + Excerpt(*text) + "\": not a finite number");
  }
  return v;
}

std::optional<Id> QueryId(const httplib::Request& req, const char* name) {
  auto text = Query(req, name);
  if (!text) return std::nullopt;
  if (text->empty() || text->size() > 18 || text->find_first_not_of("0123456789") != std::string::npos) {
    Fail(400, "bad-request", std::string(name) + " = \"" + Excerpt(*text) + "\": not an id");
  }
  return std::stoll(*text);
}

// ------------------------------------------------------------------ router

void Router::Add(const std::string& method, const std::string& pattern, storage::Role min_role,
                 Handler handler, bool auth, Condition when) {
  routes_.push_back(
      {method, pattern, Segments(pattern), auth, min_role, std::move(handler), std::move(when)});
}

const Route* Router::Find(const httplib::Request& req, std::vector<Id>* ids, std::string* allow) const {
  const std::string& method = req.method;
  const std::vector<std::string> segments = Segments(req.path);
  allow->clear();
  for (const Route& r : routes_) {
    if (!Match(r, segments, ids) || (r.when && !r.when(req))) continue;
    if (r.method == method) return &r;
    *allow += (allow->empty() ? "" : ", ") + r.method;
  }
  return nullptr;
}

std::vector<std::string> Router::Segments(const std::string& path) {
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
bool Router::Match(const Route& r, const std::vector<std::string>& path, std::vector<Id>* ids) {
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

}  // namespace taut::server
