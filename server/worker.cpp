#include "server/worker.h"

#include <unistd.h>

#include <atomic>
#include <iostream>
#include <map>
#include <memory>
#include <random>

#include "server/alert_rules.h"
#include "server/drift_alerts.h"
#include "server/iso_time.h"
#include "server/job_run.h"
#include "server/webhook_delivery.h"
#include "storage/repository.h"

namespace taut::server {

namespace {

using storage::Id;
using storage::StorageStatus;

// Pending drift checks taken per pass (a backlog is worked off in passes).
constexpr std::size_t kDriftBatch = 64;
// Deliveries read per pass of the webhook thread (deliveries of
// organisations still busy are skipped, so the batch is generous).
constexpr std::size_t kDeliveryBatch = 256;

// host:pid:random, unique among live processes (the random part tells a
// restarted process from its predecessor with a reused pid).
std::string DefaultReplicaId() {
  char host[256] = {};
  if (gethostname(host, sizeof host - 1) != 0) host[0] = '\0';
  std::random_device rd;
  char suffix[9];
  std::snprintf(suffix, sizeof suffix, "%08x", static_cast<unsigned>(rd()));
  return std::string(host) + ":" + std::to_string(getpid()) + ":" + suffix;
}

}  // namespace

struct WorkerPool::Impl {
  Impl(WorkerOptions o, Metrics* m) : options(std::move(o)), metrics(m) {
    if (options.replica_id.empty()) options.replica_id = DefaultReplicaId();
  }

  WorkerOptions options;
  Metrics* metrics;  // not owned; may be null
  std::mutex mu;
  std::condition_variable job_cv, webhook_cv, heartbeat_cv;
  bool stopping = false;
  int job_signals = 0, webhook_signals = 0;
  std::vector<std::thread> threads;
  std::mutex log_mu;
  std::mutex held_mu;
  std::map<Id, std::string> held;  // job id -> lease owner, for the heartbeat

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
      const storage::JobLease lease{options.replica_id + "/w" + std::to_string(index),
                                    options.job_lease.count()};
      if (StorageStatus s = repo.ClaimNextJob(NowUnixMs(), lease, &job, &claimed); !s.ok()) {
        Log("level=error worker=" + std::to_string(index) + " claim: " + s.message);
        claimed = false;
      }
      if (claimed) {
        {
          std::lock_guard<std::mutex> lock(held_mu);
          held[job.id] = job.lease_owner;
        }
        RunJob(repo, job, index);
        {
          std::lock_guard<std::mutex> lock(held_mu);
          held.erase(job.id);
        }
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
    bool retry = false;
    if (job.attempts > options.max_job_attempts) {
      failure = "the identification was interrupted " + std::to_string(job.attempts - 1) +
                " times (the service stopped while it ran); not retried";
    } else {
      try {
        failure = RunIdentification(repo, job, &estimate_id, &member_id, options.job_time_limit, &retry);
      } catch (const std::exception& e) {
        failure = std::string("internal error: ") + e.what();
      }
    }
    const double seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
    if (metrics) metrics->RecordIdentify(seconds, failure.empty());
    if (retry) {
      // The database failed, not the job: it stays running under its lease,
      // which expires, and then any worker runs it again.
      Log("level=warn worker=" + std::to_string(index) + " job=" + std::to_string(job.id) +
          " state=retry-later reason=\"" + failure + "\"");
      return;
    }
    if (!failure.empty()) {
      if (StorageStatus s = repo.FailJob(job.id, failure, NowUnixMs(), job.lease_owner); !s.ok()) {
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

  void CheckDrift(storage::Repository& repo, Id organisation_id, Id member_id, Id estimate_id) {
    if (CheckDriftAndRaiseAlerts(repo, organisation_id, member_id, estimate_id,
                                 [this](const std::string& line) { Log(line); })) {
      SignalWebhooks();
    }
  }

  // ---- leases

  // Renews the lease of every job this process runs, every job_lease / 3.
  void HeartbeatLoop() {
    storage::Database db;
    if (StorageStatus s = db.Open(options.db_path); !s.ok()) {
      return Log("level=error heartbeat database: " + s.message);
    }
    storage::Repository repo(db);
    const auto period = std::max(options.job_lease / 3, std::chrono::milliseconds(50));
    int no_signals = 0;  // woken only by Stop()
    while (Wait(heartbeat_cv, no_signals, period)) {
      std::map<Id, std::string> jobs;
      {
        std::lock_guard<std::mutex> lock(held_mu);
        jobs = held;
      }
      for (const auto& [id, owner] : jobs) {
        const StorageStatus s = repo.RenewJobLease(id, owner, NowUnixMs(), options.job_lease.count());
        if (s.not_found()) {
          Log("level=warn job=" + std::to_string(id) +
              " lease lost (another worker took the job over); its result will not be stored");
        } else if (!s.ok()) {
          Log("level=error job=" + std::to_string(id) + " lease renewal: " + s.message);
        }
      }
    }
  }

  // ---- webhooks

  // Deliveries run per organisation, each organisation's on its own thread
  // (at most kMaxParallelWebhookOrganisations at once): a dead receiver of
  // one organisation (each attempt waits up to webhook_timeout) delays no
  // other. An organisation with deliveries in flight is skipped until they
  // finish, so no delivery is attempted twice at once.
  void WebhookLoop() {
    storage::Database db;
    if (StorageStatus s = db.Open(options.db_path); !s.ok()) {
      return Log("level=error webhooks database: " + s.message);
    }
    storage::Repository repo(db);
    std::vector<std::pair<std::thread, std::shared_ptr<std::atomic<bool>>>> running;
    std::map<Id, std::shared_ptr<std::atomic<bool>>> busy;  // organisation -> its thread's done flag
    auto reap = [&](bool all) {
      for (auto it = running.begin(); it != running.end();) {
        if (all || it->second->load()) {
          it->first.join();
          it = running.erase(it);
        } else {
          ++it;
        }
      }
      for (auto it = busy.begin(); it != busy.end();)
        it = it->second->load() ? busy.erase(it) : std::next(it);
    };
    while (!Stopping()) {
      reap(false);
      std::vector<storage::Repository::DueDelivery> due;
      if (StorageStatus s = repo.DueDeliveries(NowUnixMs(), kDeliveryBatch, &due); !s.ok()) {
        Log("level=error webhooks: " + s.message);
        due.clear();
      }
      std::map<Id, std::vector<storage::Repository::DueDelivery>> by_org;
      for (auto& d : due) {
        if (!busy.count(d.organisation_id)) by_org[d.organisation_id].push_back(std::move(d));
      }
      for (auto& [org, list] : by_org) {
        if (static_cast<int>(busy.size()) >= kMaxParallelWebhookOrganisations) break;
        auto done = std::make_shared<std::atomic<bool>>(false);
        busy[org] = done;
        running.emplace_back(std::thread([this, list = std::move(list), done] {
                               DeliverAll(list);
                               done->store(true);
                               SignalWebhooks();
                             }),
                             done);
      }
      if (!Wait(webhook_cv, webhook_signals,
                by_org.empty() ? options.poll_interval : std::chrono::milliseconds(0)))
        break;
    }
    reap(true);
  }

  // One organisation's due deliveries, in order, on a connection of its own.
  void DeliverAll(const std::vector<storage::Repository::DueDelivery>& list) {
    storage::Database db;
    if (StorageStatus s = db.Open(options.db_path); !s.ok()) {
      return Log("level=error webhooks database: " + s.message);
    }
    storage::Repository repo(db);
    // A claim outlives the attempt (its HTTP timeout) with a margin; after
    // it expired another replica may make the attempt again.
    const std::int64_t claim_ms = 2 * options.webhook_timeout.count() + 10000;
    for (const auto& d : list) {
      if (Stopping()) return;
      bool claimed = false;
      if (StorageStatus s = repo.ClaimDelivery(d, options.replica_id, NowUnixMs(), claim_ms, &claimed);
          !s.ok()) {
        Log("level=error webhooks claim alert=" + std::to_string(d.alert_id) + ": " + s.message);
        continue;
      }
      if (!claimed) continue;  // another replica makes this attempt
      DeliverWebhook(repo, d, options, metrics, [this](const std::string& line) { Log(line); });
    }
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
    // One process per SQLite file is the rule (docs/OPERATIONS.md): what is
    // running was left by its predecessor and goes back to the queue now.
    // On PostgreSQL other replicas' jobs are running; a dead replica's come
    // back when their leases expire.
    if (!db.is_postgres()) {
      int requeued = 0;
      if (StorageStatus st = repo.RequeueRunningJobs(&requeued); !st.ok()) {
        return Status::InvalidArgument(s.options.db_path + ": requeueing interrupted jobs: " + st.message);
      }
      if (requeued > 0) s.Log("level=info requeued=" + std::to_string(requeued) + " interrupted jobs");
    }
  }
  {
    std::lock_guard<std::mutex> lock(s.mu);
    s.stopping = false;
  }
  for (int i = 0; i < s.options.workers; ++i) s.threads.emplace_back([&s, i] { s.JobLoop(i); });
  s.threads.emplace_back([&s] { s.WebhookLoop(); });
  s.threads.emplace_back([&s] { s.HeartbeatLoop(); });
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
  s.heartbeat_cv.notify_all();
  for (auto& t : s.threads) {
    if (t.joinable()) t.join();
  }
  s.threads.clear();
}

}  // namespace taut::server
