// Internal to storage/: helpers shared by the repository's files (one per
// entity: repository_tokens.cpp, _members, _records, _estimates, _alerts).
#pragma once

#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "storage/repository.h"
#include "storage/statement.h"

namespace taut::storage::repository_internal {

using internal::InsertReturningId;
using internal::ReadAll;
using internal::ReadOne;
using internal::RunOneRow;
using internal::Statement;

// Channel names in the record are joined with this separator; it cannot
// occur in a name ([A-Za-z0-9_], docs/FORMATS.md section 2).
inline constexpr char kChannelSeparator = ',';
inline constexpr std::size_t kMaxChannelName = 32;
inline constexpr std::size_t kSha256HexLength = 64;
inline constexpr std::size_t kMaxIdempotencyKey = 255;
inline constexpr std::size_t kBytesPerSample = 4;  // binary32

inline StorageStatus Misuse(std::string m) { return {SQLITE_MISUSE, std::move(m)}; }

inline bool IsLowerHex(std::string_view s, std::size_t length) {
  if (s.size() != length) return false;
  for (char c : s) {
    if (!((c >= '0' && c <= '9') || (c >= 'a' && c <= 'f'))) return false;
  }
  return true;
}

inline bool IsChannelName(std::string_view s) {
  if (s.empty() || s.size() > kMaxChannelName) return false;
  for (char c : s) {
    const bool ok = (c >= 'A' && c <= 'Z') || (c >= 'a' && c <= 'z') || (c >= '0' && c <= '9') || c == '_';
    if (!ok) return false;
  }
  return true;
}

inline std::string JoinChannels(const std::vector<std::string>& channels) {
  std::string out;
  for (std::size_t i = 0; i < channels.size(); ++i) {
    if (i > 0) out += kChannelSeparator;
    out += channels[i];
  }
  return out;
}

inline std::vector<std::string> SplitChannels(const std::string& joined) {
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

inline std::optional<Role> ParseRole(const std::string& s) {
  if (s == "read") return Role::kRead;
  if (s == "upload") return Role::kUpload;
  if (s == "admin") return Role::kAdmin;
  return std::nullopt;
}

inline JobState ParseJobState(const std::string& s) {
  if (s == "running") return JobState::kRunning;
  if (s == "done") return JobState::kDone;
  if (s == "failed") return JobState::kFailed;
  return JobState::kQueued;  // the CHECK constraint admits nothing else
}

inline AlertState ParseAlertState(const std::string& s) {
  if (s == "acknowledged") return AlertState::kAcknowledged;
  if (s == "resolved") return AlertState::kResolved;
  return AlertState::kOpen;
}

inline std::string IdText(const char* kind, Id id) { return std::string(kind) + " " + std::to_string(id); }

inline constexpr const char* kMemberColumns =
    "m.id, m.organisation_id, m.structure_id, m.external_id, v.version, m.current_version, "
    "v.description_json, m.created_at_unix_ms, v.created_at_unix_ms, m.deleted_at_unix_ms";

inline Member ReadMember(const Statement& s) {
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

inline constexpr const char* kJobColumns =
    "id, organisation_id, record_id, state, progress, coalesce(failure_reason, ''), attempts, "
    "created_at_unix_ms, started_at_unix_ms, finished_at_unix_ms, coalesce(lease_owner, ''), "
    "lease_expires_at_unix_ms";

inline Job ReadJob(const Statement& s) {
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
  j.lease_owner = s.Text(10);
  j.lease_expires_at_unix_ms = s.OptionalInt64(11);
  return j;
}

// Columns 0..15; result_json is selected separately where needed.
inline constexpr const char* kEstimateColumns =
    "id, organisation_id, member_id, member_version, record_id, job_id, measured_at_unix_ms, "
    "temperature_c, axial_force_n, force_std_n, force_ci95_low_n, force_ci95_high_n, "
    "bending_stiffness_nm2, bending_stiffness_std_nm2, created_at_unix_ms, coalesce(verdict_code, '')";

inline Estimate ReadEstimate(const Statement& s) {
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

inline constexpr const char* kAlertColumns =
    "id, organisation_id, member_id, estimate_id, rule, message, evidence, state, raised_at_unix_ms, "
    "acknowledged_at_unix_ms, resolved_at_unix_ms";

inline Alert ReadAlert(const Statement& s) {
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

inline StorageStatus ValidateRecord(const NewRecord& r) {
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

}  // namespace taut::storage::repository_internal
