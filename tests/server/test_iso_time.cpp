// The one ISO 8601 parser (server/iso_time.h) against Python's datetime
// (datetime.fromisoformat, Python 3.11: ISO 8601 dates, times, fractions
// and offsets; /usr/bin/python3 must be present: the test fails without
// it). Random instants from 1900 to 2200 with random offsets, fractions and
// separators; impossible dates come from Python's calendar check.
#include <gtest/gtest.h>

#include <cstdio>
#include <random>
#include <sstream>
#include <string>
#include <vector>

#include "server/iso_time.h"

namespace taut::server {
namespace {

// Runs python3 with `script`, returns its stdout.
std::string Python(const std::string& script) {
  const std::string path = ::testing::TempDir() + "iso_time_ref.py";
  std::FILE* f = std::fopen(path.c_str(), "w");
  EXPECT_NE(f, nullptr);
  if (f == nullptr) return "";
  std::fputs(script.c_str(), f);
  std::fclose(f);
  std::FILE* p = popen(("/usr/bin/python3 " + path).c_str(), "r");
  EXPECT_NE(p, nullptr);
  if (p == nullptr) return "";
  std::string out;
  char buf[4096];
  while (std::fgets(buf, sizeof buf, p) != nullptr) out += buf;
  EXPECT_EQ(pclose(p), 0) << "python3 failed";
  return out;
}

TEST(IsoTimeReference, AgreesWithPythonDatetime) {
  std::mt19937_64 rng(7);
  std::uniform_int_distribution<int> year(1900, 2199), month(1, 12), day(1, 31), hour(0, 23), minute(0, 59),
      offset(-14 * 4, 14 * 4), digits(0, 9), pick(0, 3);
  std::vector<std::string> texts;
  for (int k = 0; k < 400; ++k) {
    char buf[80];
    std::snprintf(buf, sizeof buf, "%04d-%02d-%02d%c%02d:%02d:%02d", year(rng), month(rng), day(rng),
                  pick(rng) == 0 ? ' ' : 'T', hour(rng), minute(rng), minute(rng));
    std::string t = buf;
    const int frac = digits(rng) % 7;  // Python reads up to 6 fraction digits
    if (frac > 0) {
      t += '.';
      for (int i = 0; i < frac; ++i) t += static_cast<char>('0' + digits(rng));
    }
    const int z = pick(rng);
    if (z == 0) {
      t += "+00:00";
    } else if (z >= 1) {
      const int off = offset(rng) * 15;  // quarter hours, as real zones
      std::snprintf(buf, sizeof buf, "%c%02d:%02d", off < 0 ? '-' : '+', std::abs(off) / 60,
                    std::abs(off) % 60);
      t += buf;
    }
    texts.push_back(t);
  }
  std::ostringstream script;
  script << "from datetime import datetime, timezone\n"
            "for t in [";
  for (const auto& t : texts) script << "'" << t << "',";
  script << "]:\n"
            "  try:\n"
            "    d = datetime.fromisoformat(t)\n"
            "    if d.tzinfo is None: d = d.replace(tzinfo=timezone.utc)\n"
            "    e = d - datetime(1970, 1, 1, tzinfo=timezone.utc)\n"
            "    print((e.days * 86400 + e.seconds) * 1000000 + e.microseconds)\n"
            "  except ValueError:\n"
            "    print('invalid')\n";
  std::istringstream ref(Python(script.str()));
  int valid = 0, invalid = 0;
  for (const auto& t : texts) {
    std::string line;
    ASSERT_TRUE(std::getline(ref, line)) << "python3 gave fewer lines";
    IsoTime got;
    const bool ok = ParseIsoTime(t, &got);
    if (line == "invalid") {
      EXPECT_FALSE(ok) << t;  // e.g. 2023-02-30
      ++invalid;
      continue;
    }
    ASSERT_TRUE(ok) << t;
    // Microseconds since the epoch, exact (integer arithmetic both sides).
    EXPECT_EQ(got.unix_ns() / 1000, std::stoll(line)) << t;
    ++valid;
  }
  // day(1..31) makes about 1 in 17 dates impossible: both kinds occur.
  EXPECT_GT(valid, 300);
  EXPECT_GT(invalid, 5);
}

}  // namespace
}  // namespace taut::server
