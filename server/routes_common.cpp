#include <cstdio>
#include <memory>

#include "server/extra_routes.h"
#include "server/http_router.h"
#include "server/iso_time.h"
#include "server/routes.h"

// After everything that may include Eigen: glibc's <resolv.h>, which
// httplib pulls in, defines the macro _res (see http_api.cpp).
#include <httplib.h>

namespace taut::server {

// The route lists of each feature (their own files).
std::vector<ExtraRoute> LogbookRoutes();
std::vector<ExtraRoute> CsvRoutes();
std::vector<ExtraRoute> TriageRoutes();
std::vector<ExtraRoute> ReportRoutes();

std::vector<ExtraRoute> AssetFileRoutes() {
  std::vector<ExtraRoute> all;
  for (auto list : {LogbookRoutes(), CsvRoutes(), TriageRoutes(), ReportRoutes()}) {
    for (auto& r : list) all.push_back(std::move(r));
  }
  return all;
}

// The router's own error contract (http_router.h): one mapping of storage
// failures, one error body.
void RouteFail(int status, std::string code, std::string message) {
  Fail(status, std::move(code), std::move(message));
}

void RouteCheck(const storage::StorageStatus& s) { Check(s); }

void RegisterAssetFileRoutes(Router& r) {
  for (ExtraRoute& x : AssetFileRoutes()) {
    r.Add(
        x.method, x.pattern, x.min_role,
        [h = std::move(x.handler)](Call& c) {
          RouteCall rc{c.req, c.res, c.repo, c.who.organisation_id, c.who.role, c.ids, c.now_unix_ms, c.body};
          h(rc);
        },
        /*auth=*/true, std::move(x.when));
  }
}

// Sized content providers are sent uncompressed (see SendUncompressed in
// http_api.cpp for why).
void SendBody(httplib::Response& res, int status, std::string text, const char* type) {
  res.status = status;
  auto shared = std::make_shared<const std::string>(std::move(text));
  res.set_content_provider(shared->size(), type,
                           [shared](std::size_t offset, std::size_t length, httplib::DataSink& sink) {
                             return sink.write(shared->data() + offset, length);
                           });
}

void SendJsonBody(httplib::Response& res, int status, const std::string& body) {
  SendBody(res, status, body, "application/json");
}

void SendCsv(httplib::Response& res, const std::string& filename, std::string text) {
  res.set_header("Content-Disposition", "attachment; filename=\"" + filename + "\"");
  SendBody(res, 200, std::move(text), "text/csv; charset=utf-8");
}

bool WantsCsv(const httplib::Request& req) {
  return req.has_param("format") && req.get_param_value("format") == "csv";
}

}  // namespace taut::server
