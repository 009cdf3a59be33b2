// One identification job of the worker pool (worker.h): load the record and
// the member version it was uploaded against, run the identification
// (estimation/identify_record.h) and store the docs/FORMATS.md section 3 result
// with the job (CompleteJobWithEstimate).
#pragma once

#include <chrono>
#include <string>

#include "storage/repository.h"

namespace taut::server {

// Returns "" on success (*estimate_id, *member_id set), else the failure
// reason to keep with the job. The job's progress is written as it runs
// (best effort). An identification still running after `time_limit` is
// abandoned at its next progress point and fails with that reason. Does not
// fail the job itself. *retry (may be null) is set when the failure is the
// database's (unavailable or busy), not the job's: the job should then run
// again rather than fail. A leased job (job.lease_owner) is stored only
// while this worker still holds the lease.
std::string RunIdentification(storage::Repository& repo, const storage::Job& job, storage::Id* estimate_id,
                              storage::Id* member_id, std::chrono::seconds time_limit, bool* retry = nullptr);

}  // namespace taut::server
