#include "storage/database.h"

#include <string>
#include <utility>

namespace taut::storage {

Database::~Database() {
  if (db_ != nullptr) sqlite3_close_v2(db_);
}

Database::Database(Database&& other) noexcept : db_(std::exchange(other.db_, nullptr)) {}

Database& Database::operator=(Database&& other) noexcept {
  if (this != &other) {
    if (db_ != nullptr) sqlite3_close_v2(db_);
    db_ = std::exchange(other.db_, nullptr);
  }
  return *this;
}

StorageStatus Database::Open(const std::string& path) {
  if (db_ != nullptr) {
    sqlite3_close_v2(db_);
    db_ = nullptr;
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
  if (db_ == nullptr) return {SQLITE_MISUSE, "SetBusyTimeout: database is not open"};
  if (timeout_ms < 0)
    return {SQLITE_MISUSE, "busy timeout " + std::to_string(timeout_ms) + " ms must be >= 0"};
  const int rc = sqlite3_busy_timeout(db_, timeout_ms);
  if (rc != SQLITE_OK) return {rc, sqlite3_errmsg(db_)};
  return {};
}

StorageStatus Database::Exec(const std::string& sql) {
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
  sqlite3_stmt* stmt = nullptr;
  int rc = sqlite3_prepare_v2(db_, sql.c_str(), -1, &stmt, nullptr);
  if (rc != SQLITE_OK) return {rc, sqlite3_errmsg(db_)};
  value->clear();
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

}  // namespace taut::storage
