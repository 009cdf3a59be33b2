// Internal to storage/: a prepared statement with parameter binding, and a
// write transaction with the busy/retry policy. Not part of the public API
// (server/ uses repository.h and migrations.h).
//
// The one SQL layer of both backends: the repositories write each query
// once, in the SQL that SQLite and PostgreSQL share, with numbered ?N
// placeholders. On PostgreSQL the text is rewritten to $N once per
// statement text (Database::PgText) and run with PQexecParams; values are
// sent typed (int8, float8, text, bytea in binary, so blobs need no
// escaping) and rows are read in PostgreSQL's text form. The few dialect
// differences are explicit at their call sites (Database::is_postgres()).
//
// Every value reaches SQL through a bound parameter (never by building SQL
// text from values), so no quoting rule can be got wrong.
#pragma once

#include <libpq-fe.h>
#include <sqlite3.h>

#include <cstdint>
#include <functional>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "storage/database.h"

namespace taut::storage::internal {

// One statement, finalized on destruction. Bind indices are 1-based
// (SQLite convention); column indices are 0-based.
class Statement {
 public:
  Statement(Database& db, std::string_view sql);
  ~Statement();
  Statement(const Statement&) = delete;
  Statement& operator=(const Statement&) = delete;

  // The first error met while preparing or binding ({} if none). Step()
  // returns it instead of running a half-bound statement.
  const StorageStatus& status() const { return status_; }

  Statement& Bind(int index, std::int64_t value);
  Statement& Bind(int index, double value);
  Statement& Bind(int index, std::string_view text);
  Statement& Bind(int index, const std::optional<double>& value);
  Statement& Bind(int index, const std::optional<std::int64_t>& value);
  Statement& BindBlob(int index, const void* data, std::size_t size_bytes);
  Statement& BindNull(int index);

  // SQLITE_ROW, SQLITE_DONE, or an error code (with status() set to the
  // error and the backend's message prefixed by `what`).
  int Step();
  // Runs a statement that returns no rows; error if it returns a row.
  StorageStatus Run();
  // Rows inserted, updated or deleted by the statement (after Step/Run).
  std::int64_t Changes() const;

  std::int64_t Int64(int column) const;
  double Double(int column) const;
  bool IsNull(int column) const;
  std::string Text(int column) const;
  std::string Blob(int column) const;  // bytes of a BLOB / BYTEA column
  std::optional<double> OptionalDouble(int column) const;
  std::optional<std::int64_t> OptionalInt64(int column) const;

 private:
  void SetError(int rc, std::string_view what);
  void SetPgError(const StorageStatus& s, std::string_view what);
  void PgBind(int index, std::optional<std::string> value, Oid type, int format);
  int PgStep();
  const char* PgValue(int column) const;

  Database& db_;  // not owned; must outlive this
  sqlite3_stmt* stmt_ = nullptr;
  StorageStatus status_;
  // PostgreSQL: the rewritten text, the bound values, the result and the
  // row the accessors read (-1 before the first row).
  const std::string* pg_text_ = nullptr;
  std::vector<std::optional<std::string>> pg_values_;
  std::vector<Oid> pg_types_;
  std::vector<int> pg_formats_;
  PGresult* pg_result_ = nullptr;
  int pg_row_ = -1;
};

// Runs `body` inside a write transaction (Database::Begin ... Commit). Any
// non-ok status from `body` (or from COMMIT) rolls the whole transaction
// back, so a write is either complete or absent.
//
// Busy/retry policy, SQLite: BEGIN IMMEDIATE takes the write lock up front,
// so the connection's busy handler (kBusyTimeout_ms) is what waits for a
// competing writer; a deferred transaction that upgrades from read to write
// could instead fail at once with SQLITE_BUSY_SNAPSHOT in WAL mode. If the
// lock is still not granted after the timeout, the whole transaction is
// retried up to kMaxWriteAttempts times before SQLITE_BUSY is returned.
//
// PostgreSQL: the transaction is SERIALIZABLE; a serialization failure or
// deadlock (busy()) anywhere in it, COMMIT included, rolls it back and the
// whole transaction, `body` included, runs again after a short random
// back-off, up to kPgMaxWriteAttempts times (PostgreSQL 15 documentation,
// 13.2.3 "Serializable Isolation Level": "applications using this level
// must be prepared to retry transactions due to serialization failures").
// `body` must therefore set every output it has on each run (a flag set by
// a rolled-back attempt must not survive into the next one; the PostgreSQL
// run of the concurrency tests caught exactly that). A lost connection is
// unavailable() and is not retried here.
inline constexpr int kMaxWriteAttempts = 3;
inline constexpr int kPgMaxWriteAttempts = 20;

// read_committed: see Database::Begin (PostgreSQL only; the same retries).
StorageStatus WriteTransaction(Database& db, const std::function<StorageStatus()>& body,
                               bool read_committed = false);

// Reads the single row of `stmt` into `fill`, or NotFound(what).
template <typename Fill>
StorageStatus ReadOne(Statement& stmt, const std::string& what, Fill fill) {
  const int rc = stmt.Step();
  if (rc == SQLITE_ROW) {
    fill(stmt);
    return {};
  }
  if (rc == SQLITE_DONE) return StorageStatus::NotFound(what + " not found");
  return stmt.status();
}

template <typename T, typename Fill>
StorageStatus ReadAll(Statement& stmt, std::vector<T>* out, Fill fill) {
  std::vector<T> rows;
  for (;;) {
    const int rc = stmt.Step();
    if (rc == SQLITE_DONE) break;
    if (rc != SQLITE_ROW) return stmt.status();
    rows.push_back(fill(stmt));
  }
  *out = std::move(rows);
  return {};
}

// Runs an INSERT ... RETURNING id (both backends) and reads the new id.
StorageStatus InsertReturningId(Statement& stmt, std::int64_t* id);

// UPDATE/DELETE that must touch exactly one row (else NotFound(what)).
StorageStatus RunOneRow(Statement& stmt, const std::string& what);

}  // namespace taut::storage::internal
