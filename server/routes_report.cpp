// The inspection report over HTTP (docs/API.md "Inspection report"):
//   GET /v1/structures/{id}/report[?from&to&author&format=pdf]   read
// HTML (print-ready, self-contained) by default; format=pdf prints it with
// the server's headless Chromium (503 when there is none).
#include <httplib.h>
#include <unistd.h>

#include <filesystem>
#include <fstream>
#include <sstream>

#include "server/extra_routes.h"
#include "server/iso_time.h"
#include "server/report.h"

namespace taut::server {

namespace {

inline constexpr std::int64_t kDefaultReportWindow_ms = 90LL * 86'400'000;

std::int64_t TimeParam(const httplib::Request& req, const char* name, std::int64_t fallback) {
  if (!req.has_param(name)) return fallback;
  std::int64_t ms = 0;
  if (!ParseIsoUtc(req.get_param_value(name), &ms)) {
    RouteFail(400, "bad-request", std::string(name) + ": not an ISO 8601 UTC time or date");
  }
  return ms;
}

void Report(RouteCall& c) {
  storage::Structure st;
  RouteCheck(c.repo.GetStructure(c.organisation_id, c.ids[0], &st));
  ReportOptions o;
  o.structure_id = st.id;
  o.to_unix_ms = TimeParam(c.req, "to", c.now_unix_ms + 1);
  o.from_unix_ms = TimeParam(c.req, "from", o.to_unix_ms - kDefaultReportWindow_ms);
  if (o.from_unix_ms >= o.to_unix_ms) RouteFail(400, "bad-request", "from must be before to");
  o.author = c.req.has_param("author") ? c.req.get_param_value("author") : "";
  if (o.author.size() > 200) RouteFail(400, "bad-request", "author: at most 200 characters");
  o.now_unix_ms = c.now_unix_ms;
  std::string html;
  if (Status s = BuildInspectionReport(c.repo, c.organisation_id, o, &html); !s.ok()) {
    RouteFail(500, "internal", s.message);
  }
  const std::string name = "inspection-report-" + std::to_string(st.id);
  const std::string format = c.req.has_param("format") ? c.req.get_param_value("format") : "html";
  if (format == "html") {
    c.res.set_header("Content-Disposition", "inline; filename=\"" + name + ".html\"");
    return SendBody(c.res, 200, std::move(html), "text/html; charset=utf-8");
  }
  if (format != "pdf") RouteFail(400, "bad-request", "format = \"" + format + "\": must be html or pdf");
  const std::string pdf =
      (std::filesystem::temp_directory_path() /
       (name + "-" + std::to_string(::getpid()) + "-" + std::to_string(c.now_unix_ms) + ".pdf"))
          .string();
  if (Status s = PrintHtmlToPdf(html, pdf); !s.ok()) RouteFail(503, "unavailable", s.message);
  std::ifstream in(pdf, std::ios::binary);
  std::stringstream bytes;
  bytes << in.rdbuf();
  std::filesystem::remove(pdf);
  c.res.set_header("Content-Disposition", "attachment; filename=\"" + name + ".pdf\"");
  SendBody(c.res, 200, bytes.str(), "application/pdf");
}

}  // namespace

std::vector<ExtraRoute> ReportRoutes() {
  return {{"GET", "/v1/structures/{id}/report", storage::Role::kRead, Report, {}}};
}

}  // namespace taut::server
