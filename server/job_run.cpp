#include "server/job_run.h"

#include <algorithm>
#include <chrono>

#include "estimation/identify_record.h"
#include "estimation/tolerance_budget.h"
#include "server/estimate_json.h"
#include "server/hashing.h"
#include "server/iso_time.h"
#include "server/member_json.h"

namespace taut::server {

namespace {

using storage::Id;
using storage::StorageStatus;

// Thrown from the progress callback to abandon an identification that
// overran its time limit (the callback runs between the identification's
// stages, outside Ceres).
struct TimeLimitExceeded {};

// Progress is written to the database at most this often (a write per
// percent would contend with uploads for the write lock for nothing).
constexpr double kProgressStep = 0.1;

// The record as the estimation reads it, from its stored form (samples in
// m/s^2 or g, row-major; storage/repository.h).
estimation::Record ToEstimationRecord(const storage::Record& stored) {
  estimation::Record r;
  r.channels = stored.channels;
  r.sample_rate_hz = stored.sample_rate_hz;
  const Eigen::Index n = stored.sample_count, nc = static_cast<Eigen::Index>(stored.channels.size());
  const double scale = stored.units == "g" ? estimation::kStandardGravity_m_s2 : 1.0;
  r.samples.resize(n, nc);
  for (Eigen::Index i = 0; i < n; ++i) {
    for (Eigen::Index j = 0; j < nc; ++j) r.samples(i, j) = scale * stored.samples[i * nc + j];
  }
  r.recorded_at = FormatIsoUtc(stored.recorded_at_unix_ms);
  r.temperature_c = stored.temperature_c;
  estimation::ParseExcitation(stored.excitation, &r.excitation);
  r.units = "m/s2";
  // The upload's quality cautions are recomputed on the stored samples
  // (the same checks the reader ran on the upload).
  estimation::CheckRecordQuality(&r);
  return r;
}

}  // namespace

std::string RunIdentification(storage::Repository& repo, const storage::Job& job, Id* estimate_id,
                              Id* member_id, std::chrono::seconds time_limit, bool* retry) {
  if (retry != nullptr) *retry = false;
  const auto deadline = std::chrono::steady_clock::now() + time_limit;
  const std::string over_time = "the identification ran longer than the job time limit of " +
                                std::to_string(time_limit.count()) + " s (taut serve --job-time-limit)";
  storage::Record stored;
  if (StorageStatus s = repo.GetRecord(job.organisation_id, job.record_id, &stored); !s.ok()) {
    if (retry != nullptr) *retry = s.unavailable() || s.busy();
    return "record " + std::to_string(job.record_id) + ": " + s.message;
  }
  *member_id = stored.member_id;
  if (Sha256Hex(storage::EncodeSamples(stored.samples)) != stored.samples_sha256) {
    return "record " + std::to_string(stored.id) + ": stored samples do not match their SHA-256";
  }
  storage::Member version;
  if (StorageStatus s =
          repo.GetMemberVersion(job.organisation_id, stored.member_id, stored.member_version, &version);
      !s.ok()) {
    if (retry != nullptr) *retry = s.unavailable() || s.busy();
    return "member " + std::to_string(stored.member_id) + ": " + s.message;
  }
  model::Member member;
  if (Status s = ParseMember(version.description_json, &member, kStoredMember); !s.ok()) {
    return "member " + std::to_string(stored.member_id) + " version " + std::to_string(version.version) +
           ": " + s.message;
  }
  const estimation::Record record = ToEstimationRecord(stored);
  estimation::IdentifyRecordOptions io;
  double written = 0;
  io.progress = [&](double share) {
    if (std::chrono::steady_clock::now() > deadline) throw TimeLimitExceeded();
    if (share < 1.0 && share - written >= kProgressStep) {
      written = share;
      repo.SetJobProgress(job.id, share, job.lease_owner);  // best effort: progress is advisory
    }
  };
  estimation::Estimate estimate;
  try {
    if (Status s = estimation::IdentifyRecord(member, record, io, &estimate); !s.ok()) return s.message;
  } catch (const TimeLimitExceeded&) {
    return over_time;
  }
  if (std::chrono::steady_clock::now() > deadline) return over_time;
  storage::NewEstimate ne;
  ne.record_id = stored.id;
  ne.axial_force_n = estimate.axial_force_n.value;
  // The repeatable std (without the member tolerances, which every estimate
  // of the member shares): what the drift rules weigh (tolerance_budget.h).
  ne.force_std_n = estimation::RepeatableStd(estimate, true);
  ne.force_ci95_low_n = std::min(estimate.axial_force_n.ci95_low, ne.axial_force_n);
  ne.force_ci95_high_n = std::max(estimate.axial_force_n.ci95_high, ne.axial_force_n);
  ne.bending_stiffness_nm2 = estimate.bending_stiffness_nm2.value;
  if (!estimate.bending_stiffness_nm2.fixed)
    ne.bending_stiffness_std_nm2 = estimation::RepeatableStd(estimate, false);
  ne.result_json = EstimateToJson(estimate).dump();
  if (StorageStatus s = repo.CompleteJobWithEstimate(job.id, ne, NowUnixMs(), estimate_id, job.lease_owner);
      !s.ok()) {
    if (retry != nullptr) *retry = s.unavailable() || s.busy();
    return "storing the estimate: " + s.message;
  }
  return "";
}

}  // namespace taut::server
