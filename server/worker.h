// The job worker pool and the alert dispatch of `taut serve`.
//
// Workers take queued jobs from the database (storage::Repository::
// ClaimNextJob), load the record and the member version it was uploaded
// against, run the identification (record -> modes -> model updating),
// store the docs/FORMATS.md section 3 result with the job (CompleteJobWithEstimate),
// run drift detection (estimation/drift.h) over the member's estimates and
// raise the alerts that fire at the new estimate. A job whose inputs cannot
// be identified fails with the reason (the estimation's message); a job is
// never lost: jobs left running by a stopped process are requeued at Start
// (SQLite), and every running job is leased (storage JobLease): a heartbeat
// thread renews the leases of the jobs this process runs, and a job whose
// lease expired, because its process died, is claimed again by any worker
// of any replica. So several `taut serve` processes may share one database
// (PostgreSQL; docs/OPERATIONS.md): a job is run by one worker at a time,
// stored once (the estimate is stored only under the lease), drift alerts
// are decided under a per-member lock, and each webhook delivery attempt
// is claimed by one replica (Repository::ClaimDelivery). A job whose
// database became unreachable mid-run is not failed: it runs again once
// its lease expires.
//
// Webhooks: every new alert is POSTed to each active subscription of its
// organisation (docs/API.md "Alerts and webhooks"); failed deliveries are
// retried with exponential back-off, every attempt is logged.
//
// Threads: `workers` job threads plus one webhook thread, each with its own
// database connection (storage/database.h: one connection per thread).
#pragma once

#include <atomic>
#include <chrono>
#include <condition_variable>
#include <memory>
#include <mutex>
#include <ostream>
#include <string>
#include <thread>
#include <vector>

#include "model/status.h"
#include "server/metrics.h"
#include "server/service_limits.h"
#include "server/webhook_policy.h"

namespace taut::server {

struct WorkerOptions {
  std::string db_path;  // SQLite file or postgresql:// URI (migrated by the caller)
  int workers = 2;      // job threads, >= 1
  // Workers sleep at most this long between queue polls when nobody calls
  // Notify() (a job queued by another process is still picked up).
  std::chrono::milliseconds poll_interval{500};
  // Webhook delivery: attempts per (subscription, alert), first back-off
  // (doubled each attempt) and the HTTP timeout of one attempt.
  int webhook_max_attempts = 5;
  std::chrono::milliseconds webhook_first_backoff{500};
  std::chrono::milliseconds webhook_timeout{5000};
  // A job claimed this many times without finishing (the process stopped
  // during it each time) fails instead of running again.
  int max_job_attempts = 3;
  // Wall-time limit of one identification: past it the job fails with that
  // reason (checked at the identification's progress points and at its end).
  std::chrono::seconds job_time_limit{kDefaultJobTimeLimit_s};
  // Where webhooks may point (webhook_policy.h); checked before each delivery.
  WebhookPolicy webhook_policy;
  // One key=value line per job, alert and delivery. Not owned; may be null.
  std::ostream* log = nullptr;
  // The lease of a running job: renewed every job_lease / 3 while the job
  // runs; another replica may claim the job once it expired. Longer than
  // any pause of a live process (a lost lease costs a repeated
  // identification, never a second estimate).
  std::chrono::milliseconds job_lease{30000};
  // This process's name in leases and delivery claims ("" = host:pid:random).
  std::string replica_id;
};

class WorkerPool {
 public:
  // metrics: not owned, may be null; must outlive the pool.
  WorkerPool(WorkerOptions options, Metrics* metrics);
  ~WorkerPool();  // Stop()
  WorkerPool(const WorkerPool&) = delete;
  WorkerPool& operator=(const WorkerPool&) = delete;

  // Requeues jobs left running by a stopped process, then starts the
  // threads. Fails when the database cannot be opened.
  Status Start();
  // Wakes an idle worker: a job has been queued.
  void Notify();
  // Graceful stop: no new job is claimed, running jobs finish (an
  // identification takes well under a second), threads are joined. Pending
  // webhook retries stay in the log and are resumed by the next Start.
  void Stop();

 private:
  struct Impl;
  std::unique_ptr<Impl> impl_;
};

}  // namespace taut::server
