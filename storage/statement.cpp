#include "storage/statement.h"

#include <charconv>
#include <chrono>
#include <cstdlib>
#include <random>
#include <thread>

#include "storage/postgres.h"

namespace taut::storage::internal {
namespace {

// PostgreSQL type OIDs of the bound values (src/include/catalog/pg_type.dat).
constexpr Oid kInt8Oid = 20;
constexpr Oid kTextOid = 25;
constexpr Oid kFloat8Oid = 701;
constexpr Oid kByteaOid = 17;

int HexDigit(char c) {
  if (c >= '0' && c <= '9') return c - '0';
  if (c >= 'a' && c <= 'f') return c - 'a' + 10;
  if (c >= 'A' && c <= 'F') return c - 'A' + 10;
  return -1;
}

}  // namespace

Statement::Statement(Database& db, std::string_view sql) : db_(db) {
  if (db_.is_postgres()) {
    pg_text_ = &db_.PgText(sql);
    return;
  }
  const int rc = sqlite3_prepare_v2(db_.handle(), sql.data(), static_cast<int>(sql.size()), &stmt_, nullptr);
  if (rc != SQLITE_OK) SetError(rc, "prepare");
}

Statement::~Statement() {
  sqlite3_finalize(stmt_);
  if (pg_result_ != nullptr) PQclear(pg_result_);
}

void Statement::SetError(int rc, std::string_view what) {
  if (!status_.ok()) return;  // keep the first error
  status_ = {rc, std::string(what) + ": " + sqlite3_errmsg(db_.handle())};
}

void Statement::SetPgError(const StorageStatus& s, std::string_view what) {
  if (!status_.ok()) return;
  status_ = {s.sqlite_code, std::string(what) + ": " + s.message};
}

void Statement::PgBind(int index, std::optional<std::string> value, Oid type, int format) {
  if (index < 1) {
    SetPgError({SQLITE_RANGE, "parameter index " + std::to_string(index) + " must be >= 1"}, "bind");
    return;
  }
  const auto n = static_cast<std::size_t>(index);
  if (pg_values_.size() < n) {
    pg_values_.resize(n);
    pg_types_.resize(n, 0);
    pg_formats_.resize(n, 0);
  }
  pg_values_[n - 1] = std::move(value);
  pg_types_[n - 1] = type;
  pg_formats_[n - 1] = format;
}

Statement& Statement::Bind(int index, std::int64_t value) {
  if (db_.is_postgres()) {
    PgBind(index, std::to_string(value), kInt8Oid, 0);
  } else if (status_.ok()) {
    const int rc = sqlite3_bind_int64(stmt_, index, value);
    if (rc != SQLITE_OK) SetError(rc, "bind parameter " + std::to_string(index));
  }
  return *this;
}

Statement& Statement::Bind(int index, double value) {
  if (db_.is_postgres()) {
    // Shortest text that reads back as the same binary64 (C++17 to_chars),
    // so PostgreSQL's float8 receives exactly this value.
    char buf[64];
    const auto r = std::to_chars(buf, buf + sizeof buf, value);
    PgBind(index, std::string(buf, r.ptr), kFloat8Oid, 0);
  } else if (status_.ok()) {
    const int rc = sqlite3_bind_double(stmt_, index, value);
    if (rc != SQLITE_OK) SetError(rc, "bind parameter " + std::to_string(index));
  }
  return *this;
}

Statement& Statement::Bind(int index, std::string_view text) {
  if (db_.is_postgres()) {
    PgBind(index, std::string(text), kTextOid, 0);
  } else if (status_.ok()) {
    // An empty string_view may have a null data(), which SQLite would bind as NULL.
    const char* data = text.data() != nullptr ? text.data() : "";
    const int rc = sqlite3_bind_text64(stmt_, index, data, text.size(), SQLITE_TRANSIENT, SQLITE_UTF8);
    if (rc != SQLITE_OK) SetError(rc, "bind parameter " + std::to_string(index));
  }
  return *this;
}

// An absent optional is a NULL of the optional's type: PostgreSQL then
// needs no context to type it (as in "?2 IS NULL OR member_id = ?2").
Statement& Statement::Bind(int index, const std::optional<double>& value) {
  if (value) return Bind(index, *value);
  if (!db_.is_postgres()) return BindNull(index);
  PgBind(index, std::nullopt, kFloat8Oid, 0);
  return *this;
}

Statement& Statement::Bind(int index, const std::optional<std::int64_t>& value) {
  if (value) return Bind(index, *value);
  if (!db_.is_postgres()) return BindNull(index);
  PgBind(index, std::nullopt, kInt8Oid, 0);
  return *this;
}

Statement& Statement::BindBlob(int index, const void* data, std::size_t size_bytes) {
  if (db_.is_postgres()) {
    // Binary format: the bytes as they are, no bytea escaping.
    PgBind(index, std::string(static_cast<const char*>(data), size_bytes), kByteaOid, 1);
  } else if (status_.ok()) {
    // A zero-length blob is stored as an empty BLOB, not NULL.
    const int rc = size_bytes == 0 ? sqlite3_bind_zeroblob(stmt_, index, 0)
                                   : sqlite3_bind_blob64(stmt_, index, data, size_bytes, SQLITE_TRANSIENT);
    if (rc != SQLITE_OK) SetError(rc, "bind parameter " + std::to_string(index));
  }
  return *this;
}

Statement& Statement::BindNull(int index) {
  if (db_.is_postgres()) {
    // Untyped: PostgreSQL infers the type from where the parameter is used.
    PgBind(index, std::nullopt, 0, 0);
  } else if (status_.ok()) {
    const int rc = sqlite3_bind_null(stmt_, index);
    if (rc != SQLITE_OK) SetError(rc, "bind parameter " + std::to_string(index));
  }
  return *this;
}

int Statement::PgStep() {
  if (!status_.ok()) return status_.sqlite_code;
  if (pg_result_ == nullptr) {
    // A dropped connection is re-established before a statement outside a
    // transaction; inside one the transaction is lost anyway.
    if (!db_.in_transaction()) {
      if (StorageStatus c = db_.EnsureConnected(); !c.ok()) {
        SetPgError(c, "step");
        return status_.sqlite_code;
      }
    }
    const std::size_t n = pg_values_.size();
    std::vector<const char*> values(n);
    std::vector<int> lengths(n);
    for (std::size_t i = 0; i < n; ++i) {
      values[i] = pg_values_[i] ? pg_values_[i]->data() : nullptr;
      lengths[i] = pg_values_[i] ? static_cast<int>(pg_values_[i]->size()) : 0;
    }
    PGconn* conn = db_.postgres()->handle();
    pg_result_ = PQexecParams(conn, pg_text_->c_str(), static_cast<int>(n), pg_types_.data(), values.data(),
                              lengths.data(), pg_formats_.data(), /*resultFormat=*/0);
    if (StorageStatus s = PgResultStatus(conn, pg_result_); !s.ok()) {
      SetPgError(s, "step");
      return status_.sqlite_code;
    }
    pg_row_ = -1;
  }
  const int rows = PQntuples(pg_result_);
  if (pg_row_ + 1 < rows) {
    ++pg_row_;
    return SQLITE_ROW;
  }
  pg_row_ = rows;
  return SQLITE_DONE;
}

int Statement::Step() {
  if (db_.is_postgres()) return PgStep();
  if (!status_.ok()) return status_.sqlite_code;
  const int rc = sqlite3_step(stmt_);
  if (rc == SQLITE_ROW || rc == SQLITE_DONE) return rc;
  // sqlite3_errmsg gives the message of the failing step (e.g. the text of
  // a RAISE() or the constraint that was violated); the extended code tells
  // SQLITE_CONSTRAINT_UNIQUE from SQLITE_CONSTRAINT_FOREIGNKEY.
  SetError(sqlite3_extended_errcode(db_.handle()), "step");
  return status_.sqlite_code;
}

StorageStatus Statement::Run() {
  const int rc = Step();
  if (rc == SQLITE_DONE) return {};
  if (rc == SQLITE_ROW) return {SQLITE_MISUSE, "statement returned a row where none was expected"};
  return status_;
}

std::int64_t Statement::Changes() const {
  if (db_.is_postgres()) return pg_result_ != nullptr ? std::atoll(PQcmdTuples(pg_result_)) : 0;
  return sqlite3_changes(db_.handle());
}

const char* Statement::PgValue(int column) const {
  if (pg_result_ == nullptr || pg_row_ < 0 || pg_row_ >= PQntuples(pg_result_)) return nullptr;
  if (column < 0 || column >= PQnfields(pg_result_) || PQgetisnull(pg_result_, pg_row_, column))
    return nullptr;
  return PQgetvalue(pg_result_, pg_row_, column);
}

std::int64_t Statement::Int64(int column) const {
  if (!db_.is_postgres()) return sqlite3_column_int64(stmt_, column);
  const char* v = PgValue(column);
  return v != nullptr ? std::strtoll(v, nullptr, 10) : 0;
}

double Statement::Double(int column) const {
  if (!db_.is_postgres()) return sqlite3_column_double(stmt_, column);
  // float8 text output is the shortest exact form (PostgreSQL >= 12 with
  // the default extra_float_digits = 1), so strtod gives the stored value.
  const char* v = PgValue(column);
  return v != nullptr ? std::strtod(v, nullptr) : 0.0;
}

bool Statement::IsNull(int column) const {
  if (!db_.is_postgres()) return sqlite3_column_type(stmt_, column) == SQLITE_NULL;
  return PgValue(column) == nullptr;
}

std::string Statement::Text(int column) const {
  if (db_.is_postgres()) {
    const char* v = PgValue(column);
    if (v == nullptr) return {};
    return std::string(v, static_cast<std::size_t>(PQgetlength(pg_result_, pg_row_, column)));
  }
  const unsigned char* text = sqlite3_column_text(stmt_, column);
  if (text == nullptr) return {};
  return std::string(reinterpret_cast<const char*>(text),
                     static_cast<std::size_t>(sqlite3_column_bytes(stmt_, column)));
}

std::string Statement::Blob(int column) const {
  if (db_.is_postgres()) {
    // bytea in text form is "\x" and two hex digits per byte (bytea_output
    // = hex, the default since PostgreSQL 9.0; documentation 8.4.1).
    const std::string hex = Text(column);
    if (hex.size() < 2 || hex[0] != '\\' || hex[1] != 'x') return {};
    std::string out((hex.size() - 2) / 2, '\0');
    for (std::size_t i = 0; i < out.size(); ++i) {
      const int hi = HexDigit(hex[2 + 2 * i]), lo = HexDigit(hex[3 + 2 * i]);
      if (hi < 0 || lo < 0) return {};
      out[i] = static_cast<char>(hi * 16 + lo);
    }
    return out;
  }
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

StorageStatus InsertReturningId(Statement& stmt, std::int64_t* id) {
  const int rc = stmt.Step();
  if (rc != SQLITE_ROW) {
    if (rc == SQLITE_DONE) return {SQLITE_ERROR, "INSERT ... RETURNING returned no row"};
    return stmt.status();
  }
  const std::int64_t value = stmt.Int64(0);
  if (stmt.Step() != SQLITE_DONE) return stmt.status();  // finish the statement (SQLite)
  *id = value;
  return {};
}

StorageStatus RunOneRow(Statement& stmt, const std::string& what) {
  if (StorageStatus s = stmt.Run(); !s.ok()) return s;
  if (stmt.Changes() != 1) return StorageStatus::NotFound(what + " not found");
  return {};
}

namespace {

StorageStatus SqliteWriteTransaction(Database& db, const std::function<StorageStatus()>& body) {
  StorageStatus begin;
  for (int attempt = 1; attempt <= kMaxWriteAttempts; ++attempt) {
    begin = db.Begin();
    if (!begin.busy()) break;
  }
  if (!begin.ok()) {
    begin.message = "cannot start a write transaction after " + std::to_string(kMaxWriteAttempts) +
                    " attempts of " + std::to_string(kBusyTimeout_ms) + " ms: " + begin.message;
    return begin;
  }
  StorageStatus s = body();
  if (s.ok()) s = db.Commit();
  if (!s.ok()) db.Rollback();
  return s;
}

StorageStatus PgWriteTransaction(Database& db, const std::function<StorageStatus()>& body,
                                 bool read_committed) {
  thread_local std::minstd_rand random(static_cast<unsigned>(
      std::hash<std::thread::id>{}(std::this_thread::get_id()) ^
      static_cast<std::size_t>(std::chrono::steady_clock::now().time_since_epoch().count())));
  StorageStatus s;
  for (int attempt = 1; attempt <= kPgMaxWriteAttempts; ++attempt) {
    s = db.Begin(read_committed);
    if (s.ok()) {
      s = body();
      if (s.ok()) s = db.Commit();
    }
    if (!s.ok()) db.Rollback();
    if (!s.busy()) return s;
    // Random back-off, growing to at most ~50 ms, so that the transactions
    // that collided do not collide again.
    const int cap_ms = std::min(50, 1 << std::min(attempt, 6));
    std::this_thread::sleep_for(std::chrono::microseconds(random() % (1000u * cap_ms)));
  }
  s.message = "write transaction still conflicting after " + std::to_string(kPgMaxWriteAttempts) +
              " attempts: " + s.message;
  return s;
}

}  // namespace

StorageStatus WriteTransaction(Database& db, const std::function<StorageStatus()>& body,
                               bool read_committed) {
  return db.is_postgres() ? PgWriteTransaction(db, body, read_committed) : SqliteWriteTransaction(db, body);
}

}  // namespace taut::storage::internal
