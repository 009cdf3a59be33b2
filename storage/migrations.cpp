#include "storage/migrations.h"

#include <array>
#include <string>

#include "storage/postgres_migrations.h"
#include "storage/statement.h"

namespace taut::storage {
namespace {

struct Migration {
  int version;
  const char* name;
  const char* sql;
};

// Organisation scoping is enforced by the schema as well as by the
// repositories: every owned table carries organisation_id, every parent
// declares UNIQUE (organisation_id, id), and children reference the pair, so
// a row can never point at another organisation's parent.
constexpr const char* kV1 = R"sql(
CREATE TABLE organisation (
  id                  INTEGER PRIMARY KEY,
  name                TEXT NOT NULL UNIQUE CHECK (length(name) BETWEEN 1 AND 128),
  created_at_unix_ms  INTEGER NOT NULL
);
CREATE TABLE api_token (
  id                  INTEGER PRIMARY KEY,
  organisation_id     INTEGER NOT NULL REFERENCES organisation(id),
  public_id           TEXT NOT NULL UNIQUE CHECK (length(public_id) BETWEEN 1 AND 64),
  salt                BLOB NOT NULL,
  hash                BLOB NOT NULL,
  role                TEXT NOT NULL CHECK (role IN ('read', 'upload', 'admin')),
  label               TEXT NOT NULL DEFAULT '',
  created_at_unix_ms  INTEGER NOT NULL,
  revoked_at_unix_ms  INTEGER
);
CREATE TABLE structure (
  id                  INTEGER PRIMARY KEY,
  organisation_id     INTEGER NOT NULL REFERENCES organisation(id),
  name                TEXT NOT NULL CHECK (length(name) BETWEEN 1 AND 200),
  description         TEXT NOT NULL DEFAULT '',
  created_at_unix_ms  INTEGER NOT NULL,
  deleted_at_unix_ms  INTEGER,
  UNIQUE (organisation_id, id)
);
CREATE TABLE member (
  id                  INTEGER PRIMARY KEY,
  organisation_id     INTEGER NOT NULL,
  structure_id        INTEGER NOT NULL,
  external_id         TEXT NOT NULL CHECK (length(external_id) BETWEEN 1 AND 64),
  current_version     INTEGER NOT NULL CHECK (current_version >= 1),
  created_at_unix_ms  INTEGER NOT NULL,
  deleted_at_unix_ms  INTEGER,
  UNIQUE (organisation_id, id),
  FOREIGN KEY (organisation_id, structure_id) REFERENCES structure(organisation_id, id)
);
CREATE UNIQUE INDEX member_live_external_id ON member(structure_id, external_id)
  WHERE deleted_at_unix_ms IS NULL;
CREATE TABLE member_version (
  member_id           INTEGER NOT NULL REFERENCES member(id),
  version             INTEGER NOT NULL CHECK (version >= 1),
  description_json    TEXT NOT NULL,
  created_at_unix_ms  INTEGER NOT NULL,
  PRIMARY KEY (member_id, version)
) WITHOUT ROWID;
CREATE TABLE record (
  id                  INTEGER PRIMARY KEY,
  organisation_id     INTEGER NOT NULL,
  member_id           INTEGER NOT NULL,
  member_version      INTEGER NOT NULL,
  recorded_at_unix_ms INTEGER NOT NULL,
  temperature_c       REAL,
  units               TEXT NOT NULL CHECK (units IN ('m/s2', 'g')),
  excitation          TEXT NOT NULL CHECK (excitation IN ('ambient', 'impact')),
  sample_rate_hz      REAL NOT NULL CHECK (sample_rate_hz > 0),
  channels            TEXT NOT NULL,
  channel_count       INTEGER NOT NULL CHECK (channel_count >= 1),
  sample_count        INTEGER NOT NULL CHECK (sample_count >= 1),
  sample_format       TEXT NOT NULL CHECK (sample_format = 'f32le'),
  samples             BLOB NOT NULL CHECK (length(samples) = 4 * channel_count * sample_count),
  content_sha256      TEXT NOT NULL CHECK (length(content_sha256) = 64),
  samples_sha256      TEXT NOT NULL CHECK (length(samples_sha256) = 64),
  idempotency_key     TEXT,
  created_at_unix_ms  INTEGER NOT NULL,
  UNIQUE (organisation_id, id),
  UNIQUE (member_id, content_sha256),
  UNIQUE (organisation_id, idempotency_key),
  FOREIGN KEY (organisation_id, member_id) REFERENCES member(organisation_id, id),
  FOREIGN KEY (member_id, member_version) REFERENCES member_version(member_id, version)
);
CREATE TABLE job (
  id                  INTEGER PRIMARY KEY,
  organisation_id     INTEGER NOT NULL,
  record_id           INTEGER NOT NULL UNIQUE,
  state               TEXT NOT NULL CHECK (state IN ('queued', 'running', 'done', 'failed')),
  progress            REAL NOT NULL DEFAULT 0 CHECK (progress >= 0 AND progress <= 1),
  failure_reason      TEXT,
  attempts            INTEGER NOT NULL DEFAULT 0,
  created_at_unix_ms  INTEGER NOT NULL,
  started_at_unix_ms  INTEGER,
  finished_at_unix_ms INTEGER,
  UNIQUE (organisation_id, id),
  FOREIGN KEY (organisation_id, record_id) REFERENCES record(organisation_id, id),
  CHECK (state <> 'failed' OR failure_reason IS NOT NULL)
);
CREATE INDEX job_queue ON job(state, id);
CREATE TABLE estimate (
  id                  INTEGER PRIMARY KEY,
  organisation_id     INTEGER NOT NULL,
  member_id           INTEGER NOT NULL,
  record_id           INTEGER NOT NULL,
  job_id              INTEGER REFERENCES job(id),
  measured_at_unix_ms INTEGER NOT NULL,
  axial_force_n       REAL NOT NULL,
  force_ci95_low_n    REAL NOT NULL,
  force_ci95_high_n   REAL NOT NULL,
  bending_stiffness_nm2 REAL,
  result_json         TEXT NOT NULL,
  created_at_unix_ms  INTEGER NOT NULL,
  FOREIGN KEY (organisation_id, member_id) REFERENCES member(organisation_id, id),
  FOREIGN KEY (organisation_id, record_id) REFERENCES record(organisation_id, id),
  CHECK (force_ci95_low_n <= axial_force_n AND axial_force_n <= force_ci95_high_n)
);
CREATE INDEX estimate_record ON estimate(record_id);
)sql";

// Rebuilds `estimate` with NOT NULL member_version and the columns drift
// detection needs, following the table-rebuild procedure of the SQLite
// documentation ("ALTER TABLE", section "Making Other Kinds Of Table Schema
// Changes", sqlite.org): create the new table, copy, drop, rename. Nothing
// references `estimate` at version 1, so foreign keys may stay on.
// Backfill: member_version and temperature_c come from the estimate's
// record; force_std_n is the half-width of the stored 95 % interval over
// 1.959964 (normal quantile), and the EI standard deviation, which version 1
// did not keep, stays NULL.
// estimate_member_time is a covering index of the force-history query: it
// holds every column ForceHistory selects, so a history read walks adjacent
// index pages and never the table rows, which are wide (result_json, about
// 1-2 kB each). Without it a 30-day history of a member with 100,000
// estimates read ~1,000 table pages (bench_storage).
constexpr const char* kV2 = R"sql(
CREATE TABLE estimate_v2 (
  id                  INTEGER PRIMARY KEY,
  organisation_id     INTEGER NOT NULL,
  member_id           INTEGER NOT NULL,
  member_version      INTEGER NOT NULL,
  record_id           INTEGER NOT NULL,
  job_id              INTEGER REFERENCES job(id),
  measured_at_unix_ms INTEGER NOT NULL,
  temperature_c       REAL,
  axial_force_n       REAL NOT NULL,
  force_std_n         REAL CHECK (force_std_n >= 0),
  force_ci95_low_n    REAL NOT NULL,
  force_ci95_high_n   REAL NOT NULL,
  bending_stiffness_nm2 REAL,
  bending_stiffness_std_nm2 REAL CHECK (bending_stiffness_std_nm2 >= 0),
  result_json         TEXT NOT NULL,
  created_at_unix_ms  INTEGER NOT NULL,
  UNIQUE (organisation_id, id),
  FOREIGN KEY (organisation_id, member_id) REFERENCES member(organisation_id, id),
  FOREIGN KEY (member_id, member_version) REFERENCES member_version(member_id, version),
  FOREIGN KEY (organisation_id, record_id) REFERENCES record(organisation_id, id),
  CHECK (force_ci95_low_n <= axial_force_n AND axial_force_n <= force_ci95_high_n)
);
INSERT INTO estimate_v2 (id, organisation_id, member_id, member_version, record_id, job_id,
                         measured_at_unix_ms, temperature_c, axial_force_n, force_std_n,
                         force_ci95_low_n, force_ci95_high_n, bending_stiffness_nm2,
                         bending_stiffness_std_nm2, result_json, created_at_unix_ms)
  SELECT e.id, e.organisation_id, e.member_id, r.member_version, e.record_id, e.job_id,
         e.measured_at_unix_ms, r.temperature_c, e.axial_force_n,
         (e.force_ci95_high_n - e.force_ci95_low_n) / (2 * 1.959964),
         e.force_ci95_low_n, e.force_ci95_high_n, e.bending_stiffness_nm2, NULL,
         e.result_json, e.created_at_unix_ms
  FROM estimate e JOIN record r ON r.id = e.record_id;
DROP TABLE estimate;
ALTER TABLE estimate_v2 RENAME TO estimate;
CREATE INDEX estimate_record ON estimate(record_id);
CREATE INDEX estimate_member_time ON estimate(organisation_id, member_id, measured_at_unix_ms, id,
  member_version, record_id, job_id, temperature_c, axial_force_n, force_std_n, force_ci95_low_n,
  force_ci95_high_n, bending_stiffness_nm2, bending_stiffness_std_nm2, created_at_unix_ms);
)sql";

constexpr const char* kV3 = R"sql(
CREATE TABLE alert (
  id                  INTEGER PRIMARY KEY,
  organisation_id     INTEGER NOT NULL,
  member_id           INTEGER NOT NULL,
  estimate_id         INTEGER,
  rule                TEXT NOT NULL CHECK (length(rule) BETWEEN 1 AND 64),
  state               TEXT NOT NULL CHECK (state IN ('open', 'acknowledged', 'resolved')),
  message             TEXT NOT NULL,
  evidence            TEXT NOT NULL,
  raised_at_unix_ms   INTEGER NOT NULL,
  acknowledged_at_unix_ms INTEGER,
  resolved_at_unix_ms INTEGER,
  UNIQUE (organisation_id, id),
  FOREIGN KEY (organisation_id, member_id) REFERENCES member(organisation_id, id),
  FOREIGN KEY (organisation_id, estimate_id) REFERENCES estimate(organisation_id, id)
);
CREATE INDEX alert_member_state ON alert(organisation_id, member_id, state);
CREATE TABLE webhook_subscription (
  id                  INTEGER PRIMARY KEY,
  organisation_id     INTEGER NOT NULL REFERENCES organisation(id),
  url                 TEXT NOT NULL CHECK (length(url) BETWEEN 1 AND 2048),
  secret              BLOB NOT NULL,
  active              INTEGER NOT NULL DEFAULT 1 CHECK (active IN (0, 1)),
  created_at_unix_ms  INTEGER NOT NULL,
  UNIQUE (organisation_id, id)
);
CREATE TABLE webhook_delivery (
  id                  INTEGER PRIMARY KEY,
  organisation_id     INTEGER NOT NULL,
  subscription_id     INTEGER NOT NULL,
  alert_id            INTEGER NOT NULL,
  attempt             INTEGER NOT NULL CHECK (attempt >= 1),
  attempted_at_unix_ms INTEGER NOT NULL,
  http_status         INTEGER,
  error               TEXT NOT NULL DEFAULT '',
  succeeded           INTEGER NOT NULL CHECK (succeeded IN (0, 1)),
  next_attempt_at_unix_ms INTEGER,
  UNIQUE (subscription_id, alert_id, attempt),
  FOREIGN KEY (organisation_id, subscription_id) REFERENCES webhook_subscription(organisation_id, id),
  FOREIGN KEY (organisation_id, alert_id) REFERENCES alert(organisation_id, id)
);
)sql";

// Step 4: what the service's workers need to be restartable at any point.
// - estimate.drift_checked_at_unix_ms: NULL until the drift rules have run
//   on the estimate and its alerts are stored, so a process stopped between
//   storing an estimate and raising its alerts finishes the check at the
//   next start (estimates stored before this step count as checked).
// - alert_once: a drift rule fires at most once per estimate, so that
//   re-running a check never raises an alert twice.
// - member_drift_settings: per-member thresholds of the drift rules (JSON
//   text written by server/; absent row = the defaults).
constexpr const char* kV4 = R"sql(
ALTER TABLE estimate ADD COLUMN drift_checked_at_unix_ms INTEGER;
UPDATE estimate SET drift_checked_at_unix_ms = created_at_unix_ms;
CREATE INDEX estimate_drift_pending ON estimate(id) WHERE drift_checked_at_unix_ms IS NULL;
CREATE UNIQUE INDEX alert_once ON alert(organisation_id, member_id, rule, estimate_id)
  WHERE estimate_id IS NOT NULL;
CREATE TABLE member_drift_settings (
  organisation_id     INTEGER NOT NULL,
  member_id           INTEGER NOT NULL,
  settings_json       TEXT NOT NULL,
  updated_at_unix_ms  INTEGER NOT NULL,
  PRIMARY KEY (organisation_id, member_id),
  FOREIGN KEY (organisation_id, member_id) REFERENCES member(organisation_id, id)
) WITHOUT ROWID;
)sql";

// Step 5: the end fixities of each stored result in a column of their own
// (SQLite JSON1 json_extract, at insert from now on), for the fixity
// history, which would otherwise read every long result text.
constexpr const char* kV5 = R"sql(
ALTER TABLE estimate ADD COLUMN end_fixity_json TEXT;
UPDATE estimate SET end_fixity_json = json_extract(result_json, '$.end_fixity') WHERE json_valid(result_json);
)sql";

// Step 6: what the record reader detected and applied when the record was
// read (dialect, skipped logger lines, the calibration: sensitivity, serial,
// calibration date, polarity), one note per line, so that a record shows
// which calibration turned its volts into m/s^2.
constexpr const char* kV6 = R"sql(
ALTER TABLE record ADD COLUMN reader_notes TEXT NOT NULL DEFAULT '';
)sql";

// Step 7 (issue 16): what the asset file and the triage need.
// - estimate.verdict_code: the identification's verdict ("usable",
//   "reduced-confidence", "unusable"; NULL for results stored without one,
//   which count as usable), extracted at insert like end_fixity_json, and
//   added to the covering index of the history query so that the drift
//   rules can leave unusable estimates out without reading the results.
// - member_log: the member logbook (re-tensioned, sensor replaced,
//   repaired, inspected, other), with free text, author and time; an entry
//   with new_baseline = 1 restarts the member's drift baseline at its time.
constexpr const char* kV7 = R"sql(
ALTER TABLE estimate ADD COLUMN verdict_code TEXT;
UPDATE estimate SET verdict_code = json_extract(result_json, '$.verdict.code') WHERE json_valid(result_json);
DROP INDEX estimate_member_time;
CREATE INDEX estimate_member_time ON estimate(organisation_id, member_id, measured_at_unix_ms, id,
  member_version, record_id, job_id, temperature_c, axial_force_n, force_std_n, force_ci95_low_n,
  force_ci95_high_n, bending_stiffness_nm2, bending_stiffness_std_nm2, created_at_unix_ms, verdict_code);
CREATE TABLE member_log (
  id                  INTEGER PRIMARY KEY,
  organisation_id     INTEGER NOT NULL,
  member_id           INTEGER NOT NULL,
  kind                TEXT NOT NULL CHECK (kind IN ('re-tensioned', 'sensor-replaced', 'repaired',
                                                    'inspected', 'other')),
  note                TEXT NOT NULL DEFAULT '' CHECK (length(note) <= 4000),
  author              TEXT NOT NULL CHECK (length(author) BETWEEN 1 AND 200),
  occurred_at_unix_ms INTEGER NOT NULL,
  new_baseline        INTEGER NOT NULL DEFAULT 0 CHECK (new_baseline IN (0, 1)),
  created_at_unix_ms  INTEGER NOT NULL,
  UNIQUE (organisation_id, id),
  FOREIGN KEY (organisation_id, member_id) REFERENCES member(organisation_id, id)
);
CREATE INDEX member_log_member_time ON member_log(organisation_id, member_id, occurred_at_unix_ms);
)sql";

// Step 8: several service replicas on one database (docs/OPERATIONS.md).
// - job.lease_owner / lease_expires_at_unix_ms: the worker that claimed a
//   running job and until when its claim holds; the worker's heartbeat
//   renews it, and a job whose lease expired (its replica died) is claimed
//   again by another. NULL expiry: a claim without a lease (one process).
// - webhook_delivery_claim: which replica makes attempt N of a
//   (subscription, alert) delivery, until when; one row per attempt, so an
//   attempt is made by one replica, and again only after its claim expired.
constexpr const char* kV8 = R"sql(
ALTER TABLE job ADD COLUMN lease_owner TEXT;
ALTER TABLE job ADD COLUMN lease_expires_at_unix_ms INTEGER;
CREATE TABLE webhook_delivery_claim (
  subscription_id     INTEGER NOT NULL,
  alert_id            INTEGER NOT NULL,
  attempt             INTEGER NOT NULL CHECK (attempt >= 1),
  owner               TEXT NOT NULL,
  expires_at_unix_ms  INTEGER NOT NULL,
  PRIMARY KEY (subscription_id, alert_id, attempt)
);
)sql";

constexpr std::array<Migration, 8> kMigrations = {{
    {1, "initial schema", kV1},
    {2, "estimate: member version, temperature, standard deviations, history index", kV2},
    {3, "alerts and webhooks", kV3},
    {4, "drift checks that survive a restart, alert once per rule and estimate, drift settings", kV4},
    {5, "estimate: end fixities extracted from the result", kV5},
    {6, "record: the reader's notes (dialect, calibration applied)", kV6},
    {7, "estimate: verdict extracted from the result; member logbook", kV7},
    {8, "job leases and webhook delivery claims for several replicas", kV8},
}};

constexpr const char* kMigrationTable = R"sql(
CREATE TABLE IF NOT EXISTS schema_migration (
  version             INTEGER PRIMARY KEY,
  name                TEXT NOT NULL,
  applied_at_unix_ms  INTEGER NOT NULL
);
)sql";

}  // namespace

int LatestSchemaVersion() { return static_cast<int>(kMigrations.size()); }

StorageStatus SchemaVersion(Database& db, int* version) {
  if (db.is_postgres()) return PgSchemaVersion(*db.postgres(), version);
  *version = 0;
  internal::Statement exists(
      db, "SELECT 1 FROM sqlite_master WHERE type = 'table' AND name = 'schema_migration'");
  const int rc = exists.Step();
  if (rc == SQLITE_DONE) return {};
  if (rc != SQLITE_ROW) return exists.status();
  internal::Statement max(db, "SELECT coalesce(max(version), 0) FROM schema_migration");
  if (max.Step() != SQLITE_ROW) return max.status();
  *version = static_cast<int>(max.Int64(0));
  return {};
}

StorageStatus Migrate(Database& db, int target_version) {
  if (target_version < 1 || target_version > LatestSchemaVersion()) {
    return {SQLITE_MISUSE, "target schema version " + std::to_string(target_version) + " must be in 1.." +
                               std::to_string(LatestSchemaVersion())};
  }
  if (db.is_postgres()) return PgMigrate(*db.postgres(), target_version);
  if (StorageStatus s = db.Exec(kMigrationTable); !s.ok()) return s;
  for (const Migration& m : kMigrations) {
    if (m.version > target_version) break;
    StorageStatus s = internal::WriteTransaction(db, [&]() -> StorageStatus {
      int current = 0;
      if (StorageStatus v = SchemaVersion(db, &current); !v.ok()) return v;
      if (current >= m.version) return {};  // applied already (perhaps by another process)
      if (current != m.version - 1) {
        return {SQLITE_CORRUPT, "schema_migration is at version " + std::to_string(current) +
                                    ", cannot apply step " + std::to_string(m.version)};
      }
      if (StorageStatus e = db.Exec(m.sql); !e.ok()) {
        e.message = "schema step " + std::to_string(m.version) + " (" + m.name + "): " + e.message;
        return e;
      }
      internal::Statement row(db,
                              "INSERT INTO schema_migration (version, name, applied_at_unix_ms) "
                              "VALUES (?1, ?2, CAST((julianday('now') - 2440587.5) * 86400000 AS INTEGER))");
      row.Bind(1, static_cast<std::int64_t>(m.version)).Bind(2, std::string_view(m.name));
      return row.Run();
    });
    if (!s.ok()) return s;
  }
  int current = 0;
  if (StorageStatus s = SchemaVersion(db, &current); !s.ok()) return s;
  if (current > target_version) {
    return {SQLITE_MISMATCH, "database schema version " + std::to_string(current) +
                                 " is newer than this build knows (" + std::to_string(target_version) + ")"};
  }
  return {};
}

StorageStatus OpenAndMigrate(Database& db, const std::string& path) {
  if (StorageStatus s = db.Open(path); !s.ok()) return s;
  return Migrate(db);
}

}  // namespace taut::storage
