#include "server/record_csv.h"

#include <cstdio>

namespace taut::server {

std::string FormatRecordCsv(const RecordCsvHeader& header, const std::vector<std::string>& channels,
                            double sample_rate_hz, std::int64_t rows,
                            const std::function<double(std::int64_t, std::size_t)>& value) {
  std::string out;
  out.reserve(static_cast<std::size_t>(rows) * (channels.size() + 1) * 14 + 256);
  char buf[48];
  if (!header.recorded_at.empty()) out += "# recorded_at=" + header.recorded_at + "\n";
  if (header.temperature_c) {
    std::snprintf(buf, sizeof buf, "%.6g", *header.temperature_c);
    out += std::string("# temperature_c=") + buf + "\n";
  }
  out += "# units=" + header.units + "\n# excitation=" + header.excitation + "\ntime_s";
  for (const auto& ch : channels) out += "," + ch;
  out += "\n";
  for (std::int64_t i = 0; i < rows; ++i) {
    std::snprintf(buf, sizeof buf, "%.9g", static_cast<double>(i) / sample_rate_hz);
    out += buf;
    for (std::size_t c = 0; c < channels.size(); ++c) {
      std::snprintf(buf, sizeof buf, ",%.9g", value(i, c));
      out += buf;
    }
    out += "\n";
  }
  return out;
}

}  // namespace taut::server
