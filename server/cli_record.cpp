// Reading a record for a CLI command: the import profile (--profile), the
// reader, and the reader's notes (dialect detected, logger lines skipped,
// calibration applied) as "note:" lines on stderr, so that --json output
// on stdout stays one document.
#include <ostream>

#include "server/cli.h"
#include "server/import_profile_json.h"

namespace taut::server {

Status ReadRecordForCli(const std::string& record_path, const std::string& profile_path,
                        estimation::RecordReadOptions options, estimation::Record* record, std::ostream& err,
                        const std::string& command) {
  estimation::ImportProfile profile;
  if (!profile_path.empty()) {
    if (Status s = LoadImportProfileFile(profile_path, &profile); !s.ok()) return s;
    options.profile = &profile;
  }
  if (Status s = estimation::ReadRecordCsv(record_path, options, record); !s.ok()) return s;
  for (const auto& note : record->notes) err << command << ": note: " << record_path << ": " << note << "\n";
  return Status::Ok();
}

}  // namespace taut::server
