#include "storage/postgres.h"

#include <memory>
#include <utility>

namespace taut::storage {
namespace {

// libpq's PQerrorMessage ends with a newline; a status message is one line.
std::string Trimmed(const char* message) {
  std::string m = message ? message : "";
  while (!m.empty() && (m.back() == '\n' || m.back() == ' ')) m.pop_back();
  for (char& c : m)
    if (c == '\n') c = ' ';
  return m;
}

StorageStatus ResultStatus(PGconn* conn, PGresult* result, ExecStatusType expected) {
  if (result != nullptr && PQresultStatus(result) == expected) return {};
  if (result == nullptr) return {SQLITE_ERROR, Trimmed(PQerrorMessage(conn))};
  const char* state = PQresultErrorField(result, PG_DIAG_SQLSTATE);
  std::string message = Trimmed(PQresultErrorMessage(result));
  if (state != nullptr) message = std::string(state) + " " + message;
  return {SQLITE_ERROR, message};
}

struct ResultDeleter {
  void operator()(PGresult* r) const { PQclear(r); }
};
using Result = std::unique_ptr<PGresult, ResultDeleter>;

}  // namespace

bool IsPostgresUri(const std::string& db) {
  return db.rfind("postgresql://", 0) == 0 || db.rfind("postgres://", 0) == 0;
}

StorageStatus CheckConnectionUri(const std::string& uri) {
  if (!IsPostgresUri(uri))
    return {SQLITE_MISUSE, "a PostgreSQL database is named by a postgresql://USER@HOST:PORT/DB URI"};
  char* error = nullptr;
  PQconninfoOption* options = PQconninfoParse(uri.c_str(), &error);
  if (options == nullptr) {
    StorageStatus s{SQLITE_MISUSE, "not a valid connection URI: " + Trimmed(error)};
    PQfreemem(error);
    return s;
  }
  StorageStatus s;
  for (PQconninfoOption* o = options; o->keyword != nullptr; ++o) {
    if (std::string(o->keyword) == "password" && o->val != nullptr && o->val[0] != '\0') {
      s = {SQLITE_MISUSE,
           "the connection URI carries a password; give it in PGPASSWORD or ~/.pgpass instead, never on "
           "the command line"};
    }
  }
  PQconninfoFree(options);
  return s;
}

PgConnection::~PgConnection() {
  if (conn_ != nullptr) PQfinish(conn_);
}

PgConnection::PgConnection(PgConnection&& other) noexcept : conn_(std::exchange(other.conn_, nullptr)) {}

PgConnection& PgConnection::operator=(PgConnection&& other) noexcept {
  if (this != &other) {
    if (conn_ != nullptr) PQfinish(conn_);
    conn_ = std::exchange(other.conn_, nullptr);
  }
  return *this;
}

StorageStatus PgConnection::Open(const std::string& uri) {
  if (StorageStatus s = CheckConnectionUri(uri); !s.ok()) return s;
  if (conn_ != nullptr) PQfinish(conn_);
  // Keywords given beside the URI (expand_dbname = 1 reads the URI first,
  // later keywords override): a bounded connect and a fixed application
  // name that the server's pg_stat_activity shows.
  const std::string timeout = std::to_string(kConnectTimeout_s);
  const char* keywords[] = {"dbname", "connect_timeout", "application_name", nullptr};
  const char* values[] = {uri.c_str(), timeout.c_str(), "taut", nullptr};
  conn_ = PQconnectdbParams(keywords, values, /*expand_dbname=*/1);
  if (conn_ == nullptr) return {SQLITE_NOMEM, "libpq could not allocate a connection"};
  if (PQstatus(conn_) != CONNECTION_OK) {
    StorageStatus s{SQLITE_CANTOPEN, "cannot connect to PostgreSQL: " + Trimmed(PQerrorMessage(conn_))};
    PQfinish(conn_);
    conn_ = nullptr;
    return s;
  }
  return Exec("SET TIME ZONE 'UTC'; SET client_min_messages = warning");
}

StorageStatus PgConnection::Exec(const std::string& sql) {
  if (conn_ == nullptr) return {SQLITE_MISUSE, "PostgreSQL connection is not open"};
  Result r(PQexec(conn_, sql.c_str()));
  if (r && PQresultStatus(r.get()) == PGRES_TUPLES_OK) return {};
  return ResultStatus(conn_, r.get(), PGRES_COMMAND_OK);
}

StorageStatus PgConnection::Query(const std::string& sql, const std::vector<std::string>& params,
                                  std::vector<std::vector<std::string>>* rows) {
  rows->clear();
  if (conn_ == nullptr) return {SQLITE_MISUSE, "PostgreSQL connection is not open"};
  std::vector<const char*> values;
  values.reserve(params.size());
  for (const std::string& p : params) values.push_back(p.c_str());
  Result r(PQexecParams(conn_, sql.c_str(), static_cast<int>(values.size()), nullptr, values.data(), nullptr,
                        nullptr, /*resultFormat=*/0));
  if (r && PQresultStatus(r.get()) == PGRES_COMMAND_OK) return {};
  if (StorageStatus s = ResultStatus(conn_, r.get(), PGRES_TUPLES_OK); !s.ok()) return s;
  const int n = PQntuples(r.get()), m = PQnfields(r.get());
  rows->resize(n);
  for (int i = 0; i < n; ++i) {
    (*rows)[i].reserve(m);
    for (int j = 0; j < m; ++j) (*rows)[i].emplace_back(PQgetvalue(r.get(), i, j));
  }
  return {};
}

}  // namespace taut::storage
