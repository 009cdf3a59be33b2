// Internal to storage/: a prepared statement with parameter binding, and a
// write transaction with the busy/retry policy. Not part of the public API
// (server/ uses repository.h and migrations.h).
//
// Every value reaches SQL through sqlite3_bind_* (never by building SQL text
// from values), so no quoting rule can be got wrong.
#pragma once

#include <sqlite3.h>

#include <cstdint>
#include <functional>
#include <optional>
#include <string>
#include <string_view>

#include "storage/database.h"

namespace taut::storage::internal {

// One prepared statement, finalized on destruction. Bind indices are
// 1-based (SQLite convention); column indices are 0-based.
class Statement {
 public:
  Statement(sqlite3* db, std::string_view sql);
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
  // error and SQLite's message prefixed by `what`).
  int Step();
  // Runs a statement that returns no rows; error if it returns a row.
  StorageStatus Run();

  std::int64_t Int64(int column) const { return sqlite3_column_int64(stmt_, column); }
  double Double(int column) const { return sqlite3_column_double(stmt_, column); }
  bool IsNull(int column) const { return sqlite3_column_type(stmt_, column) == SQLITE_NULL; }
  std::string Text(int column) const;
  std::string Blob(int column) const;  // bytes of a BLOB column
  std::optional<double> OptionalDouble(int column) const;
  std::optional<std::int64_t> OptionalInt64(int column) const;

 private:
  void SetError(int rc, std::string_view what);

  sqlite3* db_;  // not owned; the Database must outlive this
  sqlite3_stmt* stmt_ = nullptr;
  StorageStatus status_;
};

// Runs `body` inside BEGIN IMMEDIATE ... COMMIT. Any non-ok status from
// `body` (or from COMMIT) rolls the whole transaction back, so a write is
// either complete or absent.
//
// Busy/retry policy: BEGIN IMMEDIATE takes the write lock up front, so the
// connection's busy handler (kBusyTimeout_ms) is what waits for a competing
// writer; a deferred transaction that upgrades from read to write could
// instead fail at once with SQLITE_BUSY_SNAPSHOT in WAL mode. If the lock is
// still not granted after the timeout, the whole transaction is retried up
// to kMaxWriteAttempts times before SQLITE_BUSY is returned to the caller.
inline constexpr int kMaxWriteAttempts = 3;

StorageStatus WriteTransaction(Database& db, const std::function<StorageStatus()>& body);

}  // namespace taut::storage::internal
