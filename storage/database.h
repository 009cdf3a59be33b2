// SQLite connection with the settings every taut database uses.
//
// storage/ depends on SQLite only: no JSON, no HTTP, no physics. Errors are
// returned as a StorageStatus carrying SQLite's result code and message;
// nothing throws.
#pragma once

#include <sqlite3.h>

#include <string>
#include <utility>

namespace taut::storage {

struct StorageStatus {
  int sqlite_code = SQLITE_OK;  // SQLITE_OK on success
  std::string message;          // empty on success
  bool ok() const { return sqlite_code == SQLITE_OK; }
  // "No such row for this organisation". SQLite itself never returns
  // SQLITE_NOTFOUND from a statement (it is a file-control code), so the
  // repositories reuse it unambiguously for a missing or foreign id; the
  // server maps it to HTTP 404.
  bool not_found() const { return sqlite_code == SQLITE_NOTFOUND; }
  // SQLITE_BUSY / SQLITE_LOCKED after the busy timeout and retries ran out.
  bool busy() const { return (sqlite_code & 0xff) == SQLITE_BUSY || (sqlite_code & 0xff) == SQLITE_LOCKED; }
  static StorageStatus NotFound(std::string m) { return {SQLITE_NOTFOUND, std::move(m)}; }
};

// Busy timeout applied to every connection: how long a writer waits for a
// competing transaction before SQLITE_BUSY is returned.
inline constexpr int kBusyTimeout_ms = 5000;

// One open connection. Move-only; closes on destruction.
// Not thread-safe: use one Database per thread (SQLite's WAL mode lets
// readers and one writer proceed concurrently across connections).
class Database {
 public:
  Database() = default;
  ~Database();
  Database(const Database&) = delete;
  Database& operator=(const Database&) = delete;
  Database(Database&& other) noexcept;
  Database& operator=(Database&& other) noexcept;

  // Opens (creating if absent) the file at `path` (":memory:" for a
  // private in-memory database) with foreign keys on, WAL journal mode
  // (file databases) and kBusyTimeout_ms. Durability: SQLite's default
  // synchronous = FULL is kept, so a committed upload survives a power
  // loss, not only a killed process; it costs one fsync of the WAL per
  // write transaction (bench_storage measures it). Does not migrate: use
  // OpenAndMigrate (migrations.h).
  StorageStatus Open(const std::string& path);

  // Replaces the busy timeout (milliseconds, >= 0) of this connection.
  // Tests use a short one to see SQLITE_BUSY quickly; production code keeps
  // kBusyTimeout_ms.
  StorageStatus SetBusyTimeout(int timeout_ms);

  // Runs one or more SQL statements that return no rows.
  StorageStatus Exec(const std::string& sql);

  // Reads a PRAGMA or other single-value query as text ("" if no row).
  StorageStatus QueryText(const std::string& sql, std::string* value);

  sqlite3* handle() const { return db_; }  // owned by this object

 private:
  sqlite3* db_ = nullptr;
};

}  // namespace taut::storage
