#include "storage/statement.h"

namespace taut::storage::internal {

Statement::Statement(sqlite3* db, std::string_view sql) : db_(db) {
  const int rc = sqlite3_prepare_v2(db_, sql.data(), static_cast<int>(sql.size()), &stmt_, nullptr);
  if (rc != SQLITE_OK) SetError(rc, "prepare");
}

Statement::~Statement() { sqlite3_finalize(stmt_); }

void Statement::SetError(int rc, std::string_view what) {
  if (!status_.ok()) return;  // keep the first error
  status_ = {rc, std::string(what) + ": " + sqlite3_errmsg(db_)};
}

Statement& Statement::Bind(int index, std::int64_t value) {
  if (status_.ok()) {
    const int rc = sqlite3_bind_int64(stmt_, index, value);
    if (rc != SQLITE_OK) SetError(rc, "bind parameter " + std::to_string(index));
  }
  return *this;
}

Statement& Statement::Bind(int index, double value) {
  if (status_.ok()) {
    const int rc = sqlite3_bind_double(stmt_, index, value);
    if (rc != SQLITE_OK) SetError(rc, "bind parameter " + std::to_string(index));
  }
  return *this;
}

Statement& Statement::Bind(int index, std::string_view text) {
  if (status_.ok()) {
    const int rc = sqlite3_bind_text64(stmt_, index, text.data(), text.size(), SQLITE_TRANSIENT, SQLITE_UTF8);
    if (rc != SQLITE_OK) SetError(rc, "bind parameter " + std::to_string(index));
  }
  return *this;
}

Statement& Statement::Bind(int index, const std::optional<double>& value) {
  return value ? Bind(index, *value) : BindNull(index);
}

Statement& Statement::Bind(int index, const std::optional<std::int64_t>& value) {
  return value ? Bind(index, *value) : BindNull(index);
}

Statement& Statement::BindBlob(int index, const void* data, std::size_t size_bytes) {
  if (status_.ok()) {
    // A zero-length blob is stored as an empty BLOB, not NULL.
    const int rc = size_bytes == 0 ? sqlite3_bind_zeroblob(stmt_, index, 0)
                                   : sqlite3_bind_blob64(stmt_, index, data, size_bytes, SQLITE_TRANSIENT);
    if (rc != SQLITE_OK) SetError(rc, "bind parameter " + std::to_string(index));
  }
  return *this;
}

Statement& Statement::BindNull(int index) {
  if (status_.ok()) {
    const int rc = sqlite3_bind_null(stmt_, index);
    if (rc != SQLITE_OK) SetError(rc, "bind parameter " + std::to_string(index));
  }
  return *this;
}

int Statement::Step() {
  if (!status_.ok()) return status_.sqlite_code;
  const int rc = sqlite3_step(stmt_);
  if (rc == SQLITE_ROW || rc == SQLITE_DONE) return rc;
  // sqlite3_errmsg gives the message of the failing step (e.g. the text of
  // a RAISE() or the constraint that was violated); the extended code tells
  // SQLITE_CONSTRAINT_UNIQUE from SQLITE_CONSTRAINT_FOREIGNKEY.
  SetError(sqlite3_extended_errcode(db_), "step");
  return status_.sqlite_code;
}

StorageStatus Statement::Run() {
  const int rc = Step();
  if (rc == SQLITE_DONE) return {};
  if (rc == SQLITE_ROW) return {SQLITE_MISUSE, "statement returned a row where none was expected"};
  return status_;
}

std::string Statement::Text(int column) const {
  const unsigned char* text = sqlite3_column_text(stmt_, column);
  if (text == nullptr) return {};
  return std::string(reinterpret_cast<const char*>(text),
                     static_cast<std::size_t>(sqlite3_column_bytes(stmt_, column)));
}

std::string Statement::Blob(int column) const {
  const void* data = sqlite3_column_blob(stmt_, column);
  const int n = sqlite3_column_bytes(stmt_, column);
  if (data == nullptr || n <= 0) return {};
  return std::string(static_cast<const char*>(data), static_cast<std::size_t>(n));
}

std::optional<double> Statement::OptionalDouble(int column) const {
  if (IsNull(column)) return std::nullopt;
  return Double(column);
}

std::optional<std::int64_t> Statement::OptionalInt64(int column) const {
  if (IsNull(column)) return std::nullopt;
  return Int64(column);
}

StorageStatus WriteTransaction(Database& db, const std::function<StorageStatus()>& body) {
  StorageStatus begin;
  for (int attempt = 1; attempt <= kMaxWriteAttempts; ++attempt) {
    begin = db.Exec("BEGIN IMMEDIATE;");
    if (!begin.busy()) break;
  }
  if (!begin.ok()) {
    begin.message = "cannot start a write transaction after " + std::to_string(kMaxWriteAttempts) +
                    " attempts of " + std::to_string(kBusyTimeout_ms) + " ms: " + begin.message;
    return begin;
  }
  StorageStatus s = body();
  if (s.ok()) s = db.Exec("COMMIT;");
  if (!s.ok()) {
    // ROLLBACK can itself fail only if SQLite already rolled back (e.g.
    // after SQLITE_FULL); the autocommit check makes that harmless.
    if (sqlite3_get_autocommit(db.handle()) == 0) db.Exec("ROLLBACK;");
  }
  return s;
}

}  // namespace taut::storage::internal
