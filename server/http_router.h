// The pieces every route of the v1 API is built from (internal to server/):
// the error contract, JSON and query helpers, the per-request Call and the
// route table. The request flow is drawn in http_api.h; the routes of each
// resource live in routes_<resource>.cpp and are listed in routes.cpp.
//
// Adding routes: write `void RegisterXxxRoutes(Router& r)` in a new
// routes_xxx.cpp (handlers are `void Handler(Call&)`), declare it in
// routes.h and add one line to RegisterRoutes (routes.cpp).
#pragma once

#include <cstdint>
#include <functional>
#include <nlohmann/json.hpp>
#include <optional>
#include <string>
#include <vector>

#include "server/auth.h"
#include "server/http_api.h"
#include "storage/database.h"
#include "storage/repository.h"

namespace httplib {
struct Request;
struct Response;
}  // namespace httplib

namespace taut::server {

// ------------------------------------------------------------------ errors

// Every error body is {"error": {"code", "message"}}. Handlers throw
// ApiError; the dispatcher (http_api.cpp) is the one place that catches.
struct ApiError {
  int status;
  std::string code;
  std::string message;
};

[[noreturn]] void Fail(int status, std::string code, std::string message);

// Maps a storage failure onto the HTTP status it means for the client
// (not found 404, busy 503, constraint 409, misuse 422, else 500).
void Check(const storage::StorageStatus& s);

nlohmann::json ErrorBody(const std::string& code, const std::string& message);

// ---------------------------------------------------------------- responses

// Sends `text` without cpp-httplib's automatic compression (see the
// definition for why); error statuses keep set_content.
void SendUncompressed(httplib::Response& res, int status, std::string text, const char* type);
void SendJson(httplib::Response& res, int status, const nlohmann::json& body);

// ------------------------------------------------------------ JSON helpers

nlohmann::json Optional(const std::optional<double>& v);
// The body as a JSON object (nesting bounded: json_limits.h), else 400.
nlohmann::json ParseBodyJson(const std::string& body);

// ------------------------------------------------------- query parameters

std::optional<std::string> Query(const httplib::Request& req, const char* name);
// An ISO 8601 UTC time (iso_time.h), else 400.
std::optional<std::int64_t> QueryTime(const httplib::Request& req, const char* name);
// A finite number, else 400.
std::optional<double> QueryNumber(const httplib::Request& req, const char* name);
// 1..18 digits, else 400.
std::optional<storage::Id> QueryId(const httplib::Request& req, const char* name);

// -------------------------------------------------------------- the routes

// One request as a handler sees it: authenticated (when the route asks),
// with a database connection of its own for the request's duration.
struct Call {
  const httplib::Request& req;
  httplib::Response& res;
  storage::Database& db;
  storage::Repository& repo;
  Principal who;
  std::vector<storage::Id> ids;  // the path's numeric captures, in order
  std::int64_t now_unix_ms;
  const ServeOptions& options;  // metrics always set
  const std::string& body;      // the request body (at most options.max_body_bytes)
};

using Handler = std::function<void(Call&)>;
// A route with a condition answers only when it holds (e.g. ?format=csv);
// otherwise the search goes on to later routes of the same path.
using Condition = std::function<bool(const httplib::Request&)>;

struct Route {
  std::string method;
  std::string pattern;                // "/v1/members/{id}": the metrics label
  std::vector<std::string> segments;  // "v1", "members", "{id}"
  bool auth;
  storage::Role min_role;
  Handler handler;
  Condition when;  // empty: always
};

class Router {
 public:
  // A "{name}" segment of the pattern matches 1..18 digits (an id) and is
  // captured; a last segment "**" matches the rest of the path, zero or
  // more segments; every other segment matches itself. `auth` false: no
  // token needed (min_role is then ignored).
  void Add(const std::string& method, const std::string& pattern, storage::Role min_role, Handler handler,
           bool auth = true, Condition when = {});

  // The route for the request's method and path (first match in
  // registration order whose condition holds), or nullptr; then *allow
  // lists the methods of the routes whose pattern matched the path ("" when
  // none: 404, else 405).
  const Route* Find(const httplib::Request& req, std::vector<storage::Id>* ids, std::string* allow) const;

  // "/v1/members/12" -> {"v1", "members", "12"}.
  static std::vector<std::string> Segments(const std::string& path);

 private:
  static bool Match(const Route& r, const std::vector<std::string>& path, std::vector<storage::Id>* ids);
  std::vector<Route> routes_;
};

}  // namespace taut::server
