// Repository: structures, members (versioned) and their drift settings (repository.h).
#include <cmath>
#include <cstring>
#include <limits>

#include "storage/repository.h"
#include "storage/repository_internal.h"
#include "storage/statement.h"

namespace taut::storage {

using namespace repository_internal;  // NOLINT(google-build-using-namespace): this file's own helpers

StorageStatus Repository::CreateStructure(Id organisation_id, std::string_view name,
                                          std::string_view description, std::int64_t now_unix_ms, Id* id) {
  return Write([&]() -> StorageStatus {
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement s(db_,
                "INSERT INTO structure (organisation_id, name, description, created_at_unix_ms) "
                "VALUES (?1, ?2, ?3, ?4) RETURNING id");
    s.Bind(1, organisation_id).Bind(2, name).Bind(3, description).Bind(4, now_unix_ms);
    if (StorageStatus r = InsertReturningId(s, id); !r.ok()) return r;
    return {};
  });
}

StorageStatus Repository::GetStructure(Id organisation_id, Id structure_id, Structure* out) {
  Statement s(db_,
              "SELECT id, organisation_id, name, description, created_at_unix_ms FROM structure "
              "WHERE id = ?1 AND organisation_id = ?2 AND deleted_at_unix_ms IS NULL");
  s.Bind(1, structure_id).Bind(2, organisation_id);
  return ReadOne(s, IdText("structure", structure_id), [&](const Statement& r) {
    *out = {r.Int64(0), r.Int64(1), r.Text(2), r.Text(3), r.Int64(4)};
  });
}

StorageStatus Repository::ListStructures(Id organisation_id, std::vector<Structure>* out) {
  Statement s(db_,
              "SELECT id, organisation_id, name, description, created_at_unix_ms FROM structure "
              "WHERE organisation_id = ?1 AND deleted_at_unix_ms IS NULL ORDER BY id");
  s.Bind(1, organisation_id);
  return ReadAll(s, out, [](const Statement& r) {
    return Structure{r.Int64(0), r.Int64(1), r.Text(2), r.Text(3), r.Int64(4)};
  });
}

StorageStatus Repository::DeleteStructure(Id organisation_id, Id structure_id, std::int64_t now_unix_ms) {
  return Write([&]() -> StorageStatus {
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement live(db_,
                   "SELECT count(*) FROM member WHERE structure_id = ?1 AND organisation_id = ?2 "
                   "AND deleted_at_unix_ms IS NULL");
    live.Bind(1, structure_id).Bind(2, organisation_id);
    if (live.Step() != SQLITE_ROW) return live.status();
    if (live.Int64(0) > 0) {
      return {SQLITE_CONSTRAINT, IdText("structure", structure_id) + " still has " +
                                     std::to_string(live.Int64(0)) + " live members; delete them first"};
    }
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement s(db_,
                "UPDATE structure SET deleted_at_unix_ms = ?3 "
                "WHERE id = ?1 AND organisation_id = ?2 AND deleted_at_unix_ms IS NULL");
    s.Bind(1, structure_id).Bind(2, organisation_id).Bind(3, now_unix_ms);
    return RunOneRow(s, IdText("structure", structure_id));
  });
}

StorageStatus Repository::CreateMember(Id organisation_id, Id structure_id, std::string_view external_id,
                                       std::string_view description_json, std::int64_t now_unix_ms, Id* id) {
  return Write([&]() -> StorageStatus {
    if (StorageStatus f = Fault(); !f.ok()) return f;
    // The structure must be this organisation's and not deleted; the
    // composite foreign key alone would accept a deleted one.
    Statement parent(
        db_, "SELECT 1 FROM structure WHERE id = ?1 AND organisation_id = ?2 AND deleted_at_unix_ms IS NULL");
    parent.Bind(1, structure_id).Bind(2, organisation_id);
    const int rc = parent.Step();
    if (rc == SQLITE_DONE) return StorageStatus::NotFound(IdText("structure", structure_id) + " not found");
    if (rc != SQLITE_ROW) return parent.status();
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement m(db_,
                "INSERT INTO member (organisation_id, structure_id, external_id, current_version, "
                "created_at_unix_ms) VALUES (?1, ?2, ?3, 1, ?4) RETURNING id");
    m.Bind(1, organisation_id).Bind(2, structure_id).Bind(3, external_id).Bind(4, now_unix_ms);
    Id member_id = 0;
    if (StorageStatus r = InsertReturningId(m, &member_id); !r.ok()) return r;
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement v(db_,
                "INSERT INTO member_version (member_id, version, description_json, created_at_unix_ms) "
                "VALUES (?1, 1, ?2, ?3)");
    v.Bind(1, member_id).Bind(2, description_json).Bind(3, now_unix_ms);
    if (StorageStatus r = v.Run(); !r.ok()) return r;
    *id = member_id;
    return {};
  });
}

StorageStatus Repository::UpdateMember(Id organisation_id, Id member_id, std::string_view description_json,
                                       std::int64_t now_unix_ms, std::int64_t* new_version) {
  return Write([&]() -> StorageStatus {
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement bump(db_,
                   "UPDATE member SET current_version = current_version + 1 "
                   "WHERE id = ?1 AND organisation_id = ?2 AND deleted_at_unix_ms IS NULL "
                   "RETURNING current_version");
    bump.Bind(1, member_id).Bind(2, organisation_id);
    std::int64_t version = 0;
    if (StorageStatus r =
            ReadOne(bump, IdText("member", member_id), [&](const Statement& row) { version = row.Int64(0); });
        !r.ok()) {
      return r;
    }
    if (bump.Step() != SQLITE_DONE) return bump.status();  // finish the RETURNING statement
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement v(db_,
                "INSERT INTO member_version (member_id, version, description_json, created_at_unix_ms) "
                "VALUES (?1, ?2, ?3, ?4)");
    v.Bind(1, member_id).Bind(2, version).Bind(3, description_json).Bind(4, now_unix_ms);
    if (StorageStatus r = v.Run(); !r.ok()) return r;
    *new_version = version;
    return {};
  });
}

StorageStatus Repository::GetMember(Id organisation_id, Id member_id, Member* out) {
  Statement s(db_, std::string("SELECT ") + kMemberColumns +
                       " FROM member m JOIN member_version v ON v.member_id = m.id AND "
                       "v.version = m.current_version WHERE m.id = ?1 AND m.organisation_id = ?2 AND "
                       "m.deleted_at_unix_ms IS NULL");
  s.Bind(1, member_id).Bind(2, organisation_id);
  return ReadOne(s, IdText("member", member_id), [&](const Statement& r) { *out = ReadMember(r); });
}

StorageStatus Repository::GetMemberVersion(Id organisation_id, Id member_id, std::int64_t version,
                                           Member* out) {
  Statement s(db_, std::string("SELECT ") + kMemberColumns +
                       " FROM member m JOIN member_version v ON v.member_id = m.id "
                       "WHERE m.id = ?1 AND m.organisation_id = ?2 AND v.version = ?3");
  s.Bind(1, member_id).Bind(2, organisation_id).Bind(3, version);
  return ReadOne(s, IdText("member", member_id) + " version " + std::to_string(version),
                 [&](const Statement& r) { *out = ReadMember(r); });
}

StorageStatus Repository::ListMembers(Id organisation_id, Id structure_id, std::vector<Member>* out) {
  Statement s(db_, std::string("SELECT ") + kMemberColumns +
                       " FROM member m JOIN member_version v ON v.member_id = m.id AND "
                       "v.version = m.current_version WHERE m.structure_id = ?1 AND "
                       "m.organisation_id = ?2 AND m.deleted_at_unix_ms IS NULL ORDER BY m.id");
  s.Bind(1, structure_id).Bind(2, organisation_id);
  return ReadAll(s, out, ReadMember);
}

StorageStatus Repository::DeleteMember(Id organisation_id, Id member_id, std::int64_t now_unix_ms) {
  return Write([&]() -> StorageStatus {
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement s(db_,
                "UPDATE member SET deleted_at_unix_ms = ?3 "
                "WHERE id = ?1 AND organisation_id = ?2 AND deleted_at_unix_ms IS NULL");
    s.Bind(1, member_id).Bind(2, organisation_id).Bind(3, now_unix_ms);
    return RunOneRow(s, IdText("member", member_id));
  });
}

StorageStatus Repository::GetDriftSettings(Id organisation_id, Id member_id, std::string* settings_json) {
  Statement s(
      db_, "SELECT settings_json FROM member_drift_settings WHERE organisation_id = ?1 AND member_id = ?2");
  s.Bind(1, organisation_id).Bind(2, member_id);
  return ReadOne(s, "drift settings of " + IdText("member", member_id),
                 [&](const Statement& r) { *settings_json = r.Text(0); });
}

StorageStatus Repository::SetDriftSettings(Id organisation_id, Id member_id, std::string_view settings_json,
                                           std::int64_t now_unix_ms) {
  return Write([&]() -> StorageStatus {
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement member(
        db_, "SELECT 1 FROM member WHERE id = ?1 AND organisation_id = ?2 AND deleted_at_unix_ms IS NULL");
    member.Bind(1, member_id).Bind(2, organisation_id);
    if (StorageStatus m = ReadOne(member, IdText("member", member_id), [](const Statement&) {}); !m.ok()) {
      return m;
    }
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement s(db_,
                "INSERT INTO member_drift_settings (organisation_id, member_id, settings_json, "
                "updated_at_unix_ms) VALUES (?1, ?2, ?3, ?4) ON CONFLICT (organisation_id, member_id) DO "
                "UPDATE SET settings_json = excluded.settings_json, updated_at_unix_ms = "
                "excluded.updated_at_unix_ms");
    s.Bind(1, organisation_id).Bind(2, member_id).Bind(3, settings_json).Bind(4, now_unix_ms);
    return s.Run();
  });
}

StorageStatus Repository::ListAllDriftSettings(std::vector<MemberSettings>* out) {
  Statement s(
      db_,
      "SELECT d.organisation_id, d.member_id, d.settings_json FROM member_drift_settings d JOIN member m "
      "ON m.id = d.member_id AND m.organisation_id = d.organisation_id WHERE m.deleted_at_unix_ms IS "
      "NULL ORDER BY d.organisation_id, d.member_id");
  return ReadAll(s, out, [](const Statement& r) {
    return MemberSettings{r.Int64(0), r.Int64(1), r.Text(2)};
  });
}

}  // namespace taut::storage
