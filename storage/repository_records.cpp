// Repository: records and their jobs, the job queue of the workers (repository.h).
#include <cmath>
#include <cstring>
#include <limits>

#include "storage/repository.h"
#include "storage/repository_internal.h"
#include "storage/statement.h"

namespace taut::storage {

using namespace repository_internal;  // NOLINT(google-build-using-namespace): this file's own helpers

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
      Statement by_key(db_,
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
    Statement by_hash(db_,
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
    Statement member(db_,
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
        db_,
        "INSERT INTO record (organisation_id, member_id, member_version, recorded_at_unix_ms, "
        "temperature_c, units, excitation, sample_rate_hz, channels, channel_count, sample_count, "
        "sample_format, samples, content_sha256, samples_sha256, idempotency_key, created_at_unix_ms, "
        "reader_notes) "
        "VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11, 'f32le', ?12, ?13, ?14, ?15, ?16, ?17) "
        "RETURNING id");
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
    Id record_id = 0;
    if (StorageStatus r = InsertReturningId(ins, &record_id); !r.ok()) return r;

    // 4. Its job.
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement job(db_,
                  "INSERT INTO job (organisation_id, record_id, state, progress, created_at_unix_ms) "
                  "VALUES (?1, ?2, 'queued', 0, ?3) RETURNING id");
    job.Bind(1, organisation_id).Bind(2, record_id).Bind(3, now_unix_ms);
    Id job_id = 0;
    if (StorageStatus r = InsertReturningId(job, &job_id); !r.ok()) return r;
    *out = {record_id, job_id, false};
    return {};
  });
}

StorageStatus Repository::GetRecord(Id organisation_id, Id record_id, Record* out) {
  Statement s(
      db_,
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

StorageStatus Repository::LatestRecordTime(Id organisation_id, Id member_id,
                                           std::int64_t* recorded_at_unix_ms) {
  // An aggregate always yields one row: NULL when the member has no record.
  Statement s(db_,
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

StorageStatus Repository::GetJob(Id organisation_id, Id job_id, Job* out) {
  Statement s(db_, std::string("SELECT ") + kJobColumns + " FROM job WHERE id = ?1 AND organisation_id = ?2");
  s.Bind(1, job_id).Bind(2, organisation_id);
  return ReadOne(s, IdText("job", job_id), [&](const Statement& r) { *out = ReadJob(r); });
}

StorageStatus Repository::GetJobForRecord(Id organisation_id, Id record_id, Job* out) {
  Statement s(
      db_, std::string("SELECT ") + kJobColumns + " FROM job WHERE record_id = ?1 AND organisation_id = ?2");
  s.Bind(1, record_id).Bind(2, organisation_id);
  return ReadOne(s, "job of " + IdText("record", record_id), [&](const Statement& r) { *out = ReadJob(r); });
}

StorageStatus Repository::CountJobsByState(std::map<std::string, std::int64_t>* out) {
  std::map<std::string, std::int64_t> counts;
  for (JobState st : {JobState::kQueued, JobState::kRunning, JobState::kDone, JobState::kFailed}) {
    counts[JobStateName(st)] = 0;
  }
  Statement s(db_, "SELECT state, count(*) FROM job GROUP BY state");
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

StorageStatus Repository::ClaimNextJob(std::int64_t now_unix_ms, Job* out, bool* claimed) {
  return ClaimNextJob(now_unix_ms, JobLease{}, out, claimed);
}

namespace {

// The claim, one UPDATE. Claimable: a queued job, or a running one whose
// lease expired (a NULL expiry never does). Fair between organisations: the
// oldest claimable job of the organisation with the fewest running jobs
// (ties: the one whose oldest claimable job is oldest), so one
// organisation's backlog delays another's job by at most one job.
// PostgreSQL locks the chosen row with FOR UPDATE SKIP LOCKED, so a
// concurrent claimer of another replica takes the next job instead.
std::string ClaimSql(bool postgres) {
  const std::string claimable =
      "(%.state = 'queued' OR (%.state = 'running' AND %.lease_expires_at_unix_ms < ?1))";
  auto with = [&](char alias) {
    std::string c = claimable;
    for (std::size_t i = c.find('%'); i != std::string::npos; i = c.find('%', i)) c[i] = alias;
    return c;
  };
  return std::string(
             "UPDATE job SET state = 'running', progress = 0, attempts = attempts + 1, "
             "started_at_unix_ms = ?1, finished_at_unix_ms = NULL, lease_owner = ?2, "
             "lease_expires_at_unix_ms = ?3 "
             "WHERE id = (SELECT q.id FROM job q WHERE ") +
         with('q') + " AND q.organisation_id = (SELECT o.organisation_id FROM job o WHERE " + with('o') +
         " GROUP BY o.organisation_id ORDER BY (SELECT COUNT(*) FROM job r WHERE r.state = 'running' AND "
         "r.organisation_id = o.organisation_id), MIN(o.id) LIMIT 1) ORDER BY q.id LIMIT 1" +
         (postgres ? " FOR UPDATE SKIP LOCKED" : "") + ") RETURNING " + kJobColumns;
}

}  // namespace

StorageStatus Repository::ClaimNextJob(std::int64_t now_unix_ms, const JobLease& lease, Job* out,
                                       bool* claimed) {
  *claimed = false;
  const bool leased = !lease.owner.empty();
  if (leased && (lease.owner.size() > 200 || lease.duration_ms <= 0)) {
    return Misuse("job lease owner must have 1..200 characters and its duration must be > 0 ms");
  }
  static const std::string kSqlite = ClaimSql(false), kPostgres = ClaimSql(true);
  return Write(
      [&]() -> StorageStatus {
        *claimed = false;  // again on a retry (statement.h): a rolled-back claim is no claim
        if (StorageStatus f = Fault(); !f.ok()) return f;
        Statement s(db_, db_.is_postgres() ? kPostgres : kSqlite);
        s.Bind(1, now_unix_ms);
        if (leased) {
          s.Bind(2, std::string_view(lease.owner)).Bind(3, now_unix_ms + lease.duration_ms);
        } else {
          s.BindNull(2).BindNull(3);
        }
        const int rc = s.Step();
        if (rc == SQLITE_DONE) return {};
        if (rc != SQLITE_ROW) return s.status();
        Job j = ReadJob(s);
        if (s.Step() != SQLITE_DONE) return s.status();
        *out = std::move(j);
        *claimed = true;
        return {};
      },
      /*read_committed=*/true);  // the SKIP LOCKED row lock keeps claimers apart (Database::Begin)
}

StorageStatus Repository::RenewJobLease(Id job_id, std::string_view owner, std::int64_t now_unix_ms,
                                        std::int64_t duration_ms) {
  if (owner.empty() || duration_ms <= 0) return Misuse("a lease renewal needs its owner and a duration > 0");
  return Write([&]() -> StorageStatus {
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement s(db_,
                "UPDATE job SET lease_expires_at_unix_ms = ?3 WHERE id = ?1 AND state = 'running' AND "
                "lease_owner = ?2");
    s.Bind(1, job_id).Bind(2, owner).Bind(3, now_unix_ms + duration_ms);
    return RunOneRow(s, "running " + IdText("job", job_id) + " leased to " + std::string(owner));
  });
}

StorageStatus Repository::SetJobProgress(Id job_id, double progress, std::string_view lease_owner) {
  if (!(progress >= 0.0 && progress <= 1.0)) {
    return Misuse("job progress " + std::to_string(progress) + " must be in [0, 1]");
  }
  return Write([&]() -> StorageStatus {
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement s(db_,
                "UPDATE job SET progress = ?2 WHERE id = ?1 AND state = 'running' AND "
                "(?3 = '' OR lease_owner = ?3)");
    s.Bind(1, job_id).Bind(2, progress).Bind(3, lease_owner);
    return RunOneRow(s, "running " + IdText("job", job_id));
  });
}

StorageStatus Repository::FailJob(Id job_id, std::string_view reason, std::int64_t now_unix_ms,
                                  std::string_view lease_owner) {
  if (reason.empty()) return Misuse("job failure reason must not be empty");
  return Write([&]() -> StorageStatus {
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement s(db_,
                "UPDATE job SET state = 'failed', failure_reason = ?2, finished_at_unix_ms = ?3, "
                "lease_expires_at_unix_ms = NULL WHERE id = ?1 AND state = 'running' AND "
                "(?4 = '' OR lease_owner = ?4)");
    s.Bind(1, job_id).Bind(2, reason).Bind(3, now_unix_ms).Bind(4, lease_owner);
    return RunOneRow(s, "running " + IdText("job", job_id));
  });
}

StorageStatus Repository::CompleteJobWithEstimate(Id job_id, const NewEstimate& e, std::int64_t now_unix_ms,
                                                  Id* estimate_id, std::string_view lease_owner) {
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
        db_,
        "SELECT r.organisation_id, r.member_id, r.member_version, r.recorded_at_unix_ms, r.temperature_c "
        "FROM job j JOIN record r ON r.id = j.record_id WHERE j.id = ?1 AND j.state = 'running' AND "
        "j.record_id = ?2 AND (?3 = '' OR j.lease_owner = ?3)");
    job.Bind(1, job_id).Bind(2, e.record_id).Bind(3, lease_owner);
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
    // The end fixities and the verdict are extracted from the result once,
    // here (schema steps 5 and 7): SQLite's JSON functions, or on
    // PostgreSQL taut_json_text (its schema step 8), which gives the same
    // values (NULL for a result that is not JSON).
    static const std::string kSqliteJson =
        "CASE WHEN json_valid(?14) THEN json_extract(?14, '$.end_fixity') END, "
        "CASE WHEN json_valid(?14) THEN json_extract(?14, '$.verdict.code') END)";
    static const std::string kPostgresJson =
        "taut_json_text(?14, 'end_fixity'), taut_json_text(?14, 'verdict', 'code'))";
    Statement ins(
        db_,
        "INSERT INTO estimate (organisation_id, member_id, member_version, record_id, job_id, "
        "measured_at_unix_ms, temperature_c, axial_force_n, force_std_n, force_ci95_low_n, "
        "force_ci95_high_n, bending_stiffness_nm2, bending_stiffness_std_nm2, result_json, "
        "created_at_unix_ms, end_fixity_json, verdict_code) VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, "
        "?9, ?10, ?11, ?12, ?13, ?14, ?15, " +
            (db_.is_postgres() ? kPostgresJson : kSqliteJson) + " RETURNING id");
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
    Id id = 0;
    if (StorageStatus r = InsertReturningId(ins, &id); !r.ok()) return r;

    // 3. The job is done.
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement done(db_,
                   "UPDATE job SET state = 'done', progress = 1, finished_at_unix_ms = ?2, "
                   "lease_expires_at_unix_ms = NULL WHERE id = ?1");
    done.Bind(1, job_id).Bind(2, now_unix_ms);
    if (StorageStatus r = RunOneRow(done, IdText("job", job_id)); !r.ok()) return r;
    *estimate_id = id;
    return {};
  });
}

StorageStatus Repository::RequeueRunningJobs(int* count) {
  return Write([&]() -> StorageStatus {
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement s(
        db_,
        "UPDATE job SET state = 'queued', progress = 0, started_at_unix_ms = NULL, lease_owner = NULL, "
        "lease_expires_at_unix_ms = NULL WHERE state = 'running'");
    if (StorageStatus r = s.Run(); !r.ok()) return r;
    *count = static_cast<int>(s.Changes());
    return {};
  });
}

}  // namespace taut::storage
