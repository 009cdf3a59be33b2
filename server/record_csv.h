// Writing a record as the docs/FORMATS.md section 2 CSV: the download of a
// stored record (GET /v1/records/{id}/csv) and the uploads of `taut demo`.
#pragma once

#include <cstdint>
#include <functional>
#include <optional>
#include <string>
#include <vector>

namespace taut::server {

struct RecordCsvHeader {
  std::string recorded_at;  // ISO 8601 UTC; "" = no line
  std::optional<double> temperature_c;
  std::string units = "m/s2";          // "m/s2" or "g"
  std::string excitation = "ambient";  // "ambient" or "impact"
};

// `rows` samples of `channels.size()` channels at `sample_rate_hz` (> 0);
// value(i, c) is sample i of channel c. Values are written with 9
// significant digits, which round-trips binary32 (IEEE 754-2008, 5.12.2)
// and is far below any accelerometer's resolution for binary64.
std::string FormatRecordCsv(const RecordCsvHeader& header, const std::vector<std::string>& channels,
                            double sample_rate_hz, std::int64_t rows,
                            const std::function<double(std::int64_t, std::size_t)>& value);

}  // namespace taut::server
