#include "storage/logbook.h"

#include <sqlite3.h>

#include "storage/statement.h"

namespace taut::storage {
namespace {

using internal::Statement;

constexpr const char* kColumns =
    "id, organisation_id, member_id, kind, note, author, occurred_at_unix_ms, new_baseline, "
    "created_at_unix_ms";

LogEntry Read(const Statement& s) {
  LogEntry e;
  e.id = s.Int64(0);
  e.organisation_id = s.Int64(1);
  e.member_id = s.Int64(2);
  e.kind = s.Text(3);
  e.note = s.Text(4);
  e.author = s.Text(5);
  e.occurred_at_unix_ms = s.Int64(6);
  e.new_baseline = s.Int64(7) != 0;
  e.created_at_unix_ms = s.Int64(8);
  return e;
}

StorageStatus Misuse(std::string m) { return {SQLITE_MISUSE, std::move(m)}; }

}  // namespace

bool IsLogKind(std::string_view kind) {
  for (const char* k : kLogKinds) {
    if (kind == k) return true;
  }
  return false;
}

StorageStatus Logbook::Add(Id organisation_id, const NewLogEntry& e, std::int64_t now_unix_ms, Id* id) {
  if (!IsLogKind(e.kind)) {
    return Misuse("log entry kind '" + e.kind +
                  "' must be re-tensioned, sensor-replaced, repaired, inspected or other");
  }
  if (e.author.empty() || e.author.size() > kMaxLogAuthor) {
    return Misuse("log entry author must have 1.." + std::to_string(kMaxLogAuthor) + " characters");
  }
  if (e.note.size() > kMaxLogNote) {
    return Misuse("log entry note must have at most " + std::to_string(kMaxLogNote) + " characters");
  }
  return internal::WriteTransaction(db_, [&]() -> StorageStatus {
    Statement member(
        db_, "SELECT 1 FROM member WHERE id = ?1 AND organisation_id = ?2 AND deleted_at_unix_ms IS NULL");
    member.Bind(1, e.member_id).Bind(2, organisation_id);
    const int rc = member.Step();
    if (rc == SQLITE_DONE)
      return StorageStatus::NotFound("member " + std::to_string(e.member_id) + " not found");
    if (rc != SQLITE_ROW) return member.status();
    Statement s(
        db_,
        "INSERT INTO member_log (organisation_id, member_id, kind, note, author, occurred_at_unix_ms, "
        "new_baseline, created_at_unix_ms) VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8) RETURNING id");
    s.Bind(1, organisation_id)
        .Bind(2, e.member_id)
        .Bind(3, std::string_view(e.kind))
        .Bind(4, std::string_view(e.note))
        .Bind(5, std::string_view(e.author))
        .Bind(6, e.occurred_at_unix_ms)
        .Bind(7, static_cast<std::int64_t>(e.new_baseline ? 1 : 0))
        .Bind(8, now_unix_ms);
    return internal::InsertReturningId(s, id);
  });
}

StorageStatus Logbook::Get(Id organisation_id, Id entry_id, LogEntry* out) {
  Statement s(db_,
              std::string("SELECT ") + kColumns + " FROM member_log WHERE id = ?1 AND organisation_id = ?2");
  s.Bind(1, entry_id).Bind(2, organisation_id);
  return internal::ReadOne(s, "log entry " + std::to_string(entry_id),
                           [&](const Statement& row) { *out = Read(row); });
}

StorageStatus Logbook::List(Id organisation_id, Id member_id, std::int64_t from_unix_ms,
                            std::int64_t to_unix_ms, std::vector<LogEntry>* out) {
  Statement s(db_, std::string("SELECT ") + kColumns +
                       " FROM member_log WHERE organisation_id = ?1 AND member_id = ?2 AND "
                       "occurred_at_unix_ms >= ?3 AND occurred_at_unix_ms < ?4 "
                       "ORDER BY occurred_at_unix_ms, id");
  s.Bind(1, organisation_id).Bind(2, member_id).Bind(3, from_unix_ms).Bind(4, to_unix_ms);
  return internal::ReadAll(s, out, Read);
}

StorageStatus Logbook::Delete(Id organisation_id, Id entry_id) {
  return internal::WriteTransaction(db_, [&]() -> StorageStatus {
    Statement s(db_, "DELETE FROM member_log WHERE id = ?1 AND organisation_id = ?2");
    s.Bind(1, entry_id).Bind(2, organisation_id);
    return internal::RunOneRow(s, "log entry " + std::to_string(entry_id));
  });
}

StorageStatus Logbook::LatestBaselineStart(Id organisation_id, Id member_id,
                                           std::int64_t* occurred_at_unix_ms) {
  Statement s(db_,
              "SELECT max(occurred_at_unix_ms) FROM member_log WHERE organisation_id = ?1 AND member_id = ?2 "
              "AND new_baseline = 1");
  s.Bind(1, organisation_id).Bind(2, member_id);
  if (s.Step() != SQLITE_ROW) return s.status();
  const std::optional<std::int64_t> t = s.OptionalInt64(0);
  if (!t) return StorageStatus::NotFound("no new-baseline entry for member " + std::to_string(member_id));
  *occurred_at_unix_ms = *t;
  return {};
}

}  // namespace taut::storage
