#include "server/csv_export.h"

#include <cmath>
#include <nlohmann/json.hpp>
#include <stdexcept>

namespace taut::server {

CsvTable::CsvTable(std::vector<std::string> header) : columns_(header.size()) { Line(header); }

void CsvTable::Row(const std::vector<std::string>& fields) {
  if (fields.size() != columns_) {
    throw std::logic_error("CSV row of " + std::to_string(fields.size()) + " fields under a header of " +
                           std::to_string(columns_));
  }
  Line(fields);
}

void CsvTable::Line(const std::vector<std::string>& fields) {
  for (std::size_t i = 0; i < fields.size(); ++i) {
    if (i > 0) text_ += ',';
    text_ += CsvQuote(fields[i]);
  }
  text_ += "\r\n";
}

std::string CsvQuote(const std::string& field) {
  if (field.find_first_of(",\"\r\n") == std::string::npos) return field;
  std::string out = "\"";
  for (char c : field) {
    if (c == '"') out += '"';
    out += c;
  }
  return out + "\"";
}

std::string CsvNum(double v) { return std::isfinite(v) ? nlohmann::json(v).dump() : ""; }
std::string CsvNum(const std::optional<double>& v) { return v ? CsvNum(*v) : ""; }
std::string CsvInt(std::int64_t v) { return std::to_string(v); }

}  // namespace taut::server
