// The member logbook (storage/logbook.h): validation, order, organisation
// scoping and the newest new-baseline entry.
#include <gtest/gtest.h>
#include <sqlite3.h>

#include "storage/logbook.h"
#include "tests/storage/backend_fixture.h"
#include "tests/storage/storage_test_support.h"

namespace taut::storage {
namespace {

using testing::MakeFixture;
using testing::TempDbFile;

class LogbookTest : public testing::BackendTest {
 protected:
  Repository repo_{db_};
  Logbook log_{db_};
};
TAUT_BOTH_BACKENDS(LogbookTest);

TEST_P(LogbookTest, EntriesAreKeptInTimeOrderAndScopedToTheOrganisation) {
  const auto a = MakeFixture(repo_, "Harbour Works");
  const auto b = MakeFixture(repo_, "Valley Works");
  Id e1 = 0, e2 = 0, e3 = 0;
  ASSERT_TRUE(
      log_.Add(a.org, {a.member, "inspected", "Nuts checked.", "R. Field", 5000, false}, 1, &e1).ok());
  ASSERT_TRUE(log_.Add(a.org, {a.member, "re-tensioned", "To 40 kN.", "R. Field", 3000, true}, 2, &e2).ok());
  ASSERT_TRUE(log_.Add(a.org, {a.member, "repaired", "", "S. Moss", 9000, true}, 3, &e3).ok());
  std::vector<LogEntry> list;
  ASSERT_TRUE(log_.List(a.org, a.member, 0, 10000, &list).ok());
  ASSERT_EQ(list.size(), 3u);
  EXPECT_EQ(list[0].id, e2) << "ordered by occurred_at, not by insertion";
  EXPECT_EQ(list[0].kind, "re-tensioned");
  EXPECT_TRUE(list[0].new_baseline);
  EXPECT_EQ(list[1].note, "Nuts checked.");
  ASSERT_TRUE(log_.List(a.org, a.member, 4000, 9000, &list).ok());
  ASSERT_EQ(list.size(), 1u) << "[from, to)";
  std::int64_t start = 0;
  ASSERT_TRUE(log_.LatestBaselineStart(a.org, a.member, &start).ok());
  EXPECT_EQ(start, 9000);
  // Another organisation sees nothing and cannot write to the member.
  LogEntry e;
  EXPECT_TRUE(log_.Get(b.org, e1, &e).not_found());
  ASSERT_TRUE(log_.List(b.org, a.member, 0, 10000, &list).ok());
  EXPECT_TRUE(list.empty());
  Id x = 0;
  EXPECT_TRUE(log_.Add(b.org, {a.member, "inspected", "", "Q. Lamb", 1, false}, 4, &x).not_found());
  EXPECT_TRUE(log_.Delete(b.org, e1).not_found());
  EXPECT_TRUE(log_.LatestBaselineStart(b.org, b.member, &start).not_found());
  ASSERT_TRUE(log_.Delete(a.org, e3).ok());
  ASSERT_TRUE(log_.LatestBaselineStart(a.org, a.member, &start).ok());
  EXPECT_EQ(start, 3000);
}

TEST_P(LogbookTest, InvalidEntriesAreRefusedNamingTheField) {
  const auto a = MakeFixture(repo_, "Harbour Works");
  Id x = 0;
  StorageStatus s = log_.Add(a.org, {a.member, "painted", "", "R. Field", 1, false}, 1, &x);
  EXPECT_EQ(s.sqlite_code, SQLITE_MISUSE);
  EXPECT_NE(s.message.find("kind"), std::string::npos) << s.message;
  s = log_.Add(a.org, {a.member, "inspected", "", "", 1, false}, 1, &x);
  EXPECT_NE(s.message.find("author"), std::string::npos) << s.message;
  s = log_.Add(a.org, {a.member, "inspected", std::string(kMaxLogNote + 1, 'x'), "R. Field", 1, false}, 1,
               &x);
  EXPECT_NE(s.message.find("note"), std::string::npos) << s.message;
}

}  // namespace
}  // namespace taut::storage
