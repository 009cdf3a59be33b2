// Records (metadata and CSV download) and jobs.
#include "server/hashing.h"
#include "server/http_router.h"
#include "server/iso_time.h"
#include "server/record_csv.h"
#include "server/routes.h"
#include "server/row_json.h"

// After Eigen: glibc's <resolv.h>, which httplib pulls in, defines _res.
#include <httplib.h>

namespace taut::server {

namespace {

using nlohmann::json;
using storage::Id;
using storage::StorageStatus;

void GetRecord(Call& c) {
  storage::Record r;
  Check(c.repo.GetRecord(c.who.organisation_id, c.ids[0], &r));
  SendJson(c.res, 200, RecordJson(r));
}

void GetRecordCsv(Call& c) {
  storage::Record r;
  Check(c.repo.GetRecord(c.who.organisation_id, c.ids[0], &r));
  if (Sha256Hex(storage::EncodeSamples(r.samples)) != r.samples_sha256) {
    Fail(500, "internal", "record " + std::to_string(r.id) + ": stored samples do not match their SHA-256");
  }
  RecordCsvHeader header;
  header.recorded_at = FormatIsoUtc(r.recorded_at_unix_ms);
  header.temperature_c = r.temperature_c;
  header.units = r.units;
  header.excitation = r.excitation;
  const std::size_t nc = r.channels.size();
  std::string out = FormatRecordCsv(
      header, r.channels, r.sample_rate_hz, r.sample_count,
      [&](std::int64_t i, std::size_t j) { return r.samples[static_cast<std::size_t>(i) * nc + j]; });
  c.res.status = 200;
  c.res.set_header("Content-Disposition", "attachment; filename=\"record-" + std::to_string(r.id) + ".csv\"");
  SendUncompressed(c.res, 200, std::move(out), "text/csv");
}

void GetRecordEstimate(Call& c) {
  storage::Record r;
  Check(c.repo.GetRecord(c.who.organisation_id, c.ids[0], &r));
  storage::Estimate e;
  Check(c.repo.EstimateForRecord(c.who.organisation_id, c.ids[0], &e));
  SendJson(c.res, 200, EstimateJson(e));
}

void GetJob(Call& c) {
  storage::Job job;
  Check(c.repo.GetJob(c.who.organisation_id, c.ids[0], &job));
  json j = JobJson(job);
  if (job.state == storage::JobState::kDone) {
    storage::Estimate e;
    if (c.repo.EstimateForRecord(c.who.organisation_id, job.record_id, &e).ok()) j["estimate_id"] = e.id;
  }
  SendJson(c.res, 200, j);
}

}  // namespace

void RegisterRecordRoutes(Router& r) {
  using storage::Role;
  r.Add("GET", "/v1/records/{id}", Role::kRead, GetRecord);
  r.Add("GET", "/v1/records/{id}/csv", Role::kRead, GetRecordCsv);
  r.Add("GET", "/v1/records/{id}/estimate", Role::kRead, GetRecordEstimate);
  r.Add("GET", "/v1/jobs/{id}", Role::kRead, GetJob);
}

}  // namespace taut::server
