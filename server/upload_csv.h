// The CSV body of a record upload (POST /v1/members/{id}/records,
// docs/API.md) read with the route's query parameters: the overrides
// recorded_at, temperature_c, units and excitation go to the reader (so
// that they are checked like the file's own metadata), and `profile` is an
// import profile as JSON text (docs/FORMATS.md section 2.3).
#pragma once

#include <optional>
#include <string>
#include <vector>

#include "estimation/record.h"
#include "model/member.h"
#include "model/status.h"

namespace taut::server {

struct UploadCsvParams {
  std::optional<std::string> recorded_at;
  std::optional<std::string> units;
  std::optional<std::string> excitation;
  std::optional<std::string> profile;  // JSON text
  std::optional<double> temperature_c;
};

// kInvalidArgument with the reader's or the profile's message, and in
// *http_status the route's answer: 422 for a query override that breaks a
// rule (recorded_at in the future), 400 for the body or a malformed query.
Status ReadUploadedCsv(const std::string& body, const model::Member& member, const UploadCsvParams& params,
                       estimation::Record* record, int* http_status);

// The reader's notes as stored with the record (storage NewRecord::
// reader_notes: one note per line) and back.
std::string JoinReaderNotes(const std::vector<std::string>& notes);
std::vector<std::string> SplitReaderNotes(const std::string& text);

}  // namespace taut::server
