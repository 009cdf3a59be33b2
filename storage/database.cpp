#include "storage/database.h"

#include <string>
#include <utility>

#include "storage/postgres.h"

namespace taut::storage {

Database::Database() = default;

Database::~Database() {
  if (db_ != nullptr) sqlite3_close_v2(db_);
}

Database::Database(Database&& other) noexcept
    : db_(std::exchange(other.db_, nullptr)),
      pg_(std::move(other.pg_)),
      pg_text_(std::move(other.pg_text_)),
      in_transaction_(std::exchange(other.in_transaction_, false)) {}

Database& Database::operator=(Database&& other) noexcept {
  if (this != &other) {
    if (db_ != nullptr) sqlite3_close_v2(db_);
    db_ = std::exchange(other.db_, nullptr);
    pg_ = std::move(other.pg_);
    pg_text_ = std::move(other.pg_text_);
    in_transaction_ = std::exchange(other.in_transaction_, false);
  }
  return *this;
}

StorageStatus Database::Open(const std::string& path) {
  if (db_ != nullptr) {
    sqlite3_close_v2(db_);
    db_ = nullptr;
  }
  pg_.reset();
  in_transaction_ = false;
  if (IsPostgresUri(path)) {
    auto pg = std::make_unique<PgConnection>();
    if (StorageStatus s = pg->Open(path); !s.ok()) return s;
    pg_ = std::move(pg);
    return {};
  }
  const int flags = SQLITE_OPEN_READWRITE | SQLITE_OPEN_CREATE | SQLITE_OPEN_FULLMUTEX;
  int rc = sqlite3_open_v2(path.c_str(), &db_, flags, nullptr);
  if (rc != SQLITE_OK) {
    StorageStatus s{rc, "cannot open database '" + path +
                            "': " + (db_ != nullptr ? sqlite3_errmsg(db_) : sqlite3_errstr(rc))};
    sqlite3_close_v2(db_);
    db_ = nullptr;
    return s;
  }
  sqlite3_busy_timeout(db_, kBusyTimeout_ms);
  if (StorageStatus s = Exec("PRAGMA foreign_keys = ON;"); !s.ok()) return s;
  if (path != ":memory:") {
    std::string mode;
    if (StorageStatus s = QueryText("PRAGMA journal_mode = WAL;", &mode); !s.ok()) return s;
    if (mode != "wal") return {SQLITE_ERROR, "database '" + path + "' refused WAL mode (got '" + mode + "')"};
  }
  return {};
}

StorageStatus Database::SetBusyTimeout(int timeout_ms) {
  if (pg_) return {};  // PostgreSQL: conflicts are retried by WriteTransaction
  if (db_ == nullptr) return {SQLITE_MISUSE, "SetBusyTimeout: database is not open"};
  if (timeout_ms < 0)
    return {SQLITE_MISUSE, "busy timeout " + std::to_string(timeout_ms) + " ms must be >= 0"};
  const int rc = sqlite3_busy_timeout(db_, timeout_ms);
  if (rc != SQLITE_OK) return {rc, sqlite3_errmsg(db_)};
  return {};
}

StorageStatus Database::Exec(const std::string& sql) {
  if (pg_) {
    if (!in_transaction_) {
      if (StorageStatus s = EnsureConnected(); !s.ok()) return s;
    }
    return pg_->Exec(sql);
  }
  char* err = nullptr;
  const int rc = sqlite3_exec(db_, sql.c_str(), nullptr, nullptr, &err);
  if (rc != SQLITE_OK) {
    StorageStatus s{rc, err != nullptr ? err : sqlite3_errstr(rc)};
    sqlite3_free(err);
    return s;
  }
  return {};
}

StorageStatus Database::QueryText(const std::string& sql, std::string* value) {
  value->clear();
  if (pg_) {
    if (!in_transaction_) {
      if (StorageStatus s = EnsureConnected(); !s.ok()) return s;
    }
    std::vector<std::vector<std::string>> rows;
    if (StorageStatus s = pg_->Query(sql, {}, &rows); !s.ok()) return s;
    if (!rows.empty() && !rows[0].empty()) *value = rows[0][0];
    return {};
  }
  sqlite3_stmt* stmt = nullptr;
  int rc = sqlite3_prepare_v2(db_, sql.c_str(), -1, &stmt, nullptr);
  if (rc != SQLITE_OK) return {rc, sqlite3_errmsg(db_)};
  rc = sqlite3_step(stmt);
  if (rc == SQLITE_ROW) {
    const unsigned char* text = sqlite3_column_text(stmt, 0);
    if (text != nullptr) *value = reinterpret_cast<const char*>(text);
    rc = SQLITE_OK;
  } else if (rc == SQLITE_DONE) {
    rc = SQLITE_OK;
  }
  StorageStatus s{rc, rc == SQLITE_OK ? "" : sqlite3_errmsg(db_)};
  sqlite3_finalize(stmt);
  return s;
}

StorageStatus Database::Begin(bool read_committed) {
  StorageStatus s = !pg_             ? Exec("BEGIN IMMEDIATE;")
                    : read_committed ? Exec("BEGIN ISOLATION LEVEL READ COMMITTED")
                                     : Exec("BEGIN ISOLATION LEVEL SERIALIZABLE");
  in_transaction_ = s.ok();
  return s;
}

StorageStatus Database::Commit() {
  StorageStatus s = Exec(pg_ ? "COMMIT" : "COMMIT;");
  // A failed PostgreSQL COMMIT has ended the transaction (rolled back); a
  // failed SQLite COMMIT (SQLITE_BUSY) leaves it open for Rollback().
  if (s.ok() || pg_) in_transaction_ = false;
  return s;
}

void Database::Rollback() {
  in_transaction_ = false;
  if (pg_) {
    if (pg_->InTransaction()) pg_->Exec("ROLLBACK");
    return;
  }
  // ROLLBACK can itself fail only if SQLite already rolled back (e.g.
  // after SQLITE_FULL); the autocommit check makes that harmless.
  if (db_ != nullptr && sqlite3_get_autocommit(db_) == 0) Exec("ROLLBACK;");
}

StorageStatus Database::EnsureConnected() {
  if (!pg_) return {};
  return pg_->Reconnect();
}

const std::string& Database::PgText(std::string_view sql) {
  auto it = pg_text_.find(std::string(sql));
  if (it != pg_text_.end()) return it->second;
  return pg_text_.emplace(std::string(sql), PgPlaceholders(sql)).first->second;
}

}  // namespace taut::storage
