// The member logbook (schema step 6): what people did to a member and when
// (re-tensioned, sensor replaced, repaired, inspected, other), with free
// text and the author's name. An entry with new_baseline restarts the
// member's drift baseline at its time (estimation/drift.h item 6).
//
// Conventions as storage/repository.h: organisation-scoped (another
// organisation's member or entry is not_found()), times in ms since the
// Unix epoch (UTC), every write one transaction, values bound as
// parameters. Not thread-safe; one per connection.
#pragma once

#include <cstdint>
#include <string>
#include <string_view>
#include <vector>

#include "storage/database.h"
#include "storage/repository.h"

namespace taut::storage {

// The kinds an entry may have (the CHECK of schema step 6).
inline constexpr const char* kLogKinds[] = {"re-tensioned", "sensor-replaced", "repaired", "inspected",
                                            "other"};
bool IsLogKind(std::string_view kind);

inline constexpr std::size_t kMaxLogNote = 4000;   // characters (bytes of UTF-8)
inline constexpr std::size_t kMaxLogAuthor = 200;  // 1..200

struct NewLogEntry {
  Id member_id = 0;
  std::string kind;    // IsLogKind
  std::string note;    // <= kMaxLogNote
  std::string author;  // 1..kMaxLogAuthor
  std::int64_t occurred_at_unix_ms = 0;
  bool new_baseline = false;
};

struct LogEntry {
  Id id = 0;
  Id organisation_id = 0;
  Id member_id = 0;
  std::string kind, note, author;
  std::int64_t occurred_at_unix_ms = 0;
  bool new_baseline = false;
  std::int64_t created_at_unix_ms = 0;
};

class Logbook {
 public:
  explicit Logbook(Database& db) : db_(db) {}  // not owned; must outlive this

  // The member must be live (not_found() otherwise). Validation failures
  // are SQLITE_MISUSE naming the field.
  StorageStatus Add(Id organisation_id, const NewLogEntry& entry, std::int64_t now_unix_ms, Id* id);
  StorageStatus Get(Id organisation_id, Id entry_id, LogEntry* out);
  // Entries of a member with from <= occurred_at < to, by (occurred_at, id).
  StorageStatus List(Id organisation_id, Id member_id, std::int64_t from_unix_ms, std::int64_t to_unix_ms,
                     std::vector<LogEntry>* out);
  StorageStatus Delete(Id organisation_id, Id entry_id);
  // The newest occurred_at of the member's entries with new_baseline;
  // not_found() when there is none.
  StorageStatus LatestBaselineStart(Id organisation_id, Id member_id, std::int64_t* occurred_at_unix_ms);

 private:
  Database& db_;
};

}  // namespace taut::storage
