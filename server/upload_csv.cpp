#include "server/upload_csv.h"

#include <sstream>

#include "server/import_profile_json.h"

namespace taut::server {

Status ReadUploadedCsv(const std::string& body, const model::Member& member, const UploadCsvParams& params,
                       estimation::Record* record, int* http_status) {
  *http_status = 400;
  estimation::RecordReadOptions ro;
  if (params.recorded_at) {
    std::string utc;
    if (Status s = estimation::CheckRecordedAt(*params.recorded_at, "query recorded_at", 0, &utc); !s.ok()) {
      *http_status = 422;
      return s;
    }
  }
  ro.member = &member;
  ro.recorded_at = params.recorded_at;
  ro.temperature_c = params.temperature_c;
  if (params.units) {
    if (!estimation::KnownUnits(*params.units))
      return Status::InvalidArgument("units = \"" + *params.units + "\": must be m/s2, g, mg, V or mV");
    ro.units = params.units;
  }
  if (params.excitation) {
    estimation::Excitation e;
    if (!estimation::ParseExcitation(*params.excitation, &e))
      return Status::InvalidArgument("excitation = \"" + *params.excitation +
                                     "\": must be ambient or impact");
    ro.excitation = e;
  }
  estimation::ImportProfile profile;
  if (params.profile) {
    if (Status s = ParseImportProfile(*params.profile, &profile); !s.ok()) return s;
    ro.profile = &profile;
  }
  std::istringstream in(body);
  Status s = estimation::ParseRecordCsv(in, ro, record);
  // A channel that is not a sensor of the member and a record too short
  // (fewer than kMinSamples rows or kMinRecordDuration_s) are rules a
  // well-formed upload breaks, not malformed files (docs/API.md: 422). The
  // reader reports them as invalid arguments like any other error, so they
  // are told apart by their messages (record.cpp: the header check and
  // step 4). TODO: a rule/format distinction in the reader's Status.
  if (!s.ok()) {
    for (const char* rule : {"is not a sensor of member", "samples after the header", "record lasts "}) {
      if (s.message.find(rule) != std::string::npos) *http_status = 422;
    }
  }
  return s;
}

std::string JoinReaderNotes(const std::vector<std::string>& notes) {
  std::string text;
  for (const auto& n : notes) {
    if (!text.empty()) text += '\n';
    // A note is one sentence; a line break inside would split it in two.
    for (char c : n) text += c == '\n' || c == '\r' ? ' ' : c;
  }
  return text;
}

std::vector<std::string> SplitReaderNotes(const std::string& text) {
  std::vector<std::string> notes;
  std::istringstream in(text);
  for (std::string line; std::getline(in, line);)
    if (!line.empty()) notes.push_back(line);
  return notes;
}

}  // namespace taut::server
