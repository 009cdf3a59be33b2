// CSV exports of the API (`?format=csv`, docs/API.md "CSV exports").
//
// RFC 4180 (Shafranovich, Common Format and MIME Type for CSV Files, 2005):
// comma-separated, CRLF line ends, a header row; a field holding a comma,
// a double quote, CR or LF is enclosed in double quotes with its quotes
// doubled. Numbers are written in the shortest form that reads back to the
// same double (nlohmann::json's number output); an absent value is an
// empty field. Column names carry their unit (force_n, ei_nm2, ..._utc).
#pragma once

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

namespace taut::server {

class CsvTable {
 public:
  explicit CsvTable(std::vector<std::string> header);
  void Row(const std::vector<std::string>& fields);  // same count as the header
  const std::string& Text() const { return text_; }

 private:
  void Line(const std::vector<std::string>& fields);
  std::size_t columns_;
  std::string text_;
};

std::string CsvQuote(const std::string& field);  // RFC 4180 section 2 items 5-7
std::string CsvNum(double v);                    // "" when not finite
std::string CsvNum(const std::optional<double>& v);
std::string CsvInt(std::int64_t v);

}  // namespace taut::server
