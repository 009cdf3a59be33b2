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
    if (c == '\n' || c == '\t') c = ' ';
  return m;
}

int CodeOfSqlState(std::string_view state) {
  if (state == "23505") return SQLITE_CONSTRAINT_UNIQUE;
  if (state == "23503") return SQLITE_CONSTRAINT_FOREIGNKEY;
  if (state == "23514") return SQLITE_CONSTRAINT_CHECK;
  if (state == "23502") return SQLITE_CONSTRAINT_NOTNULL;
  if (state.substr(0, 2) == "23" || state == "P0001") return SQLITE_CONSTRAINT;
  if (state == "40001" || state == "40P01" || state == "55P03") return SQLITE_BUSY;
  if (state.substr(0, 2) == "08" || state == "57P01" || state == "57P02" || state == "57P03")
    return SQLITE_CANTOPEN;
  if (state.substr(0, 2) == "53") return SQLITE_FULL;  // insufficient resources (disk full, ...)
  return SQLITE_ERROR;
}

struct ResultDeleter {
  void operator()(PGresult* r) const { PQclear(r); }
};
using Result = std::unique_ptr<PGresult, ResultDeleter>;

}  // namespace

StorageStatus PgResultStatus(PGconn* conn, const PGresult* result) {
  if (result != nullptr &&
      (PQresultStatus(result) == PGRES_TUPLES_OK || PQresultStatus(result) == PGRES_COMMAND_OK))
    return {};
  if (result == nullptr || PQstatus(conn) == CONNECTION_BAD) {
    const std::string why = Trimmed(result != nullptr ? PQresultErrorMessage(result) : PQerrorMessage(conn));
    return StorageStatus::Unavailable("PostgreSQL connection lost: " + why);
  }
  const char* state = PQresultErrorField(result, PG_DIAG_SQLSTATE);
  std::string message = Trimmed(PQresultErrorMessage(result));
  if (state == nullptr) return {SQLITE_ERROR, message};
  return {CodeOfSqlState(state), std::string(state) + " " + message};
}

std::string PgPlaceholders(std::string_view sql) {
  std::string out;
  out.reserve(sql.size() + 8);
  char quote = 0;  // ' or " while inside a literal or quoted identifier
  for (std::size_t i = 0; i < sql.size(); ++i) {
    const char c = sql[i];
    if (quote != 0) {
      if (c == quote) quote = 0;  // a doubled quote closes and reopens: same result
      out += c;
    } else if (c == '\'' || c == '"') {
      quote = c;
      out += c;
    } else if (c == '?' && i + 1 < sql.size() && sql[i + 1] >= '0' && sql[i + 1] <= '9') {
      out += '$';
    } else {
      out += c;
    }
  }
  return out;
}

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
    StorageStatus s =
        StorageStatus::Unavailable("cannot connect to PostgreSQL: " + Trimmed(PQerrorMessage(conn_)));
    PQfinish(conn_);
    conn_ = nullptr;
    return s;
  }
  return SessionSettings();
}

StorageStatus PgConnection::SessionSettings() {
  return Exec("SET TIME ZONE 'UTC'; SET client_min_messages = warning");
}

bool PgConnection::InTransaction() const {
  if (conn_ == nullptr) return false;
  const PGTransactionStatusType t = PQtransactionStatus(conn_);
  return t == PQTRANS_INTRANS || t == PQTRANS_INERROR || t == PQTRANS_ACTIVE;
}

StorageStatus PgConnection::Reconnect() {
  if (conn_ == nullptr) return StorageStatus::Unavailable("PostgreSQL connection is not open");
  if (PQstatus(conn_) == CONNECTION_OK) return {};
  PQreset(conn_);
  if (PQstatus(conn_) != CONNECTION_OK)
    return StorageStatus::Unavailable("cannot reconnect to PostgreSQL: " + Trimmed(PQerrorMessage(conn_)));
  return SessionSettings();
}

StorageStatus PgConnection::Exec(const std::string& sql) {
  if (conn_ == nullptr) return {SQLITE_MISUSE, "PostgreSQL connection is not open"};
  Result r(PQexec(conn_, sql.c_str()));
  return PgResultStatus(conn_, r.get());
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
  if (StorageStatus s = PgResultStatus(conn_, r.get()); !s.ok()) return s;
  const int n = PQntuples(r.get()), m = PQnfields(r.get());
  rows->resize(n);
  for (int i = 0; i < n; ++i) {
    (*rows)[i].reserve(m);
    for (int j = 0; j < m; ++j) (*rows)[i].emplace_back(PQgetvalue(r.get(), i, j));
  }
  return {};
}

}  // namespace taut::storage
