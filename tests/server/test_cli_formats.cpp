// `taut formats`: the member and record formats printed from docs/FORMATS.md.
// The examples the text shows must be files taut accepts: the member
// document parses with the member reader, and the record example's header
// and metadata lines, completed with rows, read with the record reader.
#include <gtest/gtest.h>

#include <cmath>
#include <sstream>

#include "estimation/record.h"
#include "server/member_json.h"
#include "tests/server/cli_test_support.h"

namespace taut::server {
namespace {

// The first fenced block after `heading` in `text`.
std::string Block(const std::string& text, const std::string& heading) {
  const auto h = text.find(heading);
  if (h == std::string::npos) return "";
  const auto open = text.find("```", h);
  const auto body = text.find('\n', open) + 1;
  const auto close = text.find("```", body);
  return text.substr(body, close - body);
}

TEST(CliFormats, PrintsTheMemberAndRecordFormatsWithUsableExamples) {
  const auto r = testing::Taut({"formats"});
  ASSERT_EQ(r.code, 0) << r.err;
  EXPECT_NE(r.out.find("## 1. Member description (JSON)"), std::string::npos);
  EXPECT_NE(r.out.find("## 2. Acceleration record (CSV)"), std::string::npos);
  EXPECT_EQ(r.out.find("## 3."), std::string::npos);  // the result format is not part of the summary
  // The rectangle rule of the contract is part of the summary.
  EXPECT_NE(r.out.find("I = width x depth^3 / 12"), std::string::npos);

  model::Member member;
  const Status s = ParseMember(Block(r.out, "## 1."), &member, {.require_id = true});
  ASSERT_TRUE(s.ok()) << s.message;
  EXPECT_EQ(member.sensors.size(), 3u);

  // The record example without its "..." line, completed with 12 s of a
  // 5 Hz sine at 512 Hz (any signal the reader accepts would do).
  std::string example = Block(r.out, "## 2.");
  example = example.substr(0, example.find("time_s"));
  std::ostringstream csv;
  csv.precision(10);
  csv << example << "time_s,a1,a2,a3\n";
  for (int i = 0; i < 6144; ++i) {
    const double t = i / 512.0, a = std::sin(2 * M_PI * 5 * t);
    csv << t << "," << a << "," << 0.5 * a << "," << -a << "\n";
  }
  std::istringstream in(csv.str());
  estimation::Record record;
  estimation::RecordReadOptions options;
  options.member = &member;
  const Status rs = estimation::ParseRecordCsv(in, options, &record);
  ASSERT_TRUE(rs.ok()) << rs.message;
  EXPECT_EQ(record.recorded_at, "2026-11-20T10:00:00Z");
  ASSERT_TRUE(record.temperature_c.has_value());
  EXPECT_EQ(*record.temperature_c, 12.5);
}

}  // namespace
}  // namespace taut::server
