// Repository: estimates and their queries, drift-check bookkeeping (repository.h).
#include <cmath>
#include <cstring>
#include <limits>

#include "storage/repository.h"
#include "storage/repository_internal.h"
#include "storage/statement.h"

namespace taut::storage {

using namespace repository_internal;  // NOLINT(google-build-using-namespace): this file's own helpers

StorageStatus Repository::GetEstimate(Id organisation_id, Id estimate_id, Estimate* out) {
  Statement s(db_, std::string("SELECT ") + kEstimateColumns +
                       ", result_json FROM estimate WHERE id = ?1 AND organisation_id = ?2");
  s.Bind(1, estimate_id).Bind(2, organisation_id);
  return ReadOne(s, IdText("estimate", estimate_id), [&](const Statement& r) {
    *out = ReadEstimate(r);
    out->result_json = r.Text(16);
  });
}

StorageStatus Repository::LatestEstimate(Id organisation_id, Id member_id, Estimate* out) {
  Statement s(db_, std::string("SELECT ") + kEstimateColumns +
                       ", result_json FROM estimate WHERE organisation_id = ?1 AND member_id = ?2 "
                       "ORDER BY measured_at_unix_ms DESC, id DESC LIMIT 1");
  s.Bind(1, organisation_id).Bind(2, member_id);
  return ReadOne(s, "estimate of " + IdText("member", member_id), [&](const Statement& r) {
    *out = ReadEstimate(r);
    out->result_json = r.Text(16);
  });
}

StorageStatus Repository::EstimateForRecord(Id organisation_id, Id record_id, Estimate* out) {
  // Index estimate_record; one estimate per record (its job stores it once).
  Statement s(db_, std::string("SELECT ") + kEstimateColumns +
                       ", result_json FROM estimate WHERE record_id = ?1 AND organisation_id = ?2 "
                       "ORDER BY id DESC LIMIT 1");
  s.Bind(1, record_id).Bind(2, organisation_id);
  return ReadOne(s, "estimate of " + IdText("record", record_id), [&](const Statement& r) {
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
  Statement s(db_, std::string("SELECT ") + kEstimateColumns +
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
  Statement s(db_,
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

StorageStatus Repository::PendingDriftChecks(std::size_t limit, std::vector<Estimate>* out) {
  // Partial index estimate_drift_pending holds exactly these rows.
  Statement s(db_, std::string("SELECT ") + kEstimateColumns +
                       " FROM estimate WHERE drift_checked_at_unix_ms IS NULL ORDER BY id LIMIT ?1");
  s.Bind(1, static_cast<std::int64_t>(limit));
  return ReadAll(s, out, ReadEstimate);
}

StorageStatus Repository::MarkDriftChecked(Id organisation_id, Id estimate_id, std::int64_t now_unix_ms) {
  return Write([&]() -> StorageStatus {
    if (StorageStatus f = Fault(); !f.ok()) return f;
    Statement s(db_,
                "UPDATE estimate SET drift_checked_at_unix_ms = ?3 WHERE id = ?1 AND organisation_id = ?2");
    s.Bind(1, estimate_id).Bind(2, organisation_id).Bind(3, now_unix_ms);
    return RunOneRow(s, IdText("estimate", estimate_id));
  });
}

}  // namespace taut::storage
