// One identification job of the worker pool (worker.h): load the record and
// the member version it was uploaded against, run the identification
// (estimation/identify_record.h) and store the docs/FORMATS.md section 3 result
// with the job (CompleteJobWithEstimate).
#pragma once

#include <string>

#include "storage/repository.h"

namespace taut::server {

// Returns "" on success (*estimate_id, *member_id set), else the failure
// reason to keep with the job. The job's progress is written as it runs
// (best effort). Does not fail the job itself.
std::string RunIdentification(storage::Repository& repo, const storage::Job& job, storage::Id* estimate_id,
                              storage::Id* member_id);

}  // namespace taut::server
