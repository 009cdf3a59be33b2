#include "estimation/identify_record.h"

namespace taut::estimation {

Status IdentifyRecord(const model::Member& member, const Record& record, const IdentifyRecordOptions& options,
                      Estimate* estimate) {
  auto progress = [&](double share) {
    if (options.progress) options.progress(share);
  };
  progress(0.0);
  ModalIdentification modes;  // carries the record's quality cautions (modal_id.cpp)
  if (Status s = IdentifyModes(record, options.modal, &modes); !s.ok()) return s;
  // The modal identification is about half of the work of a typical record
  // (bench_identify: IdentifyModes and the fit take similar times).
  progress(0.5);
  if (Status s = IdentifyFromModes(member, modes, options.identify, estimate); !s.ok()) return s;
  progress(1.0);
  return Status::Ok();
}

}  // namespace taut::estimation
