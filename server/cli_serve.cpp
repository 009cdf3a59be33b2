// `taut serve` (the HTTP API with its job workers) and `taut token create`.
#include <signal.h>

#include <iostream>
#include <ostream>
#include <vector>

#include "server/auth.h"
#include "server/cli.h"
#include "server/http_api.h"
#include "server/iso_time.h"
#include "server/worker.h"
#include "storage/migrations.h"
#include "storage/postgres.h"
#include "storage/repository.h"

namespace taut::server {

namespace {

struct ServeCliOptions {
  std::string db_path;
  std::string listen = "127.0.0.1:8080";
  int workers = kDefaultWorkers;
  std::size_t max_body_mib = kDefaultMaxBody_mib;
  int header_deadline_s = kDefaultHeaderDeadline_s;
  int request_deadline_s = kDefaultRequestDeadline_s;
  int max_connections_per_client = kDefaultMaxConnectionsPerClient;
  int job_time_limit_s = kDefaultJobTimeLimit_s;
  int job_lease_s = 30;
  std::vector<std::string> webhook_allow;
  bool quiet = false;
};

// "HOST:PORT" -> host, port (0..65535). The last colon splits, so an IPv6
// literal in brackets ("[::1]:8080") works.
bool SplitListen(const std::string& listen, std::string* host, int* port) {
  const auto colon = listen.rfind(':');
  if (colon == std::string::npos || colon == 0 || colon + 1 == listen.size()) return false;
  *host = listen.substr(0, colon);
  if (host->size() > 2 && host->front() == '[' && host->back() == ']')
    *host = host->substr(1, host->size() - 2);
  const std::string p = listen.substr(colon + 1);
  if (p.size() > 5 || p.find_first_not_of("0123456789") != std::string::npos) return false;
  *port = std::stoi(p);
  return *port <= 65535;
}

// A postgresql:// URI must carry no password (it would show in the process
// list and the unit file): one line naming the rule, exit code 2.
bool CheckDbOption(const std::string& db, const char* command, std::ostream& err) {
  if (!storage::IsPostgresUri(db)) return true;
  if (storage::StorageStatus s = storage::CheckConnectionUri(db); !s.ok()) {
    err << command << ": --db: " << s.message << "\n";
    return false;
  }
  return true;
}

int RunServe(const ServeCliOptions& o, std::ostream& out, std::ostream& err) {
  if (!CheckDbOption(o.db_path, "taut serve", err)) return 2;
  ServeOptions so;
  so.db_path = o.db_path;
  if (!SplitListen(o.listen, &so.host, &so.port)) {
    err << "taut serve: --listen \"" << o.listen << "\": expected HOST:PORT (port 0 picks a free one)\n";
    return 2;
  }
  so.max_body_bytes = o.max_body_mib << 20;
  so.header_deadline_s = o.header_deadline_s;
  so.request_deadline_s = o.request_deadline_s;
  so.max_connections_per_client = o.max_connections_per_client;
  for (const std::string& text : o.webhook_allow) {
    Cidr cidr;
    if (!ParseCidr(text, &cidr)) {
      err << "taut serve: --webhook-allow \"" << text
          << "\": expected an address range like 10.0.0.0/8 or fd00::/8\n";
      return 2;
    }
    so.webhook_policy.allow.push_back(cidr);
  }
  so.access_log = o.quiet ? nullptr : &std::cerr;
  Metrics metrics;
  so.metrics = &metrics;

  BlockStopSignals();  // before the threads below start

  WorkerOptions wo;
  wo.db_path = o.db_path;
  wo.workers = o.workers;
  wo.job_time_limit = std::chrono::seconds(o.job_time_limit_s);
  wo.job_lease = std::chrono::seconds(o.job_lease_s);
  wo.webhook_policy = so.webhook_policy;
  wo.log = o.quiet ? nullptr : &std::cerr;
  WorkerPool workers(wo, &metrics);
  so.on_job_queued = [&workers] { workers.Notify(); };
  ApiServer api(so);
  // The API migrates the database before the workers open it.
  if (Status s = api.Start(); !s.ok()) {
    err << "taut serve: " << s.message << "\n";
    return 1;
  }
  if (Status s = workers.Start(); !s.ok()) {
    err << "taut serve: " << s.message << "\n";
    return 1;
  }
  out << "taut serve: listening on http://" << so.host << ":" << api.port() << std::endl;
  const int signal_number = WaitForStopSignal();
  if (!o.quiet) err << "taut serve: signal " << signal_number << ", finishing requests and running jobs\n";
  // Graceful order: no new requests, then running jobs finish (queued ones
  // stay queued for the next start).
  api.Stop();
  workers.Stop();
  out << "taut serve: stopped" << std::endl;
  return 0;
}

struct TokenCliOptions {
  std::string db_path, org, role, label;
  storage::Id id = 0;
};

// Opens the database and finds the organisation by name (not created).
bool OpenOrganisation(const TokenCliOptions& o, const char* what, storage::Database& db,
                      storage::Organisation* org, std::ostream& err) {
  if (!CheckDbOption(o.db_path, (std::string("taut token ") + what).c_str(), err)) return false;
  if (storage::StorageStatus s = storage::OpenAndMigrate(db, o.db_path); !s.ok()) {
    err << "taut token " << what << ": " << o.db_path << ": " << s.message << "\n";
    return false;
  }
  storage::Repository repo(db);
  if (storage::StorageStatus s = repo.FindOrganisationByName(o.org, org); !s.ok()) {
    err << "taut token " << what << ": organisation \"" << o.org << "\": " << s.message << "\n";
    return false;
  }
  return true;
}

// One line per token: id, role, created, revoked (or "active"), public id, label.
int RunTokenList(const TokenCliOptions& o, std::ostream& out, std::ostream& err) {
  storage::Database db;
  storage::Organisation org;
  if (!OpenOrganisation(o, "list", db, &org, err)) return 1;
  storage::Repository repo(db);
  std::vector<storage::Token> tokens;
  if (storage::StorageStatus s = repo.ListTokens(org.id, &tokens); !s.ok()) {
    err << "taut token list: " << s.message << "\n";
    return 1;
  }
  out << "id\trole\tcreated_at\trevoked_at\tpublic_id\tlabel\n";
  for (const auto& t : tokens) {
    out << t.id << "\t" << storage::RoleName(t.role) << "\t" << FormatIsoUtc(t.created_at_unix_ms) << "\t"
        << (t.revoked_at_unix_ms ? FormatIsoUtc(*t.revoked_at_unix_ms) : std::string("active")) << "\t"
        << t.public_id << "\t" << t.label << "\n";
  }
  return 0;
}

int RunTokenRevoke(const TokenCliOptions& o, std::ostream& out, std::ostream& err) {
  storage::Database db;
  storage::Organisation org;
  if (!OpenOrganisation(o, "revoke", db, &org, err)) return 1;
  storage::Repository repo(db);
  if (storage::StorageStatus s = repo.RevokeToken(org.id, o.id, NowUnixMs()); !s.ok()) {
    err << "taut token revoke: " << s.message << "\n";
    return 1;
  }
  out << "token " << o.id << " revoked\n";
  return 0;
}

int RunTokenCreate(const TokenCliOptions& o, std::ostream& out, std::ostream& err) {
  if (!CheckDbOption(o.db_path, "taut token create", err)) return 2;
  storage::Database db;
  if (storage::StorageStatus s = storage::OpenAndMigrate(db, o.db_path); !s.ok()) {
    err << "taut token create: " << o.db_path << ": " << s.message << "\n";
    return 1;
  }
  storage::Repository repo(db);
  storage::Organisation org;
  if (storage::StorageStatus s = repo.FindOrganisationByName(o.org, &org); s.not_found()) {
    if (storage::StorageStatus c = repo.CreateOrganisation(o.org, NowUnixMs(), &org.id); !c.ok()) {
      err << "taut token create: organisation \"" << o.org << "\": " << c.message << "\n";
      return 1;
    }
  } else if (!s.ok()) {
    err << "taut token create: " << s.message << "\n";
    return 1;
  }
  const storage::Role role = o.role == "admin"    ? storage::Role::kAdmin
                             : o.role == "upload" ? storage::Role::kUpload
                                                  : storage::Role::kRead;
  std::string token;
  if (storage::StorageStatus s = IssueToken(repo, org.id, role, o.label, NowUnixMs(), &token); !s.ok()) {
    err << "taut token create: " << s.message << "\n";
    return 1;
  }
  out << token << "\n";
  return 0;
}

sigset_t StopSignals() {
  sigset_t set;
  sigemptyset(&set);
  sigaddset(&set, SIGINT);
  sigaddset(&set, SIGTERM);
  return set;
}

}  // namespace

void BlockStopSignals() {
  const sigset_t set = StopSignals();
  pthread_sigmask(SIG_BLOCK, &set, nullptr);
}

int WaitForStopSignal() {
  const sigset_t set = StopSignals();
  int signal_number = 0;
  sigwait(&set, &signal_number);
  return signal_number;
}

void RegisterServeCommand(CLI::App& app, CliContext* ctx) {
  auto o = std::make_shared<ServeCliOptions>();
  CLI::App* cmd =
      app.add_subcommand("serve", "Run the HTTP API and the identification workers (docs/API.md)");
  // Every setting can also come from the configuration file (`taut serve
  // --config FILE`: the root option of cli.cpp, reached through fallthrough;
  // keys in a [serve] section, deploy/taut.conf.example) or from a TAUT_*
  // environment variable (a systemd EnvironmentFile). The command line wins
  // over the file, the file over the environment (CLI11 reads the file first
  // and takes a variable only for an option still unset).
  cmd->fallthrough();
  cmd->add_option("--db", o->db_path,
                  "SQLite database file, or postgresql://USER@HOST:PORT/DB for PostgreSQL (password from "
                  "PGPASSWORD or ~/.pgpass, never in the URI); created or migrated if needed")
      ->required()
      ->envname("TAUT_DB");
  cmd->add_option("--listen", o->listen, "HOST:PORT to listen on; port 0 picks a free port")
      ->envname("TAUT_LISTEN")
      ->capture_default_str();
  cmd->add_option("--workers", o->workers, "identification worker threads")
      ->check(CLI::Range(1, 64))
      ->envname("TAUT_WORKERS")
      ->capture_default_str();
  cmd->add_option("--max-body", o->max_body_mib, "largest request body [MiB] (larger uploads get 413)")
      ->check(CLI::Range(1, 4096))
      ->envname("TAUT_MAX_BODY")
      ->capture_default_str();
  cmd->add_option("--header-deadline", o->header_deadline_s,
                  "seconds a client has to send a request's line and headers")
      ->check(CLI::Range(1, 600))
      ->capture_default_str();
  cmd->add_option("--request-deadline", o->request_deadline_s,
                  "seconds a whole request may take (body upload, handling, response)")
      ->check(CLI::Range(1, 3600))
      ->capture_default_str();
  cmd->add_option("--max-connections-per-client", o->max_connections_per_client,
                  "open connections one address may hold (more get 503); 0: no cap (behind a reverse proxy)")
      ->check(CLI::Range(0, 100000))
      ->capture_default_str();
  cmd->add_option("--job-time-limit", o->job_time_limit_s,
                  "seconds one identification may run before its job fails with that reason")
      ->check(CLI::Range(1, 86400))
      ->capture_default_str();
  cmd->add_option("--job-lease", o->job_lease_s,
                  "seconds a running job stays claimed without a heartbeat; after that another replica "
                  "on the same database runs it again (the heartbeat renews it every third of this)")
      ->check(CLI::Range(1, 3600))
      ->envname("TAUT_JOB_LEASE")
      ->capture_default_str();
  cmd->add_option("--webhook-allow", o->webhook_allow,
                  "address range (CIDR) webhooks may point to although it is not public, e.g. 10.1.0.0/16; "
                  "repeatable (loopback, private and link-local are refused otherwise)");
  cmd->add_flag("--quiet", o->quiet, "no access log on stderr")->envname("TAUT_QUIET");
  cmd->callback([o, ctx] { ctx->exit_code = RunServe(*o, *ctx->out, *ctx->err); });

  auto t = std::make_shared<TokenCliOptions>();
  CLI::App* token = app.add_subcommand("token", "API tokens");
  token->require_subcommand(1);
  CLI::App* create = token->add_subcommand(
      "create", "Create an API token (printed once; the database keeps only a salted hash)");
  create->add_option("--db", t->db_path, "SQLite database file or postgresql:// URI (as taut serve)")
      ->required();
  create->add_option("--org", t->org, "organisation name (created if it does not exist)")->required();
  create->add_option("--role", t->role, "read, upload or admin")
      ->required()
      ->check(CLI::IsMember({"read", "upload", "admin"}));
  create->add_option("--label", t->label, "free text to recognise the token by");
  create->callback([t, ctx] { ctx->exit_code = RunTokenCreate(*t, *ctx->out, *ctx->err); });
  CLI::App* list = token->add_subcommand("list", "List an organisation's tokens (never their secrets)");
  list->add_option("--db", t->db_path, "SQLite database file or postgresql:// URI (as taut serve)")
      ->required();
  list->add_option("--org", t->org, "organisation name")->required();
  list->callback([t, ctx] { ctx->exit_code = RunTokenList(*t, *ctx->out, *ctx->err); });
  CLI::App* revoke = token->add_subcommand("revoke", "Revoke a token at once (requests with it get 401)");
  revoke->add_option("--db", t->db_path, "SQLite database file or postgresql:// URI (as taut serve)")
      ->required();
  revoke->add_option("--org", t->org, "organisation name")->required();
  revoke->add_option("--id", t->id, "token id (first column of taut token list)")->required();
  revoke->callback([t, ctx] { ctx->exit_code = RunTokenRevoke(*t, *ctx->out, *ctx->err); });
}

}  // namespace taut::server
