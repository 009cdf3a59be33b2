#include "server/worker.h"

#include <algorithm>
#include <cmath>
#include <iostream>
#include <limits>
#include <nlohmann/json.hpp>

#include "estimation/drift.h"
#include "estimation/identify_record.h"
#include "server/alert_rules.h"
#include "server/api_json.h"
#include "server/auth.h"
#include "server/dashboard_data.h"
#include "server/estimate_json.h"
#include "server/iso_time.h"
#include "server/member_json.h"
#include "storage/repository.h"

// After Eigen (via estimation/): glibc's <resolv.h>, which httplib pulls
// in, defines the macro _res, a parameter name inside Eigen.
#include <httplib.h>

namespace taut::server {

namespace {

using nlohmann::json;
using storage::Id;
using storage::StorageStatus;

// Progress is written to the database at most this often (a write per
// percent would contend with uploads for the write lock for nothing).
constexpr double kProgressStep = 0.1;
// Pending drift checks taken per pass (a backlog is worked off in passes).
constexpr std::size_t kDriftBatch = 64;
// Deliveries taken per pass of the webhook thread.
constexpr std::size_t kDeliveryBatch = 32;

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

json EvidenceJson(const estimation::DriftAlert& alert, const estimation::DriftReport& report,
                  const std::string& quantity) {
  json points = json::array();
  for (const auto& e : alert.evidence) {
    json p = {{"estimate_id", e.id},
              {"measured_at", FormatIsoUtc(static_cast<std::int64_t>(std::llround(e.time_s * 1000.0)))},
              {"value", e.value}};
    if (e.predicted) p["predicted"] = *e.predicted;
    if (e.residual) p["residual"] = *e.residual;
    if (e.z) p["z"] = *e.z;
    if (e.cusum) p["cusum"] = *e.cusum;
    points.push_back(p);
  }
  json j = {{"rule", alert.rule}, {"quantity", quantity}, {"points", points}};
  const auto& baseline = quantity == "bending_stiffness_nm2" ? report.ei_baseline : report.force_baseline;
  if (baseline) {
    j["baseline"] = {{"points", baseline->n},
                     {"temperature_slope", baseline->has_slope},
                     {"mean_temperature_c", baseline->mean_temperature_c},
                     {"intercept", baseline->intercept},
                     {"slope_per_c", baseline->slope_per_c},
                     {"residual_std", std::sqrt(baseline->residual_variance)}};
  }
  json cautions = json::array();
  for (const auto& c : report.cautions) cautions.push_back({{"code", c.code}, {"message", c.message}});
  j["analysis_cautions"] = cautions;
  j["notice"] = report.notice;
  return j;
}

}  // namespace

struct WorkerPool::Impl {
  Impl(WorkerOptions o, Metrics* m) : options(std::move(o)), metrics(m) {}

  WorkerOptions options;
  Metrics* metrics;  // not owned; may be null
  std::mutex mu;
  std::condition_variable job_cv, webhook_cv;
  bool stopping = false;
  int job_signals = 0, webhook_signals = 0;
  std::vector<std::thread> threads;
  std::mutex log_mu;

  void Log(const std::string& line) {
    if (!options.log) return;
    std::lock_guard<std::mutex> lock(log_mu);
    *options.log << "time=" << FormatIsoUtc(NowUnixMs()) << " " << line << "\n" << std::flush;
  }

  // Waits until signalled (a job or an alert), stopped or `timeout` passed.
  // Returns false when stopping.
  bool Wait(std::condition_variable& cv, int& signals, std::chrono::milliseconds timeout) {
    std::unique_lock<std::mutex> lock(mu);
    cv.wait_for(lock, timeout, [&] { return stopping || signals > 0; });
    if (signals > 0) --signals;
    return !stopping;
  }
  bool Stopping() {
    std::lock_guard<std::mutex> lock(mu);
    return stopping;
  }
  void SignalWebhooks() {
    {
      std::lock_guard<std::mutex> lock(mu);
      ++webhook_signals;
    }
    webhook_cv.notify_one();
  }

  // ---- jobs

  void JobLoop(int index) {
    storage::Database db;
    if (StorageStatus s = db.Open(options.db_path); !s.ok()) {
      Log("level=error worker=" + std::to_string(index) + " database: " + s.message);
      return;
    }
    storage::Repository repo(db);
    StaleDataWatch stale;  // the stale-data rule runs on worker 0 only
    while (!Stopping()) {
      CatchUpDriftChecks(repo);
      if (index == 0 && stale.Tick(repo, NowUnixMs(), [this](const std::string& l) { Log(l); }) > 0)
        SignalWebhooks();
      storage::Job job;
      bool claimed = false;
      if (StorageStatus s = repo.ClaimNextJob(NowUnixMs(), &job, &claimed); !s.ok()) {
        Log("level=error worker=" + std::to_string(index) + " claim: " + s.message);
        claimed = false;
      }
      if (claimed) {
        RunJob(repo, job, index);
        continue;  // look for the next job at once
      }
      if (!Wait(job_cv, job_signals, options.poll_interval)) break;
    }
  }

  void RunJob(storage::Repository& repo, const storage::Job& job, int index) {
    const auto t0 = std::chrono::steady_clock::now();
    std::string failure;
    Id estimate_id = 0;
    Id member_id = 0;
    if (job.attempts > options.max_job_attempts) {
      failure = "the identification was interrupted " + std::to_string(job.attempts - 1) +
                " times (the service stopped while it ran); not retried";
    } else {
      try {
        failure = Identify(repo, job, &estimate_id, &member_id);
      } catch (const std::exception& e) {
        failure = std::string("internal error: ") + e.what();
      }
    }
    const double seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
    if (metrics) metrics->RecordIdentify(seconds, failure.empty());
    if (!failure.empty()) {
      if (StorageStatus s = repo.FailJob(job.id, failure, NowUnixMs()); !s.ok()) {
        Log("level=error job=" + std::to_string(job.id) + " cannot record the failure: " + s.message);
      }
      Log("level=info worker=" + std::to_string(index) + " job=" + std::to_string(job.id) +
          " state=failed seconds=" + std::to_string(seconds) + " reason=\"" + failure + "\"");
      return;
    }
    Log("level=info worker=" + std::to_string(index) + " job=" + std::to_string(job.id) +
        " state=done estimate=" + std::to_string(estimate_id) + " seconds=" + std::to_string(seconds));
    CheckDrift(repo, job.organisation_id, member_id, estimate_id);
  }

  // Returns "" on success, else the failure reason kept with the job.
  std::string Identify(storage::Repository& repo, const storage::Job& job, Id* estimate_id, Id* member_id) {
    storage::Record stored;
    if (StorageStatus s = repo.GetRecord(job.organisation_id, job.record_id, &stored); !s.ok()) {
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
      return "member " + std::to_string(stored.member_id) + ": " + s.message;
    }
    model::Member member;
    if (Status s = ParseMember(version.description_json, &member, MemberReadOptions{.require_id = true});
        !s.ok()) {
      return "member " + std::to_string(stored.member_id) + " version " + std::to_string(version.version) +
             ": " + s.message;
    }
    const estimation::Record record = ToEstimationRecord(stored);
    estimation::IdentifyRecordOptions io;
    double written = 0;
    io.progress = [&](double share) {
      if (share < 1.0 && share - written >= kProgressStep) {
        written = share;
        repo.SetJobProgress(job.id, share);  // best effort: progress is advisory
      }
    };
    estimation::Estimate estimate;
    if (Status s = estimation::IdentifyRecord(member, record, io, &estimate); !s.ok()) return s.message;
    storage::NewEstimate ne;
    ne.record_id = stored.id;
    ne.axial_force_n = estimate.axial_force_n.value;
    ne.force_std_n = estimate.axial_force_n.std;
    ne.force_ci95_low_n = std::min(estimate.axial_force_n.ci95_low, ne.axial_force_n);
    ne.force_ci95_high_n = std::max(estimate.axial_force_n.ci95_high, ne.axial_force_n);
    ne.bending_stiffness_nm2 = estimate.bending_stiffness_nm2.value;
    if (!estimate.bending_stiffness_nm2.fixed)
      ne.bending_stiffness_std_nm2 = estimate.bending_stiffness_nm2.std;
    ne.result_json = EstimateToJson(estimate).dump();
    if (StorageStatus s = repo.CompleteJobWithEstimate(job.id, ne, NowUnixMs(), estimate_id); !s.ok()) {
      return "storing the estimate: " + s.message;
    }
    return "";
  }

  // ---- drift

  void CatchUpDriftChecks(storage::Repository& repo) {
    std::vector<storage::Estimate> pending;
    if (StorageStatus s = repo.PendingDriftChecks(kDriftBatch, &pending); !s.ok()) {
      Log("level=error pending drift checks: " + s.message);
      return;
    }
    for (const auto& e : pending) {
      if (Stopping()) return;
      CheckDrift(repo, e.organisation_id, e.member_id, e.id);
    }
  }

  // Runs the drift rules over the member's estimates and raises the alerts
  // that fire at `estimate_id` (each at most once: RaiseAlertOnce), then
  // marks the estimate checked. A failure leaves it unchecked, to be
  // retried by the next pass.
  void CheckDrift(storage::Repository& repo, Id organisation_id, Id member_id, Id estimate_id) {
    const std::string where =
        "drift member=" + std::to_string(member_id) + " estimate=" + std::to_string(estimate_id);
    storage::Member stored;
    StorageStatus ms = repo.GetMember(organisation_id, member_id, &stored);
    if (ms.not_found()) {  // deleted member: nothing to watch any more
      repo.MarkDriftChecked(organisation_id, estimate_id, NowUnixMs());
      return;
    }
    if (!ms.ok()) return Log("level=error " + where + ": " + ms.message);
    model::Member member;
    if (Status s = ParseMember(stored.description_json, &member, MemberReadOptions{.require_id = true});
        !s.ok()) {
      return Log("level=error " + where + ": " + s.message);
    }
    storage::Estimate current;
    if (StorageStatus s = repo.GetEstimate(organisation_id, estimate_id, &current); !s.ok()) {
      return Log("level=error " + where + ": " + s.message);
    }
    std::string settings_text;
    const StorageStatus ss = repo.GetDriftSettings(organisation_id, member_id, &settings_text);
    if (!ss.ok() && !ss.not_found()) return Log("level=error " + where + ": " + ss.message);
    // The nominal EI of the ei-loss rule in the plane this estimate was fitted in.
    const json result = StoredJson(current.result_json);
    const model::Direction plane = result.is_object() && result.value("plane", "vertical") == "lateral"
                                       ? model::Direction::kLateral
                                       : model::Direction::kVertical;
    estimation::DriftSettings settings;
    if (Status p = EffectiveDriftSettings(member, ss.ok() ? &settings_text : nullptr, plane, &settings);
        !p.ok()) {
      Log("level=error " + where + " stored settings ignored: " + p.message);
      EffectiveDriftSettings(member, nullptr, plane, &settings);
    }
    if (StorageStatus s = ApplyLogbookBaseline(repo, organisation_id, member_id, &settings); !s.ok()) {
      return Log("level=error " + where + ": " + s.message);
    }
    std::vector<storage::Estimate> history;
    if (StorageStatus s =
            repo.ForceHistory(organisation_id, member_id, std::numeric_limits<std::int64_t>::min(),
                              std::numeric_limits<std::int64_t>::max(), &history);
        !s.ok()) {
      return Log("level=error " + where + ": " + s.message);
    }
    const std::vector<estimation::DriftPoint> series = DriftSeries(history);
    std::optional<std::size_t> index;
    for (std::size_t i = 0; i < history.size(); ++i) {
      if (history[i].id == estimate_id) index = i;
    }
    estimation::DriftReport report;
    if (Status s = estimation::DetectDrift(series, settings, &report); !s.ok()) {
      return Log("level=error " + where + ": " + s.message);
    }
    // A rule whose alert is still open or acknowledged for this member does
    // not raise another: one alert per condition until someone resolves it
    // (its evidence names the estimate where the condition started).
    std::vector<storage::Alert> alerts;
    if (StorageStatus s = repo.ListAlerts(organisation_id, {member_id, std::nullopt}, &alerts); !s.ok()) {
      return Log("level=error " + where + ": " + s.message);
    }
    bool raised = false;
    for (const auto& alert : report.alerts) {
      if (!index || alert.index != *index) continue;
      const bool standing = std::any_of(alerts.begin(), alerts.end(), [&](const storage::Alert& a) {
        return a.state != storage::AlertState::kResolved && a.rule == alert.rule &&
               a.estimate_id != estimate_id;
      });
      if (standing) continue;
      const bool ei_rule = alert.rule.rfind("ei", 0) == 0;
      storage::NewAlert na;
      na.member_id = member_id;
      na.estimate_id = estimate_id;
      na.rule = alert.rule;
      na.message = alert.caution.message;
      na.evidence = EvidenceJson(alert, report, ei_rule ? "bending_stiffness_nm2" : "axial_force_n").dump();
      Id alert_id = 0;
      bool created = false;
      if (StorageStatus s = repo.RaiseAlertOnce(organisation_id, na, NowUnixMs(), &alert_id, &created);
          !s.ok()) {
        return Log("level=error " + where + " rule=" + alert.rule + ": " + s.message);
      }
      if (created) {
        raised = true;
        Log("level=warn alert=" + std::to_string(alert_id) + " member=" + std::to_string(member_id) +
            " rule=" + alert.rule + " message=\"" + alert.caution.message + "\"");
      }
    }
    if (StorageStatus s = repo.MarkDriftChecked(organisation_id, estimate_id, NowUnixMs()); !s.ok()) {
      Log("level=error " + where + ": " + s.message);
    }
    if (raised) SignalWebhooks();
  }

  // ---- webhooks

  void WebhookLoop() {
    storage::Database db;
    if (StorageStatus s = db.Open(options.db_path); !s.ok()) {
      return Log("level=error webhooks database: " + s.message);
    }
    storage::Repository repo(db);
    while (!Stopping()) {
      std::vector<storage::Repository::DueDelivery> due;
      if (StorageStatus s = repo.DueDeliveries(NowUnixMs(), kDeliveryBatch, &due); !s.ok()) {
        Log("level=error webhooks: " + s.message);
        due.clear();
      }
      for (const auto& d : due) {
        if (Stopping()) return;
        Deliver(repo, d);
      }
      if (!due.empty()) continue;
      if (!Wait(webhook_cv, webhook_signals, options.poll_interval)) break;
    }
  }

  // One POST of the alert to the subscription's URL, logged as an attempt.
  void Deliver(storage::Repository& repo, const storage::Repository::DueDelivery& d) {
    storage::DeliveryAttempt attempt;
    attempt.subscription_id = d.subscription_id;
    attempt.alert_id = d.alert_id;
    attempt.attempt = d.attempt;
    attempt.attempted_at_unix_ms = NowUnixMs();
    storage::Alert alert;
    if (StorageStatus s = repo.GetAlert(d.organisation_id, d.alert_id, &alert); !s.ok()) {
      return Log("level=error webhook alert=" + std::to_string(d.alert_id) + ": " + s.message);
    }
    const std::string body = AlertToJson(alert).dump();
    // "scheme://host[:port]" and the path (CreateWebhook checked the scheme).
    const auto host_start = d.url.find("://");
    const auto path_start =
        host_start == std::string::npos ? std::string::npos : d.url.find('/', host_start + 3);
    const std::string origin = d.url.substr(0, path_start);
    const std::string path = path_start == std::string::npos ? "/" : d.url.substr(path_start);
    httplib::Client client(origin);
    const auto timeout_s = std::chrono::duration_cast<std::chrono::seconds>(options.webhook_timeout).count();
    client.set_connection_timeout(std::max<long>(1, timeout_s), 0);
    client.set_read_timeout(std::max<long>(1, timeout_s), 0);
    httplib::Headers headers = {{"X-Taut-Signature", "sha256=" + HmacSha256Hex(d.secret, body)},
                                {"X-Taut-Delivery-Attempt", std::to_string(d.attempt)}};
    if (!client.is_valid()) {
      attempt.error = "invalid webhook URL " + d.url;
    } else if (auto res = client.Post(path, headers, body, "application/json")) {
      attempt.http_status = res->status;
      attempt.succeeded = res->status >= 200 && res->status < 300;
      if (!attempt.succeeded) attempt.error = "HTTP " + std::to_string(res->status);
    } else {
      attempt.error = httplib::to_string(res.error());
    }
    if (!attempt.succeeded && d.attempt < options.webhook_max_attempts) {
      // Exponential back-off: first_backoff * 2^(attempt - 1).
      const auto backoff = options.webhook_first_backoff.count() * (std::int64_t{1} << (d.attempt - 1));
      attempt.next_attempt_at_unix_ms = NowUnixMs() + backoff;
    }
    if (metrics) metrics->RecordWebhookAttempt(attempt.succeeded);
    Id id = 0;
    if (StorageStatus s = repo.RecordDelivery(d.organisation_id, attempt, &id); !s.ok()) {
      Log("level=error webhook delivery log: " + s.message);
    }
    Log(std::string("level=") + (attempt.succeeded ? "info" : "warn") +
        " webhook=" + std::to_string(d.subscription_id) + " alert=" + std::to_string(d.alert_id) +
        " attempt=" + std::to_string(d.attempt) + " succeeded=" + (attempt.succeeded ? "1" : "0") +
        (attempt.error.empty() ? "" : " error=\"" + attempt.error + "\""));
  }
};

WorkerPool::WorkerPool(WorkerOptions options, Metrics* metrics)
    : impl_(std::make_unique<Impl>(std::move(options), metrics)) {}

WorkerPool::~WorkerPool() { Stop(); }

Status WorkerPool::Start() {
  Impl& s = *impl_;
  if (s.options.workers < 1) return Status::InvalidArgument("workers must be >= 1");
  if (!s.threads.empty()) return Status::Ok();
  {
    storage::Database db;
    if (StorageStatus st = db.Open(s.options.db_path); !st.ok()) {
      return Status::InvalidArgument(s.options.db_path + ": " + st.message);
    }
    storage::Repository repo(db);
    int requeued = 0;
    if (StorageStatus st = repo.RequeueRunningJobs(&requeued); !st.ok()) {
      return Status::InvalidArgument(s.options.db_path + ": requeueing interrupted jobs: " + st.message);
    }
    if (requeued > 0) s.Log("level=info requeued=" + std::to_string(requeued) + " interrupted jobs");
  }
  {
    std::lock_guard<std::mutex> lock(s.mu);
    s.stopping = false;
  }
  for (int i = 0; i < s.options.workers; ++i) s.threads.emplace_back([&s, i] { s.JobLoop(i); });
  s.threads.emplace_back([&s] { s.WebhookLoop(); });
  return Status::Ok();
}

void WorkerPool::Notify() {
  Impl& s = *impl_;
  {
    std::lock_guard<std::mutex> lock(s.mu);
    ++s.job_signals;
  }
  s.job_cv.notify_one();
}

void WorkerPool::Stop() {
  Impl& s = *impl_;
  {
    std::lock_guard<std::mutex> lock(s.mu);
    s.stopping = true;
  }
  s.job_cv.notify_all();
  s.webhook_cv.notify_all();
  for (auto& t : s.threads) {
    if (t.joinable()) t.join();
  }
  s.threads.clear();
}

}  // namespace taut::server
