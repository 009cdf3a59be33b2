// The import profile (docs/FORMATS.md section 2.3) as JSON: a declarative
// description of a logger's CSV that the record reader's detection cannot
// read on its own. Used by `--profile FILE` on the CLI and `?profile=` on the
// record upload route.
//
//   {"delimiter": ";", "decimal_mark": ",", "skip_lines": 2,
//    "time": {"column": "Zeit", "kind": "iso8601", "time_zone": "+01:00"},
//    "units": "m/s2",
//    "channels": [{"column": "K1", "channel": "v1", "scale": 0.001, "offset": 0}]}
//
// Every key is optional; unknown keys are errors naming the JSON path.
#pragma once

#include <nlohmann/json.hpp>
#include <string>

#include "estimation/record.h"
#include "model/status.h"

namespace taut::server {

// Parses the JSON text into `profile`; kInvalidArgument naming the JSON
// path and the rule on error (`profile` then unspecified).
Status ParseImportProfile(const std::string& text, estimation::ImportProfile* profile);

// Reads the file at `path`; errors are prefixed with the path.
Status LoadImportProfileFile(const std::string& path, estimation::ImportProfile* profile);

}  // namespace taut::server
