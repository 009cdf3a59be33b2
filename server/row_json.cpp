#include "server/row_json.h"

#include "server/api_json.h"
#include "server/http_router.h"
#include "server/iso_time.h"
#include "server/upload_csv.h"

namespace taut::server {

using nlohmann::json;

json StructureJson(const storage::Structure& s) {
  return {{"id", s.id},
          {"name", s.name},
          {"description", s.description},
          {"created_at", FormatIsoUtc(s.created_at_unix_ms)}};
}

json MemberJson(const storage::Member& m) {
  return {{"id", m.id},
          {"structure_id", m.structure_id},
          {"external_id", m.external_id},
          {"version", m.version},
          {"current_version", m.current_version},
          {"created_at", FormatIsoUtc(m.created_at_unix_ms)},
          {"version_created_at", FormatIsoUtc(m.version_created_at_unix_ms)},
          {"deleted", m.deleted_at_unix_ms.has_value()},
          {"description", StoredJson(m.description_json)}};
}

json EstimateJson(const storage::Estimate& e) {
  json j = {{"id", e.id},
            {"record_id", e.record_id},
            {"member_id", e.member_id},
            {"member_version", e.member_version},
            {"measured_at", FormatIsoUtc(e.measured_at_unix_ms)},
            {"temperature_c", Optional(e.temperature_c)},
            {"created_at", FormatIsoUtc(e.created_at_unix_ms)}};
  if (e.job_id) j["job_id"] = *e.job_id;
  j["result"] = StoredJson(e.result_json);
  return j;
}

json HistoryPointJson(const storage::Estimate& e) {
  return {{"estimate_id", e.id},
          {"record_id", e.record_id},
          {"measured_at", FormatIsoUtc(e.measured_at_unix_ms)},
          {"temperature_c", Optional(e.temperature_c)},
          {"axial_force_n", e.axial_force_n},
          {"std_n", Optional(e.force_std_n)},
          {"ci95_n", {e.force_ci95_low_n, e.force_ci95_high_n}},
          {"bending_stiffness_nm2", Optional(e.bending_stiffness_nm2)},
          {"bending_stiffness_std_nm2", Optional(e.bending_stiffness_std_nm2)}};
}

json JobJson(const storage::Job& job) {
  json j = {{"id", job.id},
            {"record_id", job.record_id},
            {"state", storage::JobStateName(job.state)},
            {"progress", job.progress},
            {"attempts", job.attempts},
            {"created_at", FormatIsoUtc(job.created_at_unix_ms)}};
  if (job.state == storage::JobState::kFailed) j["failure_reason"] = job.failure_reason;
  if (job.started_at_unix_ms) j["started_at"] = FormatIsoUtc(*job.started_at_unix_ms);
  if (job.finished_at_unix_ms) j["finished_at"] = FormatIsoUtc(*job.finished_at_unix_ms);
  return j;
}

json RecordJson(const storage::Record& r) {
  return {{"id", r.id},
          {"member_id", r.member_id},
          {"member_version", r.member_version},
          {"recorded_at", FormatIsoUtc(r.recorded_at_unix_ms)},
          {"temperature_c", Optional(r.temperature_c)},
          {"units", r.units},
          {"excitation", r.excitation},
          {"sample_rate_hz", r.sample_rate_hz},
          {"channels", r.channels},
          {"sample_count", r.sample_count},
          {"content_sha256", r.content_sha256},
          {"created_at", FormatIsoUtc(r.created_at_unix_ms)},
          {"reader_notes", SplitReaderNotes(r.reader_notes)}};
}

}  // namespace taut::server
