// A PostgreSQL connection through libpq, for the second storage backend
// (a portfolio served by several replicas sharing one database;
// docs/OPERATIONS.md section 2).
//
// Like the SQLite side (database.h) nothing here throws: every call returns
// a StorageStatus. The repositories are shared by both backends, so
// PostgreSQL failures are carried with the SQLite codes the callers already
// test (PostgreSQL 15 documentation, Appendix A "PostgreSQL Error Codes"):
//   SQLITE_CANTOPEN  the server cannot be reached, refuses the login or the
//                    connection was lost (class 08, 57P01-57P03):
//                    StorageStatus::unavailable();
//   SQLITE_CONSTRAINT_UNIQUE / _FOREIGNKEY / _CHECK / _NOTNULL
//                    23505 / 23503 / 23514 / 23502 (other class 23, and
//                    P0001 raised by a trigger: SQLITE_CONSTRAINT);
//   SQLITE_BUSY      40001 serialization_failure, 40P01 deadlock, 55P03
//                    lock_not_available: retried by WriteTransaction;
//   SQLITE_MISMATCH  the database is at a newer schema than this build;
//   SQLITE_ERROR     any other failure.
// The message starts with the five-character SQLSTATE ("23503 ...") when
// the server sent one.
#pragma once

#include <libpq-fe.h>

#include <string>
#include <string_view>
#include <vector>

#include "storage/database.h"

namespace taut::storage {

// Checks a connection URI given on a command line or in a configuration
// file: it must be a libpq URI (postgresql://USER@HOST:PORT/DB[?...]) and
// must not carry a password, which would then sit in the process list, the
// shell history and the unit file; libpq reads it from PGPASSWORD or
// ~/.pgpass (PostgreSQL documentation, "The Password File"). On failure the
// message names the rule broken, never the URI's secret.
StorageStatus CheckConnectionUri(const std::string& uri);

// True when `db` names a PostgreSQL database (a postgresql:// or
// postgres:// URI) rather than an SQLite file.
bool IsPostgresUri(const std::string& db);

// `sql` with every ?N placeholder (SQLite's numbered form, as the
// repositories write them) replaced by $N, outside quoted literals and
// identifiers. Repeated uses of one number stay one parameter.
std::string PgPlaceholders(std::string_view sql);

// The StorageStatus of a libpq result (see the code list above): ok for
// PGRES_TUPLES_OK and PGRES_COMMAND_OK. A null result or a dropped
// connection is unavailable().
StorageStatus PgResultStatus(PGconn* conn, const PGresult* result);

// One open connection. Move-only; closes on destruction. Not thread-safe:
// one PgConnection per thread, as for Database.
class PgConnection {
 public:
  PgConnection() = default;
  ~PgConnection();
  PgConnection(const PgConnection&) = delete;
  PgConnection& operator=(const PgConnection&) = delete;
  PgConnection(PgConnection&& other) noexcept;
  PgConnection& operator=(PgConnection&& other) noexcept;

  // Connects (libpq blocking connect, kConnectTimeout_s at most) and sets
  // the session's time zone to UTC and client_min_messages to warning, so
  // that NOTICE lines of idempotent DDL do not reach stderr.
  StorageStatus Open(const std::string& uri);

  // Runs one or more SQL statements that return no rows (simple query
  // protocol: several statements in one string run in one implicit
  // transaction unless the text has its own BEGIN/COMMIT).
  StorageStatus Exec(const std::string& sql);

  // Runs one parameterised statement ($1, $2, ... as text values; an
  // absent optional is SQL NULL) and returns its rows as text, row-major
  // (`rows[i][j]` is column j of row i; NULL reads as "").
  StorageStatus Query(const std::string& sql, const std::vector<std::string>& params,
                      std::vector<std::vector<std::string>>* rows);

  // True inside a transaction block (also a failed one).
  bool InTransaction() const;

  // Reconnects a connection the server dropped (PQreset); ok when the
  // connection is up. unavailable() when the server cannot be reached.
  StorageStatus Reconnect();

  PGconn* handle() const { return conn_; }  // owned by this object

 private:
  StorageStatus SessionSettings();
  PGconn* conn_ = nullptr;
};

// Seconds libpq waits for the server at connect (the connect_timeout
// parameter). An unreachable database at start is then one clear line
// within this time, not a hang.
inline constexpr int kConnectTimeout_s = 10;

}  // namespace taut::storage
