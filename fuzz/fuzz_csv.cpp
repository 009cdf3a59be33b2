// libFuzzer: the CSV record reader (estimation/record.h) on any bytes, with
// and without a member to check channels against.
#include <cstddef>
#include <cstdint>
#include <sstream>
#include <string>

#include "estimation/record.h"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string text(reinterpret_cast<const char*>(data), size);
  std::istringstream in(text);
  taut::estimation::RecordReadOptions o;
  o.max_cells = 200000;  // keeps each run fast; the limit itself is checked by the reader's tests
  taut::estimation::Record record;
  (void)taut::estimation::ParseRecordCsv(in, o, &record);
  return 0;
}
