// `taut report`: the inspection report of a structure (server/report.h) as
// print-ready HTML and its PDF, from the database file or from a running
// service.
//
//   taut report --db PATH --structure ID [--from DATE --to DATE]
//               [--author NAME] --out DIR
//   taut report --server URL --token TOKEN --structure ID ... --out DIR
//
// Writes DIR/inspection-report-<ID>.html and .pdf (headless Chromium,
// $TAUT_CHROMIUM or /usr/bin/chromium). Dates are ISO 8601 UTC; the period
// defaults to the 90 days before now.
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <ostream>

#include "server/cli.h"
#include "server/iso_time.h"
#include "server/report.h"
#include "storage/migrations.h"
#include "storage/repository.h"

// After Eigen (via server/cli.h): glibc's <resolv.h> defines _res.
#include <httplib.h>

namespace taut::server {

namespace {

struct ReportCliOptions {
  std::string db_path, server_url, token, from, to, author, out_dir;
  std::int64_t structure = 0;
};

int Run(const ReportCliOptions& o, std::ostream& out, std::ostream& err) {
  ReportOptions r;
  r.structure_id = o.structure;
  r.now_unix_ms = NowUnixMs();
  r.to_unix_ms = r.now_unix_ms + 1;
  if (!o.to.empty() && !ParseIsoUtc(o.to, &r.to_unix_ms)) {
    err << "taut report: --to " << o.to << ": not an ISO 8601 UTC time or date\n";
    return 2;
  }
  r.from_unix_ms = r.to_unix_ms - 90LL * 86'400'000;
  if (!o.from.empty() && !ParseIsoUtc(o.from, &r.from_unix_ms)) {
    err << "taut report: --from " << o.from << ": not an ISO 8601 UTC time or date\n";
    return 2;
  }
  r.author = o.author;
  std::string html;
  if (!o.db_path.empty()) {
    storage::Database db;
    if (auto s = storage::OpenAndMigrate(db, o.db_path); !s.ok()) {
      err << "taut report: " << o.db_path << ": " << s.message << "\n";
      return 1;
    }
    // The file holds every organisation; the structure says whose it is.
    std::string org;
    if (auto s =
            db.QueryText("SELECT organisation_id FROM structure WHERE deleted_at_unix_ms IS NULL AND id = " +
                             std::to_string(o.structure),
                         &org);
        !s.ok() || org.empty()) {
      err << "taut report: structure " << o.structure << " not found in " << o.db_path << "\n";
      return 1;
    }
    storage::Repository repo(db);
    if (Status s = BuildInspectionReport(repo, std::stoll(org), r, &html); !s.ok()) {
      err << "taut report: " << s.message << "\n";
      return 1;
    }
  } else {
    const std::string token =
        !o.token.empty() ? o.token : (std::getenv("TAUT_TOKEN") ? std::getenv("TAUT_TOKEN") : "");
    if (token.empty()) {
      err << "taut report: --server needs --token or TAUT_TOKEN (a read token)\n";
      return 2;
    }
    httplib::Client client(o.server_url);
    client.set_read_timeout(300, 0);
    client.set_default_headers({{"Authorization", "Bearer " + token}});
    const std::string path =
        "/v1/structures/" + std::to_string(o.structure) + "/report?from=" + FormatIsoUtc(r.from_unix_ms) +
        "&to=" + FormatIsoUtc(r.to_unix_ms) +
        (o.author.empty() ? "" : "&author=" + httplib::detail::encode_query_param(o.author));
    auto res = client.Get(path);
    if (!res) {
      err << "taut report: " << o.server_url << ": " << httplib::to_string(res.error()) << "\n";
      return 1;
    }
    if (res->status != 200) {
      err << "taut report: " << o.server_url << path << ": HTTP " << res->status << " " << res->body << "\n";
      return 1;
    }
    html = res->body;
  }
  std::error_code ec;
  std::filesystem::create_directories(o.out_dir, ec);
  const std::filesystem::path base =
      std::filesystem::path(o.out_dir) / ("inspection-report-" + std::to_string(o.structure));
  {
    std::ofstream f(base.string() + ".html");
    f << html;
    if (!f) {
      err << "taut report: cannot write " << base.string() << ".html\n";
      return 1;
    }
  }
  out << base.string() << ".html\n";
  if (Status s = PrintHtmlToPdf(html, base.string() + ".pdf"); !s.ok()) {
    err << "taut report: " << s.message << "\n";
    return 1;
  }
  out << base.string() << ".pdf\n";
  return 0;
}

}  // namespace

void RegisterReportCommand(CLI::App& app, CliContext* ctx) {
  auto o = std::make_shared<ReportCliOptions>();
  CLI::App* cmd =
      app.add_subcommand("report", "inspection report of a structure: print-ready HTML and its PDF");
  auto* db = cmd->add_option("--db", o->db_path, "the service's SQLite file");
  auto* server = cmd->add_option("--server", o->server_url, "a running service, e.g. http://127.0.0.1:8080");
  db->excludes(server);
  cmd->add_option("--token", o->token, "read token for --server (else $TAUT_TOKEN)");
  cmd->add_option("--structure", o->structure, "structure id")->required();
  cmd->add_option("--from", o->from, "start of the period, ISO 8601 UTC (default: 90 days before --to)");
  cmd->add_option("--to", o->to, "end of the period, exclusive (default: now)");
  cmd->add_option("--author", o->author, "name of the responsible engineer on the cover and signature block");
  cmd->add_option("--out", o->out_dir, "output directory")->required();
  cmd->callback([o, ctx] {
    if (o->db_path.empty() && o->server_url.empty()) {
      *ctx->err << "taut report: give --db PATH or --server URL\n";
      ctx->exit_code = 2;
      return;
    }
    ctx->exit_code = Run(*o, *ctx->out, *ctx->err);
  });
}

}  // namespace taut::server
