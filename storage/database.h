// A connection to the taut database, with the settings every taut
// database uses: an SQLite file (the embedded default) or a PostgreSQL
// database named by a postgresql:// URI (a portfolio served by several
// replicas; storage/postgres.h). The repositories run on either through the
// backend-neutral statement of storage/statement.h.
//
// storage/ depends on SQLite and libpq only: no JSON, no HTTP, no physics.
// Errors are returned as a StorageStatus carrying an SQLite result code
// (PostgreSQL's SQLSTATEs are mapped onto them, postgres.h) and a message;
// nothing throws.
#pragma once

#include <sqlite3.h>

#include <memory>
#include <string>
#include <string_view>
#include <unordered_map>
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
  // The database cannot be reached: the PostgreSQL server is down or the
  // connection was lost (or an SQLite file cannot be opened). Nothing of
  // the failed call was written; the server maps it to HTTP 503
  // "unavailable" and a retry later may succeed.
  bool unavailable() const { return (sqlite_code & 0xff) == SQLITE_CANTOPEN; }
  static StorageStatus NotFound(std::string m) { return {SQLITE_NOTFOUND, std::move(m)}; }
  static StorageStatus Unavailable(std::string m) { return {SQLITE_CANTOPEN, std::move(m)}; }
};

class PgConnection;  // storage/postgres.h

// Busy timeout applied to every connection: how long a writer waits for a
// competing transaction before SQLITE_BUSY is returned.
inline constexpr int kBusyTimeout_ms = 5000;

// One open connection. Move-only; closes on destruction.
// Not thread-safe: use one Database per thread (SQLite's WAL mode lets
// readers and one writer proceed concurrently across connections; so does
// PostgreSQL's MVCC).
class Database {
 public:
  Database();
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
  //
  // A `path` that is a postgresql:// (or postgres://) URI opens a
  // PostgreSQL connection instead (PgConnection::Open: the URI must not
  // carry a password; an unreachable server is unavailable()).
  StorageStatus Open(const std::string& path);

  // Replaces the busy timeout (milliseconds, >= 0) of this connection.
  // Tests use a short one to see SQLITE_BUSY quickly; production code keeps
  // kBusyTimeout_ms.
  StorageStatus SetBusyTimeout(int timeout_ms);

  // Runs one or more SQL statements that return no rows.
  StorageStatus Exec(const std::string& sql);

  // Reads a PRAGMA or other single-value query as text ("" if no row).
  StorageStatus QueryText(const std::string& sql, std::string* value);

  // The SQLite handle (owned by this object); nullptr on PostgreSQL.
  sqlite3* handle() const { return db_; }

  bool is_postgres() const { return pg_ != nullptr; }
  PgConnection* postgres() const { return pg_.get(); }  // nullptr on SQLite

  // Write transactions (statement.h WriteTransaction uses these): SQLite
  // BEGIN IMMEDIATE (takes the write lock at once); PostgreSQL BEGIN
  // ISOLATION LEVEL SERIALIZABLE, so concurrent writers behave as if they
  // ran one after the other, as SQLite's single writer does, and a conflict
  // is busy() (SQLSTATE 40001) to be retried. Rollback is harmless when no
  // transaction is open. read_committed (PostgreSQL only): READ COMMITTED
  // instead, for the one statement that needs no more (the job claim with
  // FOR UPDATE SKIP LOCKED, whose row lock is what keeps two workers apart;
  // as SERIALIZABLE it would conflict with every other claim and
  // completion, and be retried, for nothing).
  StorageStatus Begin(bool read_committed = false);
  StorageStatus Commit();
  void Rollback();
  bool in_transaction() const { return in_transaction_; }

  // PostgreSQL: reconnects a connection the server dropped (restart,
  // network), outside a transaction only. unavailable() when it fails.
  StorageStatus EnsureConnected();

  // PostgreSQL text of an SQLite-dialect statement: ?N placeholders become
  // $N (outside quoted literals), rewritten once per text and cached.
  const std::string& PgText(std::string_view sql);

 private:
  sqlite3* db_ = nullptr;
  std::unique_ptr<PgConnection> pg_;
  std::unordered_map<std::string, std::string> pg_text_;
  bool in_transaction_ = false;
};

}  // namespace taut::storage
