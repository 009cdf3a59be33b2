// Routes of the asset-file features (member logbook, CSV exports, the
// organisation-wide triage, the inspection report). routes.cpp registers
// them before the core routes, so a route
// with a `when` condition (e.g. ?format=csv) answers instead of the core
// route of the same path when the condition holds; otherwise the core
// route answers as before.
//
// Handlers work as the core ones: the token and role are checked by the
// dispatcher before the handler runs; every repository call takes
// `organisation_id` (another organisation's id is a 404); RouteFail and
// RouteCheck throw the router's ApiError (http_router.h).
#pragma once

#include <cstdint>
#include <functional>
#include <string>
#include <vector>

#include "storage/repository.h"

namespace httplib {
struct Request;
struct Response;
}  // namespace httplib

namespace taut::server {

struct RouteCall {
  const httplib::Request& req;
  httplib::Response& res;
  storage::Repository& repo;
  storage::Id organisation_id;
  storage::Role role;
  std::vector<storage::Id> ids;  // the path's numeric captures, in order
  std::int64_t now_unix_ms;
  const std::string& body;  // the request body, read after the token and role checks
};

struct ExtraRoute {
  std::string method;   // "GET", "POST", ...
  std::string pattern;  // as http_api.cpp: "/v1/members/{id}/logbook"
  storage::Role min_role;
  std::function<void(RouteCall&)> handler;
  std::function<bool(const httplib::Request&)> when;  // empty: always
};

// Every route of the asset-file features (routes_logbook.cpp,
// csv_export.cpp, triage.cpp, report.cpp).
std::vector<ExtraRoute> AssetFileRoutes();

// Helpers for the handlers (routes_common.cpp).
[[noreturn]] void RouteFail(int status, std::string code, std::string message);
// Storage failure -> HTTP (not found 404, busy 503, constraint 409,
// misuse 422, else 500), as http_api.cpp maps them.
void RouteCheck(const storage::StorageStatus& s);
void SendJsonBody(httplib::Response& res, int status, const std::string& body);
// Any body, sent uncompressed (see SendUncompressed in http_api.cpp).
void SendBody(httplib::Response& res, int status, std::string text, const char* type);
// text/csv with a download file name.
void SendCsv(httplib::Response& res, const std::string& filename, std::string text);
// ?format=csv
bool WantsCsv(const httplib::Request& req);

}  // namespace taut::server
