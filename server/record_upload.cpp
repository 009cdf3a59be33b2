// POST /v1/members/{id}/records: a record upload (CSV, FORMATS.md section
// 2, or JSON, docs/API.md) is checked, stored and queued as a job in one
// transaction.
#include <algorithm>
#include <cmath>
#include <optional>
#include <sstream>

#include "estimation/record.h"
#include "server/hashing.h"
#include "server/http_router.h"
#include "server/iso_time.h"
#include "server/member_json.h"
#include "server/record_json.h"
#include "server/routes.h"
#include "server/safe_text.h"
#include "server/service_limits.h"
#include "server/upload_csv.h"

// After Eigen: glibc's <resolv.h>, which httplib pulls in, defines _res.
#include <httplib.h>

namespace taut::server {

namespace {

using nlohmann::json;
using storage::Id;
using storage::StorageStatus;

// The metadata a record is stored with (after the query's overrides).
struct Metadata {
  std::optional<std::int64_t> recorded_at_unix_ms;
  std::optional<double> temperature_c;
  std::string units;
  std::string excitation;
  bool operator==(const Metadata&) const = default;
};

Metadata MetadataOf(const estimation::Record& r) {
  Metadata m;
  std::int64_t ms = 0;
  if (!r.recorded_at.empty() && ParseIsoUtc(r.recorded_at, &ms)) m.recorded_at_unix_ms = ms;
  m.temperature_c = r.temperature_c;
  m.units = r.units;
  m.excitation = estimation::ToString(r.excitation);
  return m;
}

// Samples are stored as IEEE binary32 (storage/repository.h): a value
// beyond kMaxAbsAcceleration_m_s2 is refused with its position rather
// than stored as something else (1e308 read back as inf).
void CheckSampleValues(const estimation::Record& r, bool json) {
  const Eigen::Index n = r.samples.rows(), nc = r.samples.cols();
  for (Eigen::Index i = 0; i < n; ++i) {
    for (Eigen::Index j = 0; j < nc; ++j) {
      const double v = r.samples(i, j);
      if (std::isfinite(v) && std::abs(v) <= kMaxAbsAcceleration_m_s2) continue;
      const std::string where = json ? "$.samples[" + std::to_string(i) + "][" + std::to_string(j) + "]"
                                     : "data row " + std::to_string(i + 1) + ", channel " + r.channels[j];
      std::ostringstream value;
      value << v;
      Fail(422, "unprocessable",
           where + " = " + value.str() + " m/s2: not a finite acceleration within +-" +
               std::to_string(static_cast<long long>(kMaxAbsAcceleration_m_s2)) + " m/s2");
    }
  }
}

void UploadRecord(Call& c) {
  storage::Member stored;
  Check(c.repo.GetMember(c.who.organisation_id, c.ids[0], &stored));
  model::Member member;
  if (Status s = ParseMember(stored.description_json, &member, kStoredMember); !s.ok()) {
    Fail(500, "internal", "stored description of member " + std::to_string(stored.id) + ": " + s.message);
  }
  const std::string content_type = c.req.get_header_value("Content-Type");
  estimation::Record record;
  const bool json_body = content_type.rfind("application/json", 0) == 0;
  // The record's own metadata, before the query's overrides (unset: the
  // CSV reader applied overrides while reading, see below).
  std::optional<Metadata> own;
  if (json_body) {
    record = ParseRecordJson(c.body, member);
    own = MetadataOf(record);
  } else if (content_type.empty() || content_type.rfind("text/csv", 0) == 0 ||
             content_type.rfind("text/plain", 0) == 0) {
    // Overrides and ?profile= go to the reader (server/upload_csv.h), which
    // needs the member for the channels and the sensors' calibration; a
    // rule broken (a channel that is not a sensor, recorded_at out of
    // range) is 422, a malformed file 400.
    const UploadCsvParams params{Query(c.req, "recorded_at"), Query(c.req, "units"),
                                 Query(c.req, "excitation"), Query(c.req, "profile"),
                                 QueryNumber(c.req, "temperature_c")};
    int status = 400;
    if (Status s = ReadUploadedCsv(c.body, member, params, &record, &status); !s.ok())
      Fail(status, status == 422 ? "unprocessable" : "bad-request", s.message);
    // Without an override the metadata read are the file's own; with one,
    // the upload is keyed on body + effective metadata (below).
    if (!params.recorded_at && !params.units && !params.excitation && !params.temperature_c)
      own = MetadataOf(record);
  } else {
    Fail(415, "unsupported-media-type",
         "Content-Type \"" + Excerpt(content_type) +
             "\": send text/csv (docs/FORMATS.md section 2) or application/json");
  }
  // Query parameters override the JSON record's own metadata
  // (docs/FORMATS.md section 2); the CSV reader applied them already.
  if (auto v = Query(c.req, "recorded_at"); v && json_body) record.recorded_at = *v;
  if (auto v = QueryNumber(c.req, "temperature_c"); v && json_body) record.temperature_c = *v;
  if (auto v = Query(c.req, "units"); v && json_body) {
    if (*v != "m/s2" && *v != "g")
      Fail(400, "bad-request", "units = \"" + Excerpt(*v) + "\": must be m/s2 or g");
    if (*v != record.units) {
      record.samples *=
          (*v == "g") ? estimation::kStandardGravity_m_s2 : 1.0 / estimation::kStandardGravity_m_s2;
      record.units = *v;
    }
  }
  if (auto v = Query(c.req, "excitation"); v && json_body) {
    if (!estimation::ParseExcitation(*v, &record.excitation)) {
      Fail(400, "bad-request", "excitation = \"" + Excerpt(*v) + "\": must be ambient or impact");
    }
  }
  if (record.temperature_c && (*record.temperature_c < estimation::kMinTemperature_c ||
                               *record.temperature_c > estimation::kMaxTemperature_c)) {
    Fail(422, "unprocessable",
         "temperature_c = " + std::to_string(*record.temperature_c) + ": outside " +
             std::to_string(static_cast<int>(estimation::kMinTemperature_c)) + ".." +
             std::to_string(static_cast<int>(estimation::kMaxTemperature_c)) + " C");
  }
  if (record.recorded_at.empty()) {
    Fail(422, "unprocessable",
         "recorded_at is required: a '# recorded_at=...' line in the CSV, the JSON field or the query "
         "parameter");
  }
  storage::NewRecord nr;
  nr.member_id = stored.id;
  if (!ParseIsoUtc(record.recorded_at, &nr.recorded_at_unix_ms)) {
    Fail(422, "unprocessable",
         "recorded_at = \"" + Excerpt(record.recorded_at) + "\": not an ISO 8601 UTC time");
  }
  if (nr.recorded_at_unix_ms < kEarliestRecordedAt_unix_ms ||
      nr.recorded_at_unix_ms > c.now_unix_ms + kMaxClockSkew_ms) {
    Fail(422, "unprocessable",
         "recorded_at = \"" + Excerpt(record.recorded_at) + "\": must lie between 1900-01-01 and " +
             std::to_string(kMaxClockSkew_ms / 60000) + " minutes after the server's time (" +
             FormatIsoUtc(c.now_unix_ms) + ")");
  }
  CheckSampleValues(record, json_body);
  nr.temperature_c = record.temperature_c;
  // Samples are kept in m/s^2 whatever the upload's units (the reader
  // converted them); the original bytes keep their hash.
  nr.units = "m/s2";
  nr.excitation = estimation::ToString(record.excitation);
  nr.sample_rate_hz = record.sample_rate_hz;
  nr.channels = record.channels;
  const Eigen::Index n = record.samples.rows(), nc = record.samples.cols();
  nr.samples.resize(static_cast<std::size_t>(n * nc));
  for (Eigen::Index i = 0; i < n; ++i) {
    for (Eigen::Index j = 0; j < nc; ++j)
      nr.samples[static_cast<std::size_t>(i * nc + j)] = record.samples(i, j);
  }
  record.samples = Eigen::MatrixXd();  // peak memory: one copy of the samples at a time
  // The upload's identity (docs/API.md "content_sha256"): the body's
  // SHA-256 when the query changed none of its metadata; otherwise the
  // SHA-256 of the body followed by the effective metadata, so that the
  // same body with other overrides is a new record (and the same
  // Idempotency-Key with other overrides a conflict), not a duplicate.
  const Metadata effective = MetadataOf(record);
  if (own && effective == *own) {
    nr.content_sha256 = Sha256Hex(c.body);
  } else {
    std::ostringstream meta;
    meta.precision(17);
    meta << "\n# taut effective metadata: recorded_at_unix_ms=" << nr.recorded_at_unix_ms
         << ";temperature_c=";
    if (record.temperature_c) {
      meta << *record.temperature_c;
    } else {
      meta << "null";
    }
    meta << ";units=" << effective.units << ";excitation=" << effective.excitation << "\n";
    nr.content_sha256 = Sha256Hex(c.body + meta.str());
  }
  nr.samples_sha256 = Sha256Hex(storage::EncodeSamples(nr.samples));
  nr.reader_notes = JoinReaderNotes(record.notes);
  nr.idempotency_key = c.req.get_header_value("Idempotency-Key");
  if (nr.idempotency_key.size() > kMaxIdempotencyKeyLength) {
    Fail(400, "bad-request", "Idempotency-Key longer than " + std::to_string(kMaxIdempotencyKeyLength));
  }
  storage::RecordInsertResult result;
  Check(c.repo.InsertRecord(c.who.organisation_id, nr, c.now_unix_ms, &result));
  if (!result.duplicate && c.options.on_job_queued) c.options.on_job_queued();
  json body = {{"record_id", result.record_id}, {"job_id", result.job_id}, {"duplicate", result.duplicate}};
  if (!record.cautions.empty()) {
    json cautions = json::array();
    for (const auto& k : record.cautions) cautions.push_back({{"code", k.code}, {"message", k.message}});
    body["record_cautions"] = cautions;
  }
  if (!record.notes.empty()) body["record_notes"] = record.notes;
  SendJson(c.res, result.duplicate ? 200 : 202, body);
}

}  // namespace

void RegisterRecordUploadRoutes(Router& r) {
  r.Add("POST", "/v1/members/{id}/records", storage::Role::kUpload, UploadRecord);
}

}  // namespace taut::server
