#include "storage/repository.h"

#include <bit>
#include <cmath>
#include <cstring>
#include <limits>

#include "storage/statement.h"

namespace taut::storage {

using internal::Statement;

namespace {

// Channel names in the record are joined with this separator; it cannot
// occur in a name ([A-Za-z0-9_], docs/FORMATS.md section 2).
constexpr char kChannelSeparator = ',';
constexpr std::size_t kMaxChannelName = 32;
constexpr std::size_t kSha256HexLength = 64;
constexpr std::size_t kMaxIdempotencyKey = 255;
constexpr std::size_t kBytesPerSample = 4;  // binary32

StorageStatus Misuse(std::string m) { return {SQLITE_MISUSE, std::move(m)}; }

bool IsLowerHex(std::string_view s, std::size_t length) {
  if (s.size() != length) return false;
  for (char c : s) {
    if (!((c >= '0' && c <= '9') || (c >= 'a' && c <= 'f'))) return false;
  }
  return true;
}

bool IsChannelName(std::string_view s) {
  if (s.empty() || s.size() > kMaxChannelName) return false;
  for (char c : s) {
    const bool ok = (c >= 'A' && c <= 'Z') || (c >= 'a' && c <= 'z') || (c >= '0' && c <= '9') || c == '_';
    if (!ok) return false;
  }
  return true;
}

std::string JoinChannels(const std::vector<std::string>& channels) {
  std::string out;
  for (std::size_t i = 0; i < channels.size(); ++i) {
    if (i > 0) out += kChannelSeparator;
    out += channels[i];
  }
  return out;
}

std::vector<std::string> SplitChannels(const std::string& joined) {
  std::vector<std::string> out;
  std::size_t start = 0;
  while (start <= joined.size()) {
    const std::size_t end = joined.find(kChannelSeparator, start);
    if (end == std::string::npos) {
      out.push_back(joined.substr(start));
      break;
    }
    out.push_back(joined.substr(start, end - start));
    start = end + 1;
  }
  return out;
}

std::optional<Role> ParseRole(const std::string& s) {
  if (s == "read") return Role::kRead;
  if (s == "upload") return Role::kUpload;
  if (s == "admin") return Role::kAdmin;
  return std::nullopt;
}

JobState ParseJobState(const std::string& s) {
  if (s == "running") return JobState::kRunning;
  if (s == "done") return JobState::kDone;
  if (s == "failed") return JobState::kFailed;
  return JobState::kQueued;  // the CHECK constraint admits nothing else
}

AlertState ParseAlertState(const std::string& s) {
  if (s == "acknowledged") return AlertState::kAcknowledged;
  if (s == "resolved") return AlertState::kResolved;
  return AlertState::kOpen;
}

// Reads the single row of `stmt` into `fill`, or NotFound(what).
template <typename Fill>
StorageStatus ReadOne(Statement& stmt, const std::string& what, Fill fill) {
  const int rc = stmt.Step();
  if (rc == SQLITE_ROW) {
    fill(stmt);
    return {};
  }
  if (rc == SQLITE_DONE) return StorageStatus::NotFound(what + " not found");
  return stmt.status();
}

template <typename T, typename Fill>
StorageStatus ReadAll(Statement& stmt, std::vector<T>* out, Fill fill) {
  std::vector<T> rows;
  for (;;) {
    const int rc = stmt.Step();
    if (rc == SQLITE_DONE) break;
    if (rc != SQLITE_ROW) return stmt.status();
    rows.push_back(fill(stmt));
  }
  *out = std::move(rows);
  return {};
}

// UPDATE ... that must touch exactly one row (else NotFound(what)).
StorageStatus RunOneRow(Database& db, Statement& stmt, const std::string& what) {
  if (StorageStatus s = stmt.Run(); !s.ok()) return s;
  if (sqlite3_changes(db.handle()) != 1) return StorageStatus::NotFound(what + " not found");
  return {};
}

std::string IdText(const char* kind, Id id) { return std::string(kind) + " " + std::to_string(id); }

constexpr const char* kMemberColumns =
    "m.id, m.organisation_id, m.structure_id, m.external_id, v.version, m.current_version, "
    "v.description_json, m.created_at_unix_ms, v.created_at_unix_ms, m.deleted_at_unix_ms";

Member ReadMember(const Statement& s) {
  Member m;
  m.id = s.Int64(0);
  m.organisation_id = s.Int64(1);
  m.structure_id = s.Int64(2);
  m.external_id = s.Text(3);
  m.version = s.Int64(4);
  m.current_version = s.Int64(5);
  m.description_json = s.Text(6);
  m.created_at_unix_ms = s.Int64(7);
  m.version_created_at_unix_ms = s.Int64(8);
  m.deleted_at_unix_ms = s.OptionalInt64(9);
  return m;
}

constexpr const char* kJobColumns =
    "id, organisation_id, record_id, state, progress, coalesce(failure_reason, ''), attempts, "
    "created_at_unix_ms, started_at_unix_ms, finished_at_unix_ms";

Job ReadJob(const Statement& s) {
  Job j;
  j.id = s.Int64(0);
  j.organisation_id = s.Int64(1);
  j.record_id = s.Int64(2);
  j.state = ParseJobState(s.Text(3));
  j.progress = s.Double(4);
  j.failure_reason = s.Text(5);
  j.attempts = static_cast<int>(s.Int64(6));
  j.created_at_unix_ms = s.Int64(7);
  j.started_at_unix_ms = s.OptionalInt64(8);
  j.finished_at_unix_ms = s.OptionalInt64(9);
  return j;
}

// Columns 0..15; result_json is selected separately where needed.
constexpr const char* kEstimateColumns =
    "id, organisation_id, member_id, member_version, record_id, job_id, measured_at_unix_ms, "
    "temperature_c, axial_force_n, force_std_n, force_ci95_low_n, force_ci95_high_n, "
    "bending_stiffness_nm2, bending_stiffness_std_nm2, created_at_unix_ms, coalesce(verdict_code, '')";

Estimate ReadEstimate(const Statement& s) {
  Estimate e;
  e.id = s.Int64(0);
  e.organisation_id = s.Int64(1);
  e.member_id = s.Int64(2);
  e.member_version = s.Int64(3);
  e.record_id = s.Int64(4);
  e.job_id = s.OptionalInt64(5);
  e.measured_at_unix_ms = s.Int64(6);
  e.temperature_c = s.OptionalDouble(7);
  e.axial_force_n = s.Double(8);
  e.force_std_n = s.OptionalDouble(9);
  e.force_ci95_low_n = s.Double(10);
  e.force_ci95_high_n = s.Double(11);
  e.bending_stiffness_nm2 = s.OptionalDouble(12);
  e.bending_stiffness_std_nm2 = s.OptionalDouble(13);
  e.created_at_unix_ms = s.Int64(14);
  e.verdict_code = s.Text(15);
  return e;
}

constexpr const char* kAlertColumns =
    "id, organisation_id, member_id, estimate_id, rule, message, evidence, state, raised_at_unix_ms, "
    "acknowledged_at_unix_ms, resolved_at_unix_ms";

Alert ReadAlert(const Statement& s) {
  Alert a;
  a.id = s.Int64(0);
  a.organisation_id = s.Int64(1);
  a.member_id = s.Int64(2);
  a.estimate_id = s.OptionalInt64(3);
  a.rule = s.Text(4);
  a.message = s.Text(5);
  a.evidence = s.Text(6);
  a.state = ParseAlertState(s.Text(7));
  a.raised_at_unix_ms = s.Int64(8);
  a.acknowledged_at_unix_ms = s.OptionalInt64(9);
  a.resolved_at_unix_ms = s.OptionalInt64(10);
  return a;
}

StorageStatus ValidateRecord(const NewRecord& r) {
  if (r.units != "m/s2" && r.units != "g")
    return Misuse("record units '" + r.units + "' must be 'm/s2' or 'g'");
  if (r.excitation != "ambient" && r.excitation != "impact") {
    return Misuse("record excitation '" + r.excitation + "' must be 'ambient' or 'impact'");
  }
  if (!(r.sample_rate_hz > 0) || !std::isfinite(r.sample_rate_hz)) {
    return Misuse("record sample_rate_hz " + std::to_string(r.sample_rate_hz) + " must be finite and > 0");
  }
  if (r.temperature_c && !std::isfinite(*r.temperature_c))
    return Misuse("record temperature_c must be finite");
  if (r.channels.empty()) return Misuse("record channels must not be empty");
  for (const std::string& c : r.channels) {
    if (!IsChannelName(c)) return Misuse("record channel name '" + c + "' must match [A-Za-z0-9_]{1,32}");
  }
  if (r.samples.empty() || r.samples.size() % r.channels.size() != 0) {
    return Misuse("record samples size " + std::to_string(r.samples.size()) +
                  " must be a positive multiple of the channel count " + std::to_string(r.channels.size()));
  }
  for (double v : r.samples) {
    if (!std::isfinite(v)) return Misuse("record samples must be finite");
  }
  if (!IsLowerHex(r.content_sha256, kSha256HexLength)) {
    return Misuse("record content_sha256 '" + r.content_sha256 + "' must be 64 lowercase hex digits");
  }
  if (!IsLowerHex(r.samples_sha256, kSha256HexLength)) {
    return Misuse("record samples_sha256 '" + r.samples_sha256 + "' must be 64 lowercase hex digits");
  }
  if (r.idempotency_key.size() > kMaxIdempotencyKey) {
    return Misuse("record idempotency_key has " + std::to_string(r.idempotency_key.size()) +
                  " characters, more than " + std::to_string(kMaxIdempotencyKey));
  }
  return {};
}

}  // namespace

const char* RoleName(Role role) {
  switch (role) {
    case Role::kRead:
      return "read";
    case Role::kUpload:
      return "upload";
    case Role::kAdmin:
      return "admin";
  }
  return "read";
}

const char* JobStateName(JobState state) {
  switch (state) {
    case JobState::kQueued:
      return "queued";
    case JobState::kRunning:
      return "running";
    case JobState::kDone:
      return "done";
    case JobState::kFailed:
      return "failed";
  }
  return "queued";
}

const char* AlertStateName(AlertState state) {
  switch (state) {
    case AlertState::kOpen:
      return "open";
    case AlertState::kAcknowledged:
      return "acknowledged";
    case AlertState::kResolved:
      return "resolved";
  }
  return "open";
}

std::string EncodeSamples(const std::vector<double>& samples) {
  std::string blob(samples.size() * kBytesPerSample, '\0');
  for (std::size_t i = 0; i < samples.size(); ++i) {
    std::uint32_t bits = std::bit_cast<std::uint32_t>(static_cast<float>(samples[i]));
    for (std::size_t b = 0; b < kBytesPerSample; ++b) {  // little-endian whatever the host order
      blob[i * kBytesPerSample + b] = static_cast<char>((bits >> (8 * b)) & 0xffu);
    }
  }
  return blob;
}

StorageStatus DecodeSamples(std::string_view blob, std::size_t expected_values,
                            std::vector<double>* samples) {
  if (blob.size() != expected_values * kBytesPerSample) {
    return {SQLITE_CORRUPT, "samples blob has " + std::to_string(blob.size()) + " bytes, expected " +
                                std::to_string(expected_values * kBytesPerSample) + " (" +
                                std::to_string(expected_values) + " binary32 values)"};
  }
  std::vector<double> out(expected_values);
  for (std::size_t i = 0; i < expected_values; ++i) {
    std::uint32_t bits = 0;
    for (std::size_t b = 0; b < kBytesPerSample; ++b) {
      bits |= static_cast<std::uint32_t>(static_cast<unsigned char>(blob[i * kBytesPerSample + b]))
              << (8 * b);
    }
    out[i] = static_cast<double>(std::bit_cast<float>(bits));
  }
  *samples = std::move(out);
  return {};
}

StorageStatus Repository::Write(const std::function<StorageStatus()>& body) {
  fault_step_ = 0;
  return internal::WriteTransaction(db_, body);
}

StorageStatus Repository::Fault() {
  if (!fault_hook_) return {};
  const int step = ++fault_step_;
  const int rc = fault_hook_(step);
  if (rc == SQLITE_OK) return {};
  return {rc, "injected fault at step " + std::to_string(step)};
}

// ---------------------------------------------------------------- orgs ---

StorageStatus Repository::CreateOrganisation(std::string_view name, std::int64_t now_unix_ms, Id* id) {
  return Write([&]() -> StorageStatus {
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement s(db_.handle(), "INSERT INTO organisation (name, created_at_unix_ms) VALUES (?1, ?2)");
    s.Bind(1, name).Bind(2, now_unix_ms);
    if (StorageStatus r = s.Run(); !r.ok()) return r;
    *id = sqlite3_last_insert_rowid(db_.handle());
    return {};
  });
}

StorageStatus Repository::GetOrganisation(Id organisation_id, Organisation* out) {
  Statement s(db_.handle(), "SELECT id, name, created_at_unix_ms FROM organisation WHERE id = ?1");
  s.Bind(1, organisation_id);
  return ReadOne(s, IdText("organisation", organisation_id), [&](const Statement& r) {
    *out = {r.Int64(0), r.Text(1), r.Int64(2)};
  });
}

StorageStatus Repository::CreateToken(Id organisation_id, const NewToken& token, std::int64_t now_unix_ms,
                                      Id* id) {
  if (token.salt.empty() || token.hash.empty()) return Misuse("token salt and hash must not be empty");
  return Write([&]() -> StorageStatus {
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement s(
        db_.handle(),
        "INSERT INTO api_token (organisation_id, public_id, salt, hash, role, label, created_at_unix_ms) "
        "VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7)");
    s.Bind(1, organisation_id)
        .Bind(2, token.public_id)
        .BindBlob(3, token.salt.data(), token.salt.size())
        .BindBlob(4, token.hash.data(), token.hash.size())
        .Bind(5, std::string_view(RoleName(token.role)))
        .Bind(6, token.label)
        .Bind(7, now_unix_ms);
    if (StorageStatus r = s.Run(); !r.ok()) return r;
    *id = sqlite3_last_insert_rowid(db_.handle());
    return {};
  });
}

namespace {

constexpr const char* kTokenColumns =
    "id, organisation_id, public_id, salt, hash, label, role, created_at_unix_ms, revoked_at_unix_ms";

Token ReadToken(const Statement& r) {
  Token t;
  t.id = r.Int64(0);
  t.organisation_id = r.Int64(1);
  t.public_id = r.Text(2);
  t.salt = r.Blob(3);
  t.hash = r.Blob(4);
  t.label = r.Text(5);
  t.role = ParseRole(r.Text(6)).value_or(Role::kRead);
  t.created_at_unix_ms = r.Int64(7);
  t.revoked_at_unix_ms = r.OptionalInt64(8);
  return t;
}

}  // namespace

StorageStatus Repository::FindToken(std::string_view public_id, Token* out) {
  Statement s(db_.handle(), std::string("SELECT ") + kTokenColumns + " FROM api_token WHERE public_id = ?1");
  s.Bind(1, public_id);
  return ReadOne(s, "token", [&](const Statement& r) { *out = ReadToken(r); });
}

StorageStatus Repository::ListTokens(Id organisation_id, std::vector<Token>* out) {
  Statement s(db_.handle(), std::string("SELECT ") + kTokenColumns +
                                " FROM api_token WHERE organisation_id = ?1 ORDER BY id");
  s.Bind(1, organisation_id);
  return ReadAll(s, out, ReadToken);
}

StorageStatus Repository::RevokeToken(Id organisation_id, Id token_id, std::int64_t now_unix_ms) {
  return Write([&]() -> StorageStatus {
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement s(db_.handle(),
                "UPDATE api_token SET revoked_at_unix_ms = coalesce(revoked_at_unix_ms, ?3) "
                "WHERE id = ?1 AND organisation_id = ?2");
    s.Bind(1, token_id).Bind(2, organisation_id).Bind(3, now_unix_ms);
    return RunOneRow(db_, s, IdText("token", token_id));
  });
}

// ----------------------------------------------------------- structures ---

StorageStatus Repository::CreateStructure(Id organisation_id, std::string_view name,
                                          std::string_view description, std::int64_t now_unix_ms, Id* id) {
  return Write([&]() -> StorageStatus {
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement s(db_.handle(),
                "INSERT INTO structure (organisation_id, name, description, created_at_unix_ms) "
                "VALUES (?1, ?2, ?3, ?4)");
    s.Bind(1, organisation_id).Bind(2, name).Bind(3, description).Bind(4, now_unix_ms);
    if (StorageStatus r = s.Run(); !r.ok()) return r;
    *id = sqlite3_last_insert_rowid(db_.handle());
    return {};
  });
}

StorageStatus Repository::GetStructure(Id organisation_id, Id structure_id, Structure* out) {
  Statement s(db_.handle(),
              "SELECT id, organisation_id, name, description, created_at_unix_ms FROM structure "
              "WHERE id = ?1 AND organisation_id = ?2 AND deleted_at_unix_ms IS NULL");
  s.Bind(1, structure_id).Bind(2, organisation_id);
  return ReadOne(s, IdText("structure", structure_id), [&](const Statement& r) {
    *out = {r.Int64(0), r.Int64(1), r.Text(2), r.Text(3), r.Int64(4)};
  });
}

StorageStatus Repository::ListStructures(Id organisation_id, std::vector<Structure>* out) {
  Statement s(db_.handle(),
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
    Statement live(db_.handle(),
                   "SELECT count(*) FROM member WHERE structure_id = ?1 AND organisation_id = ?2 "
                   "AND deleted_at_unix_ms IS NULL");
    live.Bind(1, structure_id).Bind(2, organisation_id);
    if (live.Step() != SQLITE_ROW) return live.status();
    if (live.Int64(0) > 0) {
      return {SQLITE_CONSTRAINT, IdText("structure", structure_id) + " still has " +
                                     std::to_string(live.Int64(0)) + " live members; delete them first"};
    }
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement s(db_.handle(),
                "UPDATE structure SET deleted_at_unix_ms = ?3 "
                "WHERE id = ?1 AND organisation_id = ?2 AND deleted_at_unix_ms IS NULL");
    s.Bind(1, structure_id).Bind(2, organisation_id).Bind(3, now_unix_ms);
    return RunOneRow(db_, s, IdText("structure", structure_id));
  });
}

// -------------------------------------------------------------- members ---

StorageStatus Repository::CreateMember(Id organisation_id, Id structure_id, std::string_view external_id,
                                       std::string_view description_json, std::int64_t now_unix_ms, Id* id) {
  return Write([&]() -> StorageStatus {
    if (StorageStatus f = Fault(); !f.ok()) return f;
    // The structure must be this organisation's and not deleted; the
    // composite foreign key alone would accept a deleted one.
    Statement parent(
        db_.handle(),
        "SELECT 1 FROM structure WHERE id = ?1 AND organisation_id = ?2 AND deleted_at_unix_ms IS NULL");
    parent.Bind(1, structure_id).Bind(2, organisation_id);
    const int rc = parent.Step();
    if (rc == SQLITE_DONE) return StorageStatus::NotFound(IdText("structure", structure_id) + " not found");
    if (rc != SQLITE_ROW) return parent.status();
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement m(db_.handle(),
                "INSERT INTO member (organisation_id, structure_id, external_id, current_version, "
                "created_at_unix_ms) VALUES (?1, ?2, ?3, 1, ?4)");
    m.Bind(1, organisation_id).Bind(2, structure_id).Bind(3, external_id).Bind(4, now_unix_ms);
    if (StorageStatus r = m.Run(); !r.ok()) return r;
    const Id member_id = sqlite3_last_insert_rowid(db_.handle());
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement v(db_.handle(),
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
    Statement bump(db_.handle(),
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
    Statement v(db_.handle(),
                "INSERT INTO member_version (member_id, version, description_json, created_at_unix_ms) "
                "VALUES (?1, ?2, ?3, ?4)");
    v.Bind(1, member_id).Bind(2, version).Bind(3, description_json).Bind(4, now_unix_ms);
    if (StorageStatus r = v.Run(); !r.ok()) return r;
    *new_version = version;
    return {};
  });
}

StorageStatus Repository::GetMember(Id organisation_id, Id member_id, Member* out) {
  Statement s(db_.handle(),
              std::string("SELECT ") + kMemberColumns +
                  " FROM member m JOIN member_version v ON v.member_id = m.id AND "
                  "v.version = m.current_version WHERE m.id = ?1 AND m.organisation_id = ?2 AND "
                  "m.deleted_at_unix_ms IS NULL");
  s.Bind(1, member_id).Bind(2, organisation_id);
  return ReadOne(s, IdText("member", member_id), [&](const Statement& r) { *out = ReadMember(r); });
}

StorageStatus Repository::GetMemberVersion(Id organisation_id, Id member_id, std::int64_t version,
                                           Member* out) {
  Statement s(db_.handle(), std::string("SELECT ") + kMemberColumns +
                                " FROM member m JOIN member_version v ON v.member_id = m.id "
                                "WHERE m.id = ?1 AND m.organisation_id = ?2 AND v.version = ?3");
  s.Bind(1, member_id).Bind(2, organisation_id).Bind(3, version);
  return ReadOne(s, IdText("member", member_id) + " version " + std::to_string(version),
                 [&](const Statement& r) { *out = ReadMember(r); });
}

StorageStatus Repository::ListMembers(Id organisation_id, Id structure_id, std::vector<Member>* out) {
  Statement s(db_.handle(), std::string("SELECT ") + kMemberColumns +
                                " FROM member m JOIN member_version v ON v.member_id = m.id AND "
                                "v.version = m.current_version WHERE m.structure_id = ?1 AND "
                                "m.organisation_id = ?2 AND m.deleted_at_unix_ms IS NULL ORDER BY m.id");
  s.Bind(1, structure_id).Bind(2, organisation_id);
  return ReadAll(s, out, ReadMember);
}

StorageStatus Repository::DeleteMember(Id organisation_id, Id member_id, std::int64_t now_unix_ms) {
  return Write([&]() -> StorageStatus {
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement s(db_.handle(),
                "UPDATE member SET deleted_at_unix_ms = ?3 "
                "WHERE id = ?1 AND organisation_id = ?2 AND deleted_at_unix_ms IS NULL");
    s.Bind(1, member_id).Bind(2, organisation_id).Bind(3, now_unix_ms);
    return RunOneRow(db_, s, IdText("member", member_id));
  });
}

// ------------------------------------------------------ records and jobs ---

StorageStatus Repository::InsertRecord(Id organisation_id, const NewRecord& record, std::int64_t now_unix_ms,
                                       RecordInsertResult* out) {
  if (StorageStatus v = ValidateRecord(record); !v.ok()) return v;
  const std::string blob = EncodeSamples(record.samples);
  const std::int64_t n_channels = static_cast<std::int64_t>(record.channels.size());
  const std::int64_t n_samples = static_cast<std::int64_t>(record.samples.size()) / n_channels;
  return Write([&]() -> StorageStatus {
    // 1. An earlier upload with the same key, or the same content for the
    //    same member? Two lookups, each on its own unique index (one query
    //    with OR could not seek on a NULL key).
    if (StorageStatus f = Fault(); !f.ok()) return f;
    if (!record.idempotency_key.empty()) {
      Statement by_key(db_.handle(),
                       "SELECT r.id, j.id, r.content_sha256 FROM record r JOIN job j ON j.record_id = r.id "
                       "WHERE r.organisation_id = ?1 AND r.idempotency_key = ?2");
      by_key.Bind(1, organisation_id).Bind(2, record.idempotency_key);
      const int rc = by_key.Step();
      if (rc == SQLITE_ROW) {
        if (by_key.Text(2) != record.content_sha256) {
          return {SQLITE_CONSTRAINT, "idempotency key '" + record.idempotency_key +
                                         "' was already used for a different upload (record " +
                                         std::to_string(by_key.Int64(0)) + ")"};
        }
        *out = {by_key.Int64(0), by_key.Int64(1), true};
        return {};
      }
      if (rc != SQLITE_DONE) return by_key.status();
    }
    Statement by_hash(db_.handle(),
                      "SELECT r.id, j.id FROM record r JOIN job j ON j.record_id = r.id "
                      "WHERE r.member_id = ?1 AND r.content_sha256 = ?2 AND r.organisation_id = ?3");
    by_hash.Bind(1, record.member_id).Bind(2, record.content_sha256).Bind(3, organisation_id);
    int rc = by_hash.Step();
    if (rc == SQLITE_ROW) {
      *out = {by_hash.Int64(0), by_hash.Int64(1), true};
      return {};
    }
    if (rc != SQLITE_DONE) return by_hash.status();

    // 2. The member must be this organisation's and live; its current
    //    version is the one the record was taken against.
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement member(db_.handle(),
                     "SELECT current_version FROM member WHERE id = ?1 AND organisation_id = ?2 AND "
                     "deleted_at_unix_ms IS NULL");
    member.Bind(1, record.member_id).Bind(2, organisation_id);
    rc = member.Step();
    if (rc == SQLITE_DONE) return StorageStatus::NotFound(IdText("member", record.member_id) + " not found");
    if (rc != SQLITE_ROW) return member.status();
    const std::int64_t member_version = member.Int64(0);

    // 3. The record.
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement ins(
        db_.handle(),
        "INSERT INTO record (organisation_id, member_id, member_version, recorded_at_unix_ms, "
        "temperature_c, units, excitation, sample_rate_hz, channels, channel_count, sample_count, "
        "sample_format, samples, content_sha256, samples_sha256, idempotency_key, created_at_unix_ms, "
        "reader_notes) "
        "VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11, 'f32le', ?12, ?13, ?14, ?15, ?16, ?17)");
    ins.Bind(1, organisation_id)
        .Bind(2, record.member_id)
        .Bind(3, member_version)
        .Bind(4, record.recorded_at_unix_ms)
        .Bind(5, record.temperature_c)
        .Bind(6, record.units)
        .Bind(7, record.excitation)
        .Bind(8, record.sample_rate_hz)
        .Bind(9, JoinChannels(record.channels))
        .Bind(10, n_channels)
        .Bind(11, n_samples)
        .BindBlob(12, blob.data(), blob.size())
        .Bind(13, record.content_sha256)
        .Bind(14, record.samples_sha256);
    if (record.idempotency_key.empty()) {
      ins.BindNull(15);
    } else {
      ins.Bind(15, record.idempotency_key);
    }
    ins.Bind(16, now_unix_ms).Bind(17, record.reader_notes);
    if (StorageStatus r = ins.Run(); !r.ok()) return r;
    const Id record_id = sqlite3_last_insert_rowid(db_.handle());

    // 4. Its job.
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement job(db_.handle(),
                  "INSERT INTO job (organisation_id, record_id, state, progress, created_at_unix_ms) "
                  "VALUES (?1, ?2, 'queued', 0, ?3)");
    job.Bind(1, organisation_id).Bind(2, record_id).Bind(3, now_unix_ms);
    if (StorageStatus r = job.Run(); !r.ok()) return r;
    *out = {record_id, sqlite3_last_insert_rowid(db_.handle()), false};
    return {};
  });
}

StorageStatus Repository::GetRecord(Id organisation_id, Id record_id, Record* out) {
  Statement s(
      db_.handle(),
      "SELECT id, organisation_id, member_id, member_version, recorded_at_unix_ms, temperature_c, units, "
      "excitation, sample_rate_hz, channels, channel_count, sample_count, samples, content_sha256, "
      "samples_sha256, coalesce(idempotency_key, ''), created_at_unix_ms, reader_notes FROM record "
      "WHERE id = ?1 AND organisation_id = ?2");
  s.Bind(1, record_id).Bind(2, organisation_id);
  Record r;
  std::string blob;
  std::int64_t n_channels = 0;
  StorageStatus st = ReadOne(s, IdText("record", record_id), [&](const Statement& row) {
    r.id = row.Int64(0);
    r.organisation_id = row.Int64(1);
    r.member_id = row.Int64(2);
    r.member_version = row.Int64(3);
    r.recorded_at_unix_ms = row.Int64(4);
    r.temperature_c = row.OptionalDouble(5);
    r.units = row.Text(6);
    r.excitation = row.Text(7);
    r.sample_rate_hz = row.Double(8);
    r.channels = SplitChannels(row.Text(9));
    n_channels = row.Int64(10);
    r.sample_count = row.Int64(11);
    blob = row.Blob(12);
    r.content_sha256 = row.Text(13);
    r.samples_sha256 = row.Text(14);
    r.idempotency_key = row.Text(15);
    r.created_at_unix_ms = row.Int64(16);
    r.reader_notes = row.Text(17);
  });
  if (!st.ok()) return st;
  if (static_cast<std::int64_t>(r.channels.size()) != n_channels) {
    return {SQLITE_CORRUPT, IdText("record", record_id) + " lists " + std::to_string(r.channels.size()) +
                                " channel names but channel_count is " + std::to_string(n_channels)};
  }
  if (StorageStatus d =
          DecodeSamples(blob, static_cast<std::size_t>(n_channels * r.sample_count), &r.samples);
      !d.ok()) {
    d.message = IdText("record", record_id) + ": " + d.message;
    return d;
  }
  *out = std::move(r);
  return {};
}

StorageStatus Repository::GetJob(Id organisation_id, Id job_id, Job* out) {
  Statement s(db_.handle(),
              std::string("SELECT ") + kJobColumns + " FROM job WHERE id = ?1 AND organisation_id = ?2");
  s.Bind(1, job_id).Bind(2, organisation_id);
  return ReadOne(s, IdText("job", job_id), [&](const Statement& r) { *out = ReadJob(r); });
}

StorageStatus Repository::GetJobForRecord(Id organisation_id, Id record_id, Job* out) {
  Statement s(db_.handle(), std::string("SELECT ") + kJobColumns +
                                " FROM job WHERE record_id = ?1 AND organisation_id = ?2");
  s.Bind(1, record_id).Bind(2, organisation_id);
  return ReadOne(s, "job of " + IdText("record", record_id), [&](const Statement& r) { *out = ReadJob(r); });
}

StorageStatus Repository::ClaimNextJob(std::int64_t now_unix_ms, Job* out, bool* claimed) {
  *claimed = false;
  return Write([&]() -> StorageStatus {
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement s(
        db_.handle(),
        std::string("UPDATE job SET state = 'running', progress = 0, attempts = attempts + 1, "
                    "started_at_unix_ms = ?1, finished_at_unix_ms = NULL "
                    // Fair between organisations: the oldest queued job of
                    // the organisation with the fewest running jobs (ties:
                    // the one whose oldest queued job is oldest), so one
                    // organisation's backlog delays another's job by at
                    // most one job.
                    "WHERE id = (SELECT q.id FROM job q WHERE q.state = 'queued' AND "
                    "q.organisation_id = (SELECT o.organisation_id FROM job o WHERE o.state = 'queued' "
                    "GROUP BY o.organisation_id ORDER BY (SELECT COUNT(*) FROM job r WHERE "
                    "r.state = 'running' AND r.organisation_id = o.organisation_id), MIN(o.id) LIMIT 1) "
                    "ORDER BY q.id LIMIT 1) "
                    "RETURNING ") +
            kJobColumns);
    s.Bind(1, now_unix_ms);
    const int rc = s.Step();
    if (rc == SQLITE_DONE) return {};
    if (rc != SQLITE_ROW) return s.status();
    Job j = ReadJob(s);
    if (s.Step() != SQLITE_DONE) return s.status();
    *out = std::move(j);
    *claimed = true;
    return {};
  });
}

StorageStatus Repository::SetJobProgress(Id job_id, double progress) {
  if (!(progress >= 0.0 && progress <= 1.0)) {
    return Misuse("job progress " + std::to_string(progress) + " must be in [0, 1]");
  }
  return Write([&]() -> StorageStatus {
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement s(db_.handle(), "UPDATE job SET progress = ?2 WHERE id = ?1 AND state = 'running'");
    s.Bind(1, job_id).Bind(2, progress);
    return RunOneRow(db_, s, "running " + IdText("job", job_id));
  });
}

StorageStatus Repository::FailJob(Id job_id, std::string_view reason, std::int64_t now_unix_ms) {
  if (reason.empty()) return Misuse("job failure reason must not be empty");
  return Write([&]() -> StorageStatus {
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement s(db_.handle(),
                "UPDATE job SET state = 'failed', failure_reason = ?2, finished_at_unix_ms = ?3 "
                "WHERE id = ?1 AND state = 'running'");
    s.Bind(1, job_id).Bind(2, reason).Bind(3, now_unix_ms);
    return RunOneRow(db_, s, "running " + IdText("job", job_id));
  });
}

StorageStatus Repository::CompleteJobWithEstimate(Id job_id, const NewEstimate& e, std::int64_t now_unix_ms,
                                                  Id* estimate_id) {
  const auto finite = [](const std::optional<double>& v) { return !v || std::isfinite(*v); };
  if (!std::isfinite(e.axial_force_n) || !std::isfinite(e.force_ci95_low_n) ||
      !std::isfinite(e.force_ci95_high_n) || !finite(e.force_std_n) || !finite(e.bending_stiffness_nm2) ||
      !finite(e.bending_stiffness_std_nm2)) {
    return Misuse("estimate values must be finite");
  }
  if (!(e.force_ci95_low_n <= e.axial_force_n && e.axial_force_n <= e.force_ci95_high_n)) {
    return Misuse("estimate axial_force_n " + std::to_string(e.axial_force_n) + " must lie in its ci95 [" +
                  std::to_string(e.force_ci95_low_n) + ", " + std::to_string(e.force_ci95_high_n) + "]");
  }
  if ((e.force_std_n && *e.force_std_n < 0) ||
      (e.bending_stiffness_std_nm2 && *e.bending_stiffness_std_nm2 < 0)) {
    return Misuse("estimate standard deviations must be >= 0");
  }
  return Write([&]() -> StorageStatus {
    // 1. The job must be running and belong to the record.
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement job(
        db_.handle(),
        "SELECT r.organisation_id, r.member_id, r.member_version, r.recorded_at_unix_ms, r.temperature_c "
        "FROM job j JOIN record r ON r.id = j.record_id WHERE j.id = ?1 AND j.state = 'running' AND "
        "j.record_id = ?2");
    job.Bind(1, job_id).Bind(2, e.record_id);
    const int rc = job.Step();
    if (rc == SQLITE_DONE) {
      return StorageStatus::NotFound("running " + IdText("job", job_id) + " of " +
                                     IdText("record", e.record_id) + " not found");
    }
    if (rc != SQLITE_ROW) return job.status();
    const Id organisation_id = job.Int64(0);
    const Id member_id = job.Int64(1);
    const std::int64_t member_version = job.Int64(2);
    const std::int64_t measured_at = job.Int64(3);
    const std::optional<double> temperature = job.OptionalDouble(4);

    // 2. The estimate.
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement ins(
        db_.handle(),
        "INSERT INTO estimate (organisation_id, member_id, member_version, record_id, job_id, "
        "measured_at_unix_ms, temperature_c, axial_force_n, force_std_n, force_ci95_low_n, "
        "force_ci95_high_n, bending_stiffness_nm2, bending_stiffness_std_nm2, result_json, "
        "created_at_unix_ms, end_fixity_json, verdict_code) VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, "
        "?11, ?12, ?13, ?14, ?15, CASE WHEN json_valid(?14) THEN json_extract(?14, '$.end_fixity') END, "
        "CASE WHEN json_valid(?14) THEN json_extract(?14, '$.verdict.code') END)");
    ins.Bind(1, organisation_id)
        .Bind(2, member_id)
        .Bind(3, member_version)
        .Bind(4, e.record_id)
        .Bind(5, job_id)
        .Bind(6, measured_at)
        .Bind(7, temperature)
        .Bind(8, e.axial_force_n)
        .Bind(9, e.force_std_n)
        .Bind(10, e.force_ci95_low_n)
        .Bind(11, e.force_ci95_high_n)
        .Bind(12, e.bending_stiffness_nm2)
        .Bind(13, e.bending_stiffness_std_nm2)
        .Bind(14, e.result_json)
        .Bind(15, now_unix_ms);
    if (StorageStatus r = ins.Run(); !r.ok()) return r;
    const Id id = sqlite3_last_insert_rowid(db_.handle());

    // 3. The job is done.
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement done(db_.handle(),
                   "UPDATE job SET state = 'done', progress = 1, finished_at_unix_ms = ?2 WHERE id = ?1");
    done.Bind(1, job_id).Bind(2, now_unix_ms);
    if (StorageStatus r = RunOneRow(db_, done, IdText("job", job_id)); !r.ok()) return r;
    *estimate_id = id;
    return {};
  });
}

StorageStatus Repository::RequeueRunningJobs(int* count) {
  return Write([&]() -> StorageStatus {
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement s(
        db_.handle(),
        "UPDATE job SET state = 'queued', progress = 0, started_at_unix_ms = NULL WHERE state = 'running'");
    if (StorageStatus r = s.Run(); !r.ok()) return r;
    *count = sqlite3_changes(db_.handle());
    return {};
  });
}

// ------------------------------------------------------------ estimates ---

StorageStatus Repository::GetEstimate(Id organisation_id, Id estimate_id, Estimate* out) {
  Statement s(db_.handle(), std::string("SELECT ") + kEstimateColumns +
                                ", result_json FROM estimate WHERE id = ?1 AND organisation_id = ?2");
  s.Bind(1, estimate_id).Bind(2, organisation_id);
  return ReadOne(s, IdText("estimate", estimate_id), [&](const Statement& r) {
    *out = ReadEstimate(r);
    out->result_json = r.Text(16);
  });
}

StorageStatus Repository::LatestEstimate(Id organisation_id, Id member_id, Estimate* out) {
  Statement s(db_.handle(), std::string("SELECT ") + kEstimateColumns +
                                ", result_json FROM estimate WHERE organisation_id = ?1 AND member_id = ?2 "
                                "ORDER BY measured_at_unix_ms DESC, id DESC LIMIT 1");
  s.Bind(1, organisation_id).Bind(2, member_id);
  return ReadOne(s, "estimate of " + IdText("member", member_id), [&](const Statement& r) {
    *out = ReadEstimate(r);
    out->result_json = r.Text(16);
  });
}

StorageStatus Repository::ForceHistory(Id organisation_id, Id member_id, std::int64_t from_unix_ms,
                                       std::int64_t to_unix_ms, std::vector<Estimate>* out) {
  if (from_unix_ms > to_unix_ms) {
    return Misuse("history range from " + std::to_string(from_unix_ms) + " ms is after to " +
                  std::to_string(to_unix_ms) + " ms");
  }
  Statement s(db_.handle(), std::string("SELECT ") + kEstimateColumns +
                                " FROM estimate WHERE organisation_id = ?1 AND member_id = ?2 AND "
                                "measured_at_unix_ms >= ?3 AND measured_at_unix_ms < ?4 "
                                "ORDER BY measured_at_unix_ms, id LIMIT ?5");
  s.Bind(1, organisation_id)
      .Bind(2, member_id)
      .Bind(3, from_unix_ms)
      .Bind(4, to_unix_ms)
      .Bind(5, static_cast<std::int64_t>(kMaxHistoryRows));
  return ReadAll(s, out, ReadEstimate);
}

StorageStatus Repository::FixityHistory(Id organisation_id, Id member_id, std::int64_t from_unix_ms,
                                        std::int64_t to_unix_ms, std::vector<FixityRow>* out) {
  if (from_unix_ms > to_unix_ms) {
    return Misuse("history range from " + std::to_string(from_unix_ms) + " ms is after to " +
                  std::to_string(to_unix_ms) + " ms");
  }
  // end_fixity_json is the result's end_fixity, extracted once when the
  // estimate is stored (schema step 5).
  Statement s(db_.handle(),
              "SELECT id, measured_at_unix_ms, end_fixity_json FROM estimate WHERE organisation_id = ?1 AND "
              "member_id = ?2 AND measured_at_unix_ms >= ?3 AND measured_at_unix_ms < ?4 "
              "ORDER BY measured_at_unix_ms, id LIMIT ?5");
  s.Bind(1, organisation_id)
      .Bind(2, member_id)
      .Bind(3, from_unix_ms)
      .Bind(4, to_unix_ms)
      .Bind(5, static_cast<std::int64_t>(kMaxHistoryRows));
  return ReadAll(s, out, [](const Statement& r) {
    return FixityRow{r.Int64(0), r.Int64(1), r.IsNull(2) ? "" : r.Text(2)};
  });
}

// --------------------------------------------------------------- alerts ---

StorageStatus Repository::RaiseAlert(Id organisation_id, const NewAlert& alert, std::int64_t now_unix_ms,
                                     Id* id) {
  return Write([&]() -> StorageStatus {
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement member(db_.handle(), "SELECT 1 FROM member WHERE id = ?1 AND organisation_id = ?2");
    member.Bind(1, alert.member_id).Bind(2, organisation_id);
    const int rc = member.Step();
    if (rc == SQLITE_DONE) return StorageStatus::NotFound(IdText("member", alert.member_id) + " not found");
    if (rc != SQLITE_ROW) return member.status();
    if (StorageStatus f = Fault(); !f.ok()) return f;
    return InsertAlert(organisation_id, alert, now_unix_ms, id);
  });
}

// The INSERT of RaiseAlert and RaiseAlertOnce, inside their transaction.
StorageStatus Repository::InsertAlert(Id organisation_id, const NewAlert& alert, std::int64_t now_unix_ms,
                                      Id* id) {
  Statement s(db_.handle(),
              "INSERT INTO alert (organisation_id, member_id, estimate_id, rule, state, message, evidence, "
              "raised_at_unix_ms) VALUES (?1, ?2, ?3, ?4, 'open', ?5, ?6, ?7)");
  s.Bind(1, organisation_id)
      .Bind(2, alert.member_id)
      .Bind(3, alert.estimate_id)
      .Bind(4, alert.rule)
      .Bind(5, alert.message)
      .Bind(6, alert.evidence)
      .Bind(7, now_unix_ms);
  if (StorageStatus r = s.Run(); !r.ok()) return r;
  *id = sqlite3_last_insert_rowid(db_.handle());
  return {};
}

StorageStatus Repository::GetAlert(Id organisation_id, Id alert_id, Alert* out) {
  Statement s(db_.handle(),
              std::string("SELECT ") + kAlertColumns + " FROM alert WHERE id = ?1 AND organisation_id = ?2");
  s.Bind(1, alert_id).Bind(2, organisation_id);
  return ReadOne(s, IdText("alert", alert_id), [&](const Statement& r) { *out = ReadAlert(r); });
}

StorageStatus Repository::ListAlerts(Id organisation_id, const AlertFilter& filter, std::vector<Alert>* out) {
  // NULL parameters switch a filter off, so one statement serves every
  // combination without building SQL text.
  Statement s(db_.handle(),
              std::string("SELECT ") + kAlertColumns +
                  " FROM alert WHERE organisation_id = ?1 AND (?2 IS NULL OR member_id = ?2) AND "
                  "(?3 IS NULL OR state = ?3) ORDER BY id");
  s.Bind(1, organisation_id).Bind(2, filter.member_id);
  if (filter.state) {
    s.Bind(3, std::string_view(AlertStateName(*filter.state)));
  } else {
    s.BindNull(3);
  }
  return ReadAll(s, out, ReadAlert);
}

namespace {

StorageStatus TransitionAlert(Database& db, Id organisation_id, Id alert_id, std::int64_t now_unix_ms,
                              const char* update_sql, const char* allowed_from, const char* to) {
  Statement cur(db.handle(), "SELECT state FROM alert WHERE id = ?1 AND organisation_id = ?2");
  cur.Bind(1, alert_id).Bind(2, organisation_id);
  const int rc = cur.Step();
  if (rc == SQLITE_DONE) return StorageStatus::NotFound(IdText("alert", alert_id) + " not found");
  if (rc != SQLITE_ROW) return cur.status();
  const std::string state = cur.Text(0);
  if (std::string_view(allowed_from).find(state) == std::string_view::npos) {
    return {SQLITE_CONSTRAINT, IdText("alert", alert_id) + " is " + state + "; only " + allowed_from +
                                   " alerts can become " + to};
  }
  Statement s(db.handle(), update_sql);
  s.Bind(1, alert_id).Bind(2, organisation_id).Bind(3, now_unix_ms);
  return RunOneRow(db, s, IdText("alert", alert_id));
}

}  // namespace

StorageStatus Repository::AcknowledgeAlert(Id organisation_id, Id alert_id, std::int64_t now_unix_ms) {
  return Write([&]() -> StorageStatus {
    if (StorageStatus f = Fault(); !f.ok()) return f;
    return TransitionAlert(db_, organisation_id, alert_id, now_unix_ms,
                           "UPDATE alert SET state = 'acknowledged', acknowledged_at_unix_ms = ?3 "
                           "WHERE id = ?1 AND organisation_id = ?2",
                           "open", "acknowledged");
  });
}

StorageStatus Repository::ResolveAlert(Id organisation_id, Id alert_id, std::int64_t now_unix_ms) {
  return Write([&]() -> StorageStatus {
    if (StorageStatus f = Fault(); !f.ok()) return f;
    return TransitionAlert(db_, organisation_id, alert_id, now_unix_ms,
                           "UPDATE alert SET state = 'resolved', resolved_at_unix_ms = ?3 "
                           "WHERE id = ?1 AND organisation_id = ?2",
                           "open or acknowledged", "resolved");
  });
}

// ------------------------------------------------------------- webhooks ---

StorageStatus Repository::CreateWebhook(Id organisation_id, std::string_view url, std::string_view secret,
                                        std::int64_t now_unix_ms, Id* id) {
  return Write([&]() -> StorageStatus {
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement s(db_.handle(),
                "INSERT INTO webhook_subscription (organisation_id, url, secret, active, created_at_unix_ms) "
                "VALUES (?1, ?2, ?3, 1, ?4)");
    s.Bind(1, organisation_id).Bind(2, url).BindBlob(3, secret.data(), secret.size()).Bind(4, now_unix_ms);
    if (StorageStatus r = s.Run(); !r.ok()) return r;
    *id = sqlite3_last_insert_rowid(db_.handle());
    return {};
  });
}

StorageStatus Repository::ListWebhooks(Id organisation_id, bool active_only, std::vector<Webhook>* out) {
  Statement s(db_.handle(),
              "SELECT id, organisation_id, url, secret, active, created_at_unix_ms FROM webhook_subscription "
              "WHERE organisation_id = ?1 AND (?2 = 0 OR active = 1) ORDER BY id");
  s.Bind(1, organisation_id).Bind(2, static_cast<std::int64_t>(active_only ? 1 : 0));
  return ReadAll(s, out, [](const Statement& r) {
    return Webhook{r.Int64(0), r.Int64(1), r.Text(2), r.Blob(3), r.Int64(4) != 0, r.Int64(5)};
  });
}

StorageStatus Repository::DeactivateWebhook(Id organisation_id, Id webhook_id) {
  return Write([&]() -> StorageStatus {
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement s(db_.handle(),
                "UPDATE webhook_subscription SET active = 0 WHERE id = ?1 AND organisation_id = ?2");
    s.Bind(1, webhook_id).Bind(2, organisation_id);
    return RunOneRow(db_, s, IdText("webhook", webhook_id));
  });
}

StorageStatus Repository::RecordDelivery(Id organisation_id, const DeliveryAttempt& a, Id* id) {
  if (a.attempt < 1) return Misuse("delivery attempt " + std::to_string(a.attempt) + " must be >= 1");
  return Write([&]() -> StorageStatus {
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement s(db_.handle(),
                "INSERT INTO webhook_delivery (organisation_id, subscription_id, alert_id, attempt, "
                "attempted_at_unix_ms, http_status, error, succeeded, next_attempt_at_unix_ms) "
                "VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9)");
    s.Bind(1, organisation_id)
        .Bind(2, a.subscription_id)
        .Bind(3, a.alert_id)
        .Bind(4, static_cast<std::int64_t>(a.attempt))
        .Bind(5, a.attempted_at_unix_ms);
    if (a.http_status) {
      s.Bind(6, static_cast<std::int64_t>(*a.http_status));
    } else {
      s.BindNull(6);
    }
    s.Bind(7, a.error)
        .Bind(8, static_cast<std::int64_t>(a.succeeded ? 1 : 0))
        .Bind(9, a.next_attempt_at_unix_ms);
    StorageStatus r = s.Run();
    // A subscription or alert of another organisation fails the composite
    // foreign key; report it as not found, like every foreign id.
    if (r.sqlite_code == SQLITE_CONSTRAINT_FOREIGNKEY) {
      return StorageStatus::NotFound(IdText("webhook", a.subscription_id) + " or " +
                                     IdText("alert", a.alert_id) + " not found");
    }
    if (!r.ok()) return r;
    *id = sqlite3_last_insert_rowid(db_.handle());
    return {};
  });
}

StorageStatus Repository::ListDeliveries(Id organisation_id, Id alert_id, std::vector<DeliveryAttempt>* out) {
  Statement s(
      db_.handle(),
      "SELECT id, subscription_id, alert_id, attempt, attempted_at_unix_ms, http_status, error, succeeded, "
      "next_attempt_at_unix_ms FROM webhook_delivery WHERE organisation_id = ?1 AND alert_id = ?2 "
      "ORDER BY id");
  s.Bind(1, organisation_id).Bind(2, alert_id);
  return ReadAll(s, out, [](const Statement& r) {
    DeliveryAttempt a;
    a.id = r.Int64(0);
    a.subscription_id = r.Int64(1);
    a.alert_id = r.Int64(2);
    a.attempt = static_cast<int>(r.Int64(3));
    a.attempted_at_unix_ms = r.Int64(4);
    if (!r.IsNull(5)) a.http_status = static_cast<int>(r.Int64(5));
    a.error = r.Text(6);
    a.succeeded = r.Int64(7) != 0;
    a.next_attempt_at_unix_ms = r.OptionalInt64(8);
    return a;
  });
}

// ------------------------------------------------ HTTP layer lookups ---

StorageStatus Repository::FindOrganisationByName(std::string_view name, Organisation* out) {
  Statement s(db_.handle(), "SELECT id, name, created_at_unix_ms FROM organisation WHERE name = ?1");
  s.Bind(1, name);
  return ReadOne(s, "organisation \"" + std::string(name) + "\"", [&](const Statement& r) {
    *out = {r.Int64(0), r.Text(1), r.Int64(2)};
  });
}

StorageStatus Repository::EstimateForRecord(Id organisation_id, Id record_id, Estimate* out) {
  // Index estimate_record; one estimate per record (its job stores it once).
  Statement s(db_.handle(), std::string("SELECT ") + kEstimateColumns +
                                ", result_json FROM estimate WHERE record_id = ?1 AND organisation_id = ?2 "
                                "ORDER BY id DESC LIMIT 1");
  s.Bind(1, record_id).Bind(2, organisation_id);
  return ReadOne(s, "estimate of " + IdText("record", record_id), [&](const Statement& r) {
    *out = ReadEstimate(r);
    out->result_json = r.Text(16);
  });
}

StorageStatus Repository::CountJobsByState(std::map<std::string, std::int64_t>* out) {
  std::map<std::string, std::int64_t> counts;
  for (JobState st : {JobState::kQueued, JobState::kRunning, JobState::kDone, JobState::kFailed}) {
    counts[JobStateName(st)] = 0;
  }
  Statement s(db_.handle(), "SELECT state, count(*) FROM job GROUP BY state");
  std::vector<std::pair<std::string, std::int64_t>> rows;
  if (StorageStatus st =
          ReadAll(s, &rows, [](const Statement& r) { return std::make_pair(r.Text(0), r.Int64(1)); });
      !st.ok()) {
    return st;
  }
  for (const auto& [state, n] : rows) counts[state] = n;
  *out = std::move(counts);
  return {};
}

StorageStatus Repository::LatestRecordTime(Id organisation_id, Id member_id,
                                           std::int64_t* recorded_at_unix_ms) {
  // An aggregate always yields one row: NULL when the member has no record.
  Statement s(db_.handle(),
              "SELECT max(recorded_at_unix_ms) FROM record WHERE member_id = ?1 AND organisation_id = ?2");
  s.Bind(1, member_id).Bind(2, organisation_id);
  std::optional<std::int64_t> latest;
  StorageStatus st = ReadOne(s, "records of " + IdText("member", member_id),
                             [&](const Statement& r) { latest = r.OptionalInt64(0); });
  if (!st.ok()) return st;
  if (!latest) return StorageStatus::NotFound("member " + std::to_string(member_id) + " has no record");
  *recorded_at_unix_ms = *latest;
  return {};
}

// ------------------------------------------ worker side (schema step 4) ---

StorageStatus Repository::PendingDriftChecks(std::size_t limit, std::vector<Estimate>* out) {
  // Partial index estimate_drift_pending holds exactly these rows.
  Statement s(db_.handle(), std::string("SELECT ") + kEstimateColumns +
                                " FROM estimate WHERE drift_checked_at_unix_ms IS NULL ORDER BY id LIMIT ?1");
  s.Bind(1, static_cast<std::int64_t>(limit));
  return ReadAll(s, out, ReadEstimate);
}

StorageStatus Repository::MarkDriftChecked(Id organisation_id, Id estimate_id, std::int64_t now_unix_ms) {
  return Write([&]() -> StorageStatus {
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement s(db_.handle(),
                "UPDATE estimate SET drift_checked_at_unix_ms = ?3 WHERE id = ?1 AND organisation_id = ?2");
    s.Bind(1, estimate_id).Bind(2, organisation_id).Bind(3, now_unix_ms);
    return RunOneRow(db_, s, IdText("estimate", estimate_id));
  });
}

StorageStatus Repository::RaiseAlertOnce(Id organisation_id, const NewAlert& alert, std::int64_t now_unix_ms,
                                         Id* id, bool* created) {
  if (!alert.estimate_id) return Misuse("RaiseAlertOnce needs the alert's estimate_id");
  return Write([&]() -> StorageStatus {
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement existing(db_.handle(),
                       "SELECT id FROM alert WHERE organisation_id = ?1 AND member_id = ?2 AND rule = ?3 AND "
                       "estimate_id = ?4");
    existing.Bind(1, organisation_id)
        .Bind(2, alert.member_id)
        .Bind(3, alert.rule)
        .Bind(4, *alert.estimate_id);
    const int rc = existing.Step();
    if (rc == SQLITE_ROW) {
      *id = existing.Int64(0);
      *created = false;
      return {};
    }
    if (rc != SQLITE_DONE) return existing.status();
    if (StorageStatus f = Fault(); !f.ok()) return f;
    StorageStatus r = InsertAlert(organisation_id, alert, now_unix_ms, id);
    // The composite foreign keys fail for another organisation's member or
    // estimate: not found, like every foreign id.
    if (r.sqlite_code == SQLITE_CONSTRAINT_FOREIGNKEY) {
      return StorageStatus::NotFound(IdText("member", alert.member_id) + " or " +
                                     IdText("estimate", *alert.estimate_id) + " not found");
    }
    if (!r.ok()) return r;
    *created = true;
    return {};
  });
}

StorageStatus Repository::GetDriftSettings(Id organisation_id, Id member_id, std::string* settings_json) {
  Statement s(
      db_.handle(),
      "SELECT settings_json FROM member_drift_settings WHERE organisation_id = ?1 AND member_id = ?2");
  s.Bind(1, organisation_id).Bind(2, member_id);
  return ReadOne(s, "drift settings of " + IdText("member", member_id),
                 [&](const Statement& r) { *settings_json = r.Text(0); });
}

StorageStatus Repository::SetDriftSettings(Id organisation_id, Id member_id, std::string_view settings_json,
                                           std::int64_t now_unix_ms) {
  return Write([&]() -> StorageStatus {
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement member(
        db_.handle(),
        "SELECT 1 FROM member WHERE id = ?1 AND organisation_id = ?2 AND deleted_at_unix_ms IS NULL");
    member.Bind(1, member_id).Bind(2, organisation_id);
    if (StorageStatus m = ReadOne(member, IdText("member", member_id), [](const Statement&) {}); !m.ok()) {
      return m;
    }
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement s(db_.handle(),
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
      db_.handle(),
      "SELECT d.organisation_id, d.member_id, d.settings_json FROM member_drift_settings d JOIN member m "
      "ON m.id = d.member_id AND m.organisation_id = d.organisation_id WHERE m.deleted_at_unix_ms IS "
      "NULL ORDER BY d.organisation_id, d.member_id");
  return ReadAll(s, out, [](const Statement& r) {
    return MemberSettings{r.Int64(0), r.Int64(1), r.Text(2)};
  });
}

StorageStatus Repository::DueDeliveries(std::int64_t now_unix_ms, std::size_t limit,
                                        std::vector<DueDelivery>* out) {
  // One row per (subscription, alert) pair; `last` is its latest attempt
  // (NULL columns when there is none). Alerts are few (a handful per member
  // and year), so the join over every pair is cheap.
  Statement s(db_.handle(),
              "SELECT w.organisation_id, w.id, w.url, w.secret, a.id, coalesce(last.attempt, 0) + 1, "
              "       coalesce(last.next_attempt_at_unix_ms, a.raised_at_unix_ms) AS due "
              "FROM alert a "
              "JOIN webhook_subscription w ON w.organisation_id = a.organisation_id AND w.active = 1 "
              "     AND a.raised_at_unix_ms >= w.created_at_unix_ms "
              "LEFT JOIN webhook_delivery last ON last.subscription_id = w.id AND last.alert_id = a.id "
              "     AND last.attempt = (SELECT max(attempt) FROM webhook_delivery d "
              "                         WHERE d.subscription_id = w.id AND d.alert_id = a.id) "
              "WHERE (last.id IS NULL OR (last.succeeded = 0 AND last.next_attempt_at_unix_ms IS NOT NULL)) "
              "  AND due <= ?1 "
              "ORDER BY due, a.id, w.id LIMIT ?2");
  s.Bind(1, now_unix_ms).Bind(2, static_cast<std::int64_t>(limit));
  return ReadAll(s, out, [](const Statement& r) {
    DueDelivery d;
    d.organisation_id = r.Int64(0);
    d.subscription_id = r.Int64(1);
    d.url = r.Text(2);
    d.secret = r.Blob(3);
    d.alert_id = r.Int64(4);
    d.attempt = static_cast<int>(r.Int64(5));
    d.due_at_unix_ms = r.Int64(6);
    return d;
  });
}

}  // namespace taut::storage
