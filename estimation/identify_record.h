// The whole identification of one record: record -> modes (modal_id.h) ->
// model updating (identify.h). The one entry point that `taut identify` and
// the service's workers share, so both give the same estimate for the same
// inputs.
#pragma once

#include <functional>

#include "estimation/identify.h"
#include "estimation/modal_id.h"
#include "estimation/record.h"
#include "model/member.h"
#include "model/status.h"

namespace taut::estimation {

struct IdentifyRecordOptions {
  ModalIdOptions modal;
  IdentifyOptions identify;
  // Called with the share of the work done, 0..1, non-decreasing, from the
  // calling thread; may be empty.
  std::function<void(double)> progress;
};

// Preconditions as ReadRecordCsv (record read against `member`) and
// IdentifyFromModes. The estimate carries the record's quality cautions
// ahead of its own. kInvalidArgument when no mode can be identified or
// paired (message for the engineer, no path prefix).
Status IdentifyRecord(const model::Member& member, const Record& record, const IdentifyRecordOptions& options,
                      Estimate* estimate);

}  // namespace taut::estimation
