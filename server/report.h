// The inspection report of a structure (docs/API.md "Inspection report",
// `taut report`): one self-contained, print-ready HTML document (inline CSS
// and SVG, no script, no external file) and its PDF printed by headless
// Chromium.
//
// Content: a cover (structure, period, author, generation time, standing
// notice); the portfolio table (server/triage.h rows); one sheet per member
// (force history chart with its 95 % band and logbook marks, bending
// stiffness and end fixity with intervals, the latest estimate's evidence:
// spectrum with identified peaks, measured vs model frequencies; cautions
// with severities and the verdict; alerts and their handling; logbook
// entries); the method in plain words with its published references; a
// signature block. Units as the API: kN for force in the text, N in data.
#pragma once

#include <cstdint>
#include <string>

#include "model/status.h"
#include "storage/repository.h"

namespace taut::server {

struct ReportOptions {
  storage::Id structure_id = 0;
  std::int64_t from_unix_ms = 0, to_unix_ms = 0;  // [from, to): the period
  std::string author;                             // may be empty: a line to sign
  std::int64_t now_unix_ms = 0;                   // generation time
};

// Reads through the organisation-scoped repository (another organisation's
// structure is not_found: kInvalidArgument with "not found" in the
// message). Fails on storage errors.
Status BuildInspectionReport(storage::Repository& repo, storage::Id organisation_id, const ReportOptions& o,
                             std::string* html);

// Headless Chromium (the executable in $TAUT_CHROMIUM, else
// /usr/bin/chromium) prints `html` to `pdf_path` (A4, the document's own
// margins). A fresh empty profile directory is used and removed; after
// kPdfTimeout_s the Chromium process group is killed. kInvalidArgument
// with Chromium's output when it fails or is missing.
inline constexpr int kPdfTimeout_s = 120;
Status PrintHtmlToPdf(const std::string& html, const std::string& pdf_path);

}  // namespace taut::server
