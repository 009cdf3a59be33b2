// Repositories of the taut database: organisations, API tokens, structures,
// members (versioned), records, jobs, estimates, alerts and webhooks.
//
// One interface, two backends: a Repository runs on the Database it is
// given, an SQLite file or a PostgreSQL database (database.h), with the
// same results; each query is written once (statement.h). The code is split
// by entity: repository_tokens.cpp, _members, _records, _estimates, _alerts.
//
// Conventions for every call:
// - Returns StorageStatus; outputs are written only on success. A missing
//   id, or an id that belongs to another organisation, is not_found()
//   (SQLITE_NOTFOUND): callers cannot tell the two apart, which is what lets
//   the HTTP layer answer 404 rather than 403.
// - Organisation scoping: every read and every write on owned rows takes the
//   caller's organisation id and touches only that organisation's rows. The
//   only unscoped calls are the ones a service needs before it knows an
//   organisation (FindToken) or that serve every organisation (the job
//   queue: ClaimNextJob, RequeueRunningJobs, SetJobProgress, FinishJob,
//   FailJob, CompleteJobWithEstimate); each says so.
// - Every write runs in one transaction (BEGIN IMMEDIATE on SQLite,
//   SERIALIZABLE on PostgreSQL; statement.h states the busy/retry policy):
//   it is applied completely or not at all.
// - A database that cannot be reached (PostgreSQL down, connection lost) is
//   unavailable(): nothing of the call was written.
// - Values are bound as statement parameters, never spliced into SQL.
// - Times are integers: milliseconds since 1970-01-01T00:00:00Z (UTC), in
//   fields named *_unix_ms. Callers supply "now" so tests are repeatable.
// - Sign convention: axial force N > 0 in tension (docs/FORMATS.md).
//
// Thread-safety: a Repository wraps one Database (one connection) and is
// not thread-safe; give each thread its own Database and Repository.
#pragma once

#include <cstdint>
#include <functional>
#include <map>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "storage/database.h"

namespace taut::storage {

using Id = std::int64_t;

enum class Role { kRead, kUpload, kAdmin };  // read < upload < admin
const char* RoleName(Role role);             // "read", "upload", "admin"

struct Organisation {
  Id id = 0;
  std::string name;
  std::int64_t created_at_unix_ms = 0;
};

// An API token as storage keeps it: the public part used to look it up, the
// salt and the hash bytes. The secret itself and the hashing (e.g.
// PBKDF2/HMAC-SHA-256) belong to server/; storage never sees the secret.
struct NewToken {
  std::string public_id;  // 1..64 characters, unique over all organisations
  std::string salt;       // raw bytes, non-empty
  std::string hash;       // raw bytes, non-empty
  Role role = Role::kRead;
  std::string label;  // free text for the admin, may be empty
};

struct Token {
  Id id = 0;
  Id organisation_id = 0;
  std::string public_id, salt, hash, label;
  Role role = Role::kRead;
  std::int64_t created_at_unix_ms = 0;
  std::optional<std::int64_t> revoked_at_unix_ms;  // set: the token must be refused
};

struct Structure {
  Id id = 0;
  Id organisation_id = 0;
  std::string name;  // 1..200 characters
  std::string description;
  std::int64_t created_at_unix_ms = 0;
};

// A member and one version of its docs/FORMATS.md section 1 description, kept as
// JSON text exactly as given (storage does not parse it).
struct Member {
  Id id = 0;
  Id organisation_id = 0;
  Id structure_id = 0;
  std::string external_id;           // the description's "id", 1..64 characters
  std::int64_t version = 0;          // the version described by description_json (64-bit)
  std::int64_t current_version = 0;  // the newest version of the member
  std::string description_json;
  std::int64_t created_at_unix_ms = 0;             // of the member
  std::int64_t version_created_at_unix_ms = 0;     // of this version
  std::optional<std::int64_t> deleted_at_unix_ms;  // soft delete
};

// Samples blob layout ("f32le"): IEEE 754 binary32, little-endian, sample
// major: value (sample i, channel j) at byte offset 4 * (i * channel_count
// + j). Accelerations are stored in the record's units; binary32 keeps a
// relative precision of 2^-24 (6e-8), far below any accelerometer's noise.
struct NewRecord {
  Id member_id = 0;
  std::int64_t recorded_at_unix_ms = 0;
  std::optional<double> temperature_c;
  std::string units = "m/s2";          // "m/s2" or "g"
  std::string excitation = "ambient";  // "ambient" or "impact"
  double sample_rate_hz = 0;           // > 0
  std::vector<std::string> channels;   // names, [A-Za-z0-9_]{1,32}, >= 1
  // Row-major: samples[i * channels.size() + j]; size = n_samples * n_channels,
  // n_samples >= 1.
  std::vector<double> samples;
  // Lowercase hex SHA-256 (64 characters) of the original upload bytes and
  // of the samples blob (EncodeSamples()), both computed by the caller;
  // server/ verifies samples_sha256 when it reads the record back.
  std::string content_sha256;
  std::string samples_sha256;
  std::string idempotency_key;  // "" = none; otherwise unique per organisation
  // What the record reader detected and applied (estimation::Record::notes),
  // one note per line; "" = none.
  std::string reader_notes;
};

struct Record {
  Id id = 0;
  Id organisation_id = 0;
  Id member_id = 0;
  std::int64_t member_version = 0;  // member version current at upload
  std::int64_t recorded_at_unix_ms = 0;
  std::optional<double> temperature_c;
  std::string units, excitation;
  double sample_rate_hz = 0;
  std::vector<std::string> channels;
  std::int64_t sample_count = 0;
  std::vector<double> samples;  // decoded, layout as NewRecord::samples
  std::string content_sha256, samples_sha256, idempotency_key;
  std::int64_t created_at_unix_ms = 0;
  std::string reader_notes;  // as NewRecord::reader_notes
};

struct RecordInsertResult {
  Id record_id = 0;
  Id job_id = 0;
  bool duplicate = false;  // true: an earlier upload was found and returned
};

enum class JobState { kQueued, kRunning, kDone, kFailed };
const char* JobStateName(JobState state);  // "queued", "running", "done", "failed"

struct Job {
  Id id = 0;
  Id organisation_id = 0;
  Id record_id = 0;
  JobState state = JobState::kQueued;
  double progress = 0;         // 0..1
  std::string failure_reason;  // non-empty iff state == kFailed
  int attempts = 0;            // times the job was claimed
  std::int64_t created_at_unix_ms = 0;
  std::optional<std::int64_t> started_at_unix_ms, finished_at_unix_ms;
  // The worker holding a running job and until when (schema step 8); ""
  // and absent for a claim without a lease.
  std::string lease_owner;
  std::optional<std::int64_t> lease_expires_at_unix_ms;
};

// A worker's claim on the job it runs, for several replicas on one
// database: `owner` names the worker (unique among live workers, e.g.
// host, process and thread), the claim holds for duration_ms unless the
// worker's heartbeat renews it (RenewJobLease). A replica that dies stops
// renewing; once the lease expired another worker claims the job again.
struct JobLease {
  std::string owner;             // 1..200 characters
  std::int64_t duration_ms = 0;  // > 0
};

// An estimate: the docs/FORMATS.md section 3 object as JSON text plus the columns
// the queries filter and plot on. Precondition: ci95 low <= force <= high.
struct NewEstimate {
  Id record_id = 0;  // the member, its version, the time and temperature come from the record
  double axial_force_n = 0;
  std::optional<double> force_std_n;  // >= 0
  double force_ci95_low_n = 0, force_ci95_high_n = 0;
  std::optional<double> bending_stiffness_nm2, bending_stiffness_std_nm2;
  std::string result_json;
};

struct Estimate {
  Id id = 0;
  Id organisation_id = 0;
  Id member_id = 0;
  std::int64_t member_version = 0;
  Id record_id = 0;
  std::optional<Id> job_id;
  std::int64_t measured_at_unix_ms = 0;  // the record's recorded_at
  std::optional<double> temperature_c;
  double axial_force_n = 0;
  std::optional<double> force_std_n;
  double force_ci95_low_n = 0, force_ci95_high_n = 0;
  std::optional<double> bending_stiffness_nm2, bending_stiffness_std_nm2;
  std::string result_json;  // empty in ForceHistory rows (not selected, to keep it fast)
  std::int64_t created_at_unix_ms = 0;
  // The result's verdict.code ("usable", "reduced-confidence", "unusable");
  // "" for a result stored without a verdict (counts as usable).
  std::string verdict_code;
};

enum class AlertState { kOpen, kAcknowledged, kResolved };
const char* AlertStateName(AlertState state);  // "open", "acknowledged", "resolved"

struct NewAlert {
  Id member_id = 0;
  std::optional<Id> estimate_id;  // the estimate that triggered it
  std::string rule;               // machine code of the rule, 1..64 characters
  std::string message;            // what to inspect (a caution text)
  std::string evidence;           // estimates and residuals, as text (JSON built by server/)
};

struct Alert {
  Id id = 0;
  Id organisation_id = 0;
  Id member_id = 0;
  std::optional<Id> estimate_id;
  std::string rule, message, evidence;
  AlertState state = AlertState::kOpen;
  std::int64_t raised_at_unix_ms = 0;
  std::optional<std::int64_t> acknowledged_at_unix_ms, resolved_at_unix_ms;
};

struct AlertFilter {
  std::optional<Id> member_id;
  std::optional<AlertState> state;
};

struct Webhook {
  Id id = 0;
  Id organisation_id = 0;
  std::string url;
  std::string secret;  // raw bytes for signing deliveries
  bool active = true;
  std::int64_t created_at_unix_ms = 0;
};

struct DeliveryAttempt {
  Id id = 0;  // ignored on insert
  Id subscription_id = 0;
  Id alert_id = 0;
  int attempt = 1;  // 1, 2, ... per (subscription, alert)
  std::int64_t attempted_at_unix_ms = 0;
  std::optional<int> http_status;  // absent: no HTTP response (connect error, timeout)
  std::string error;               // "" on success
  bool succeeded = false;
  std::optional<std::int64_t> next_attempt_at_unix_ms;  // absent: no further attempt
};

// Upper bound on the rows one ForceHistory call returns (a time range that
// holds more is truncated to the first kMaxHistoryRows in time order).
inline constexpr std::size_t kMaxHistoryRows = 100000;

// Encodes/decodes the "f32le" samples blob described above NewRecord.
std::string EncodeSamples(const std::vector<double>& samples);
StorageStatus DecodeSamples(std::string_view blob, std::size_t expected_values, std::vector<double>* samples);

class Repository {
 public:
  explicit Repository(Database& db) : db_(db) {}  // db: not owned; must outlive this
  Database& database() { return db_; }            // for the other stores on the same connection (logbook.h)

  // --- organisations and tokens ---------------------------------------
  StorageStatus CreateOrganisation(std::string_view name, std::int64_t now_unix_ms, Id* id);
  StorageStatus GetOrganisation(Id organisation_id, Organisation* out);
  StorageStatus CreateToken(Id organisation_id, const NewToken& token, std::int64_t now_unix_ms, Id* id);
  // Unscoped by design: authentication looks the token up before it knows
  // the organisation. Revoked tokens are returned (with the revocation
  // time) so the caller can refuse them explicitly.
  StorageStatus FindToken(std::string_view public_id, Token* out);
  // The organisation's tokens, revoked ones included, by id.
  StorageStatus ListTokens(Id organisation_id, std::vector<Token>* out);
  // Idempotent: revoking a revoked token keeps its first revocation time.
  StorageStatus RevokeToken(Id organisation_id, Id token_id, std::int64_t now_unix_ms);

  // --- structures -------------------------------------------------------
  StorageStatus CreateStructure(Id organisation_id, std::string_view name, std::string_view description,
                                std::int64_t now_unix_ms, Id* id);
  StorageStatus GetStructure(Id organisation_id, Id structure_id, Structure* out);  // not deleted
  StorageStatus ListStructures(Id organisation_id, std::vector<Structure>* out);    // not deleted, by id
  // Soft delete; refused (SQLITE_CONSTRAINT) while the structure has live members.
  StorageStatus DeleteStructure(Id organisation_id, Id structure_id, std::int64_t now_unix_ms);

  // --- members (versioned, soft delete) --------------------------------
  // Creates the member with version 1. external_id must be unique among the
  // structure's live members (SQLITE_CONSTRAINT otherwise).
  StorageStatus CreateMember(Id organisation_id, Id structure_id, std::string_view external_id,
                             std::string_view description_json, std::int64_t now_unix_ms, Id* id);
  // Stores `description_json` as version current+1 and makes it current;
  // earlier versions stay readable (estimates keep the version they used).
  StorageStatus UpdateMember(Id organisation_id, Id member_id, std::string_view description_json,
                             std::int64_t now_unix_ms, std::int64_t* new_version);
  StorageStatus GetMember(Id organisation_id, Id member_id, Member* out);  // current version, not deleted
  // Any version, also of a deleted member (history).
  StorageStatus GetMemberVersion(Id organisation_id, Id member_id, std::int64_t version, Member* out);
  StorageStatus ListMembers(Id organisation_id, Id structure_id, std::vector<Member>* out);  // live, by id
  StorageStatus DeleteMember(Id organisation_id, Id member_id, std::int64_t now_unix_ms);

  // --- records and jobs ---------------------------------------------------
  // Stores the record and queues its job in one transaction. Idempotent: if
  // the organisation already has a record with the same non-empty
  // idempotency_key, or the member already has a record with the same
  // content_sha256, returns that record's ids with duplicate = true and
  // writes nothing. The same idempotency key with a different content hash
  // is refused with SQLITE_CONSTRAINT (a client bug: the key was reused).
  // Validation (SQLITE_MISUSE, message naming the field): see NewRecord.
  StorageStatus InsertRecord(Id organisation_id, const NewRecord& record, std::int64_t now_unix_ms,
                             RecordInsertResult* out);
  StorageStatus GetRecord(Id organisation_id, Id record_id, Record* out);
  StorageStatus GetJob(Id organisation_id, Id job_id, Job* out);
  StorageStatus GetJobForRecord(Id organisation_id, Id record_id, Job* out);

  // Worker side (unscoped: the worker pool serves every organisation).
  // Atomically moves a queued job to running (attempts + 1, progress 0):
  // the oldest of the organisation with the fewest running jobs (fair
  // claiming: one organisation's backlog cannot starve another's);
  // *claimed = false if the queue is empty. Two workers never
  // claim the same job: the claim is one UPDATE under the write lock.
  // On PostgreSQL the candidate row is taken with FOR UPDATE SKIP LOCKED
  // (documentation, SELECT "The Locking Clause"), so concurrent claimers
  // of several replicas pass each other instead of queueing.
  // This form takes no lease (one process; RequeueRunningJobs at start).
  StorageStatus ClaimNextJob(std::int64_t now_unix_ms, Job* out, bool* claimed);
  // With a lease: as above, and a running job whose lease expired before
  // now (its worker died) is claimable too (attempts + 1 again). The job's
  // lease_owner and expiry (now + duration_ms) are set.
  StorageStatus ClaimNextJob(std::int64_t now_unix_ms, const JobLease& lease, Job* out, bool* claimed);
  // The heartbeat: extends the lease of a running job held by `owner` to
  // now + duration_ms. not_found() when the job is no longer running under
  // this owner (its lease expired and another worker took it): the worker
  // must store nothing for it.
  StorageStatus RenewJobLease(Id job_id, std::string_view owner, std::int64_t now_unix_ms,
                              std::int64_t duration_ms);
  // The calls below finish a running job. With a non-empty `lease_owner`
  // the job must also be held by that owner (not_found() otherwise), so a
  // worker whose lease was taken over cannot store a second estimate.
  // progress in [0, 1]; the job must be running.
  StorageStatus SetJobProgress(Id job_id, double progress, std::string_view lease_owner = {});
  StorageStatus FailJob(Id job_id, std::string_view reason, std::int64_t now_unix_ms,
                        std::string_view lease_owner = {});  // reason non-empty
  // Stores the estimate of a running job's record and marks the job done
  // (progress 1) in one transaction.
  StorageStatus CompleteJobWithEstimate(Id job_id, const NewEstimate& estimate, std::int64_t now_unix_ms,
                                        Id* estimate_id, std::string_view lease_owner = {});
  // Start-up: every job left running by a stopped process goes back to
  // queued (progress 0). *count = number of jobs requeued.
  StorageStatus RequeueRunningJobs(int* count);

  // --- estimates ------------------------------------------------------
  StorageStatus GetEstimate(Id organisation_id, Id estimate_id, Estimate* out);
  // The estimate with the largest measured_at (ties: the newest id).
  StorageStatus LatestEstimate(Id organisation_id, Id member_id, Estimate* out);
  // Estimates with from <= measured_at < to, ordered by (measured_at, id),
  // at most kMaxHistoryRows; result_json is not selected. Uses the index
  // estimate_member_time (schema version 2), which covers every selected column.
  StorageStatus ForceHistory(Id organisation_id, Id member_id, std::int64_t from_unix_ms,
                             std::int64_t to_unix_ms, std::vector<Estimate>* out);

  // The end fixities stored in each estimate's result: end_fixity_json is
  // the docs/FORMATS.md section 3 "end_fixity" object as JSON text ("" when the
  // result has none or is not JSON), extracted by SQLite's JSON functions
  // when the estimate was stored, so the long result text is not read
  // again (the dashboard asks for years of these at once). Same rows and
  // order as ForceHistory.
  struct FixityRow {
    Id estimate_id = 0;
    std::int64_t measured_at_unix_ms = 0;
    std::string end_fixity_json;
  };
  StorageStatus FixityHistory(Id organisation_id, Id member_id, std::int64_t from_unix_ms,
                              std::int64_t to_unix_ms, std::vector<FixityRow>* out);

  // --- alerts ---------------------------------------------------------
  StorageStatus RaiseAlert(Id organisation_id, const NewAlert& alert, std::int64_t now_unix_ms, Id* id);
  StorageStatus GetAlert(Id organisation_id, Id alert_id, Alert* out);
  StorageStatus ListAlerts(Id organisation_id, const AlertFilter& filter, std::vector<Alert>* out);  // by id
  // open -> acknowledged; anything else is SQLITE_CONSTRAINT naming the state.
  StorageStatus AcknowledgeAlert(Id organisation_id, Id alert_id, std::int64_t now_unix_ms);
  // open or acknowledged -> resolved.
  StorageStatus ResolveAlert(Id organisation_id, Id alert_id, std::int64_t now_unix_ms);

  // --- webhooks ---------------------------------------------------------
  StorageStatus CreateWebhook(Id organisation_id, std::string_view url, std::string_view secret,
                              std::int64_t now_unix_ms, Id* id);
  StorageStatus ListWebhooks(Id organisation_id, bool active_only, std::vector<Webhook>* out);
  StorageStatus DeactivateWebhook(Id organisation_id, Id webhook_id);
  StorageStatus RecordDelivery(Id organisation_id, const DeliveryAttempt& attempt, Id* id);
  StorageStatus ListDeliveries(Id organisation_id, Id alert_id, std::vector<DeliveryAttempt>* out);

  // --- lookups of the HTTP layer ---------------------------------------
  // Unscoped by design: `taut token create --org NAME` finds the
  // organisation by its unique name before any token exists.
  StorageStatus FindOrganisationByName(std::string_view name, Organisation* out);
  // The estimate stored for a record (with result_json); not_found() until
  // the record's job is done.
  StorageStatus EstimateForRecord(Id organisation_id, Id record_id, Estimate* out);
  // Jobs per state name ("queued", "running", "done", "failed"; every state
  // present, 0 when none) over all organisations: the /metrics gauge.
  StorageStatus CountJobsByState(std::map<std::string, std::int64_t>* out);
  // recorded_at of the member's newest record; not_found() without records.
  StorageStatus LatestRecordTime(Id organisation_id, Id member_id, std::int64_t* recorded_at_unix_ms);

  // --- worker side: drift checks and webhook deliveries -----------------
  // Estimates whose drift check has not run yet (oldest first, at most
  // `limit`). Unscoped: the workers serve every organisation.
  StorageStatus PendingDriftChecks(std::size_t limit, std::vector<Estimate>* out);
  // Marks the estimate's drift check done (after its alerts are stored).
  StorageStatus MarkDriftChecked(Id organisation_id, Id estimate_id, std::int64_t now_unix_ms);
  // As RaiseAlert, but at most once per (member, rule, estimate): when such
  // an alert exists already, *id is its id, *created = false and nothing is
  // written. alert.estimate_id must be set.
  // unless_standing: nor when the member has an open or acknowledged alert
  // of the same rule for another estimate (*id is that alert's). Checked in
  // the write transaction, which on PostgreSQL first takes a
  // transaction-level advisory lock on the member (pg_advisory_xact_lock),
  // so the drift checks of one member by several workers or replicas raise
  // one alert per rule.
  StorageStatus RaiseAlertOnce(Id organisation_id, const NewAlert& alert, std::int64_t now_unix_ms, Id* id,
                               bool* created, bool unless_standing = false);
  // Per-member drift settings as JSON text (server/ parses it);
  // not_found() when the member uses the defaults.
  StorageStatus GetDriftSettings(Id organisation_id, Id member_id, std::string* settings_json);
  StorageStatus SetDriftSettings(Id organisation_id, Id member_id, std::string_view settings_json,
                                 std::int64_t now_unix_ms);
  // Every stored drift settings row of live members (unscoped, for the
  // workers' periodic stale-data check).
  struct MemberSettings {
    Id organisation_id = 0;
    Id member_id = 0;
    std::string settings_json;
  };
  StorageStatus ListAllDriftSettings(std::vector<MemberSettings>* out);
  // Deliveries due at `now_unix_ms` (unscoped, for the webhook thread):
  // every (active subscription, alert raised after the subscription was
  // created) of one organisation without a successful attempt, whose last
  // attempt asked for another (next_attempt_at <= now) or that has none.
  // At most `limit`, earliest due first.
  struct DueDelivery {
    Id organisation_id = 0;
    Id subscription_id = 0;
    std::string url, secret;
    Id alert_id = 0;
    int attempt = 1;  // the number of the attempt to make
    std::int64_t due_at_unix_ms = 0;
  };
  StorageStatus DueDeliveries(std::int64_t now_unix_ms, std::size_t limit, std::vector<DueDelivery>* out);
  // Claims attempt d.attempt of the (subscription, alert) delivery for
  // `owner` until now + duration_ms (schema step 8), so that of several
  // replicas reading the same due list one makes the attempt. *claimed =
  // false when another owner's claim on it has not expired or the attempt
  // (or a later one) is logged already.
  StorageStatus ClaimDelivery(const DueDelivery& d, std::string_view owner, std::int64_t now_unix_ms,
                              std::int64_t duration_ms, bool* claimed);

  // Test hook (STYLE.md item 13, fail-at-step-N): called with a running
  // step number (1, 2, ...) before each SQL statement executed inside a
  // write transaction; a return value other than SQLITE_OK fails that
  // statement with that code, and the transaction rolls back. Pass {} to
  // remove. The counter restarts at 1 for every write.
  void SetFaultHookForTesting(std::function<int(int step)> hook) { fault_hook_ = std::move(hook); }

 private:
  StorageStatus Write(const std::function<StorageStatus()>& body, bool read_committed = false);
  StorageStatus Fault();  // consults fault_hook_ for the next step
  StorageStatus InsertAlert(Id organisation_id, const NewAlert& alert, std::int64_t now_unix_ms, Id* id);

  Database& db_;  // not owned; must outlive this
  std::function<int(int)> fault_hook_;
  int fault_step_ = 0;
};

}  // namespace taut::storage
