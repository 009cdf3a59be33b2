// Fault injection and concurrency (STYLE.md item 13, after SQLite's
// do_faultsim_test in test/malloc_common.tcl: fail each step in turn and
// require either the correct result or a clean error with nothing
// half-written).
//
// Behaviour relied on, from the SQLite documentation (sqlite.org):
// "Transaction" (BEGIN IMMEDIATE takes the write lock at once),
// "sqlite3_busy_timeout", "PRAGMA max_page_count" (a full database returns
// SQLITE_FULL), "CREATE TRIGGER" (RAISE(ABORT, msg) aborts the statement),
// "Write-Ahead Logging" (readers do not block the writer, nor it them).
#include <gtest/gtest.h>

#include <atomic>
#include <chrono>
#include <future>
#include <set>
#include <thread>

#include "storage/postgres.h"
#include "tests/storage/backend_fixture.h"
#include "tests/storage/storage_test_support.h"

namespace taut::storage {
namespace {

using testing::CountRows;
using testing::Fixture;
using testing::MakeFixture;
using testing::SmallRecord;
using testing::TempDbFile;

// The step-by-step faults run on both backends (the fault hook is the
// repository's, before each statement); the tests of SQLite's own locking,
// triggers and file limits further down stay on SQLite.
class BackendFaultTest : public testing::BackendTest {
 protected:
  void SetUp() override {
    testing::BackendTest::SetUp();
    if (HasFatalFailure()) return;
    f_ = MakeFixture(repo_, "Foundry Wharf");
  }
  // Row counts of every table a write could touch.
  std::vector<long long> Snapshot() {
    std::vector<long long> out;
    for (const char* t : {"record", "job", "estimate", "member", "member_version", "alert"}) {
      out.push_back(CountRows(db_, t));
    }
    return out;
  }
  // Fails step 1, 2, ... of `op` in turn until it succeeds; after each
  // failure the tables must be exactly as before and `unchanged` must hold.
  // Returns the number of injected failures (the steps the write has).
  int FailEachStep(const std::function<StorageStatus()>& op, const std::function<void()>& unchanged) {
    for (int n = 1; n < 100; ++n) {
      const std::vector<long long> before = Snapshot();
      repo_.SetFaultHookForTesting([n](int step) { return step == n ? SQLITE_IOERR : SQLITE_OK; });
      const StorageStatus s = op();
      repo_.SetFaultHookForTesting({});
      if (s.ok()) return n - 1;
      EXPECT_EQ(s.sqlite_code, SQLITE_IOERR) << "step " << n << ": " << s.message;
      EXPECT_EQ(Snapshot(), before) << "half-written after a fault at step " << n;
      EXPECT_FALSE(db_.in_transaction()) << "transaction left open at step " << n;
      if (postgres()) {
        EXPECT_FALSE(db_.postgres()->InTransaction()) << "server-side transaction left open at step " << n;
      } else {
        EXPECT_EQ(sqlite3_get_autocommit(db_.handle()), 1) << "transaction left open at step " << n;
      }
      unchanged();
    }
    ADD_FAILURE() << "operation never succeeded";
    return -1;
  }
  Repository repo_{db_};
  Fixture f_;
};
TAUT_BOTH_BACKENDS(BackendFaultTest);

class FaultTest : public ::testing::Test {
 protected:
  void SetUp() override {
    const StorageStatus s = OpenAndMigrate(db_, file_.path());
    ASSERT_TRUE(s.ok()) << s.message;
    f_ = MakeFixture(repo_, "Foundry Wharf");
  }
  TempDbFile file_;
  Database db_;
  Repository repo_{db_};
  Fixture f_;
};

TEST_P(BackendFaultTest, RecordInsertFailingAtEachStepWritesNothing) {
  RecordInsertResult ins;
  const int steps =
      FailEachStep([&] { return repo_.InsertRecord(f_.org, SmallRecord(f_.member, 1, 10), 1, &ins); }, [] {});
  EXPECT_EQ(steps, 4) << "lookup, member, record, job";
  EXPECT_EQ(CountRows(db_, "record"), 1);
  EXPECT_EQ(CountRows(db_, "job"), 1);
}

TEST_P(BackendFaultTest, JobCompletionFailingAtEachStepLeavesTheJobRunning) {
  RecordInsertResult ins;
  ASSERT_TRUE(repo_.InsertRecord(f_.org, SmallRecord(f_.member, 1, 10), 1, &ins).ok());
  Job j;
  bool claimed = false;
  ASSERT_TRUE(repo_.ClaimNextJob(2, &j, &claimed).ok());
  Id est = 0;
  const int steps = FailEachStep(
      [&] {
        return repo_.CompleteJobWithEstimate(j.id, {ins.record_id, 30000, 100, 29800, 30200, 8000, 90, "{}"},
                                             3, &est);
      },
      [&] {
        Job now;
        ASSERT_TRUE(repo_.GetJob(f_.org, j.id, &now).ok());
        EXPECT_EQ(now.state, JobState::kRunning);
      });
  EXPECT_EQ(steps, 3) << "job check, estimate, job done";
  Job done;
  ASSERT_TRUE(repo_.GetJob(f_.org, j.id, &done).ok());
  EXPECT_EQ(done.state, JobState::kDone);
  EXPECT_EQ(CountRows(db_, "estimate"), 1);
}

TEST_P(BackendFaultTest, MemberCreateAndUpdateFailingAtEachStepWriteNothing) {
  Id m = 0;
  EXPECT_EQ(FailEachStep([&] { return repo_.CreateMember(f_.org, f_.structure, "west-tie-1", "{}", 5, &m); },
                         [] {}),
            3);
  std::int64_t v = 0;
  EXPECT_EQ(FailEachStep([&] { return repo_.UpdateMember(f_.org, m, R"({"v":2})", 6, &v); },
                         [&] {
                           Member cur;
                           ASSERT_TRUE(repo_.GetMember(f_.org, m, &cur).ok());
                           EXPECT_EQ(cur.current_version, 1);
                         }),
            2);
  EXPECT_EQ(v, 2);
}

TEST_F(FaultTest, TriggerRaisingInsideTheWriteRollsBackTheRecord) {
  // The job insert (the last statement of the upload) is refused by a
  // trigger, after the record row was already inserted in the transaction.
  ASSERT_TRUE(db_.Exec("CREATE TEMP TRIGGER refuse_job BEFORE INSERT ON job "
                       "BEGIN SELECT RAISE(ABORT, 'injected: job table refuses'); END;")
                  .ok());
  RecordInsertResult ins;
  const StorageStatus s = repo_.InsertRecord(f_.org, SmallRecord(f_.member, 1, 10), 1, &ins);
  EXPECT_EQ(s.sqlite_code, SQLITE_CONSTRAINT_TRIGGER) << s.message;
  EXPECT_NE(s.message.find("injected: job table refuses"), std::string::npos) << s.message;
  EXPECT_EQ(CountRows(db_, "record"), 0);
  EXPECT_EQ(CountRows(db_, "job"), 0);
  ASSERT_TRUE(db_.Exec("DROP TRIGGER refuse_job;").ok());
  EXPECT_TRUE(repo_.InsertRecord(f_.org, SmallRecord(f_.member, 1, 10), 1, &ins).ok());
}

TEST_F(FaultTest, FullDatabaseRefusesTheUploadCleanly) {
  std::string pages;
  ASSERT_TRUE(db_.QueryText("PRAGMA page_count;", &pages).ok());
  // Room for one more page: a 400 kB samples blob cannot fit.
  ASSERT_TRUE(db_.Exec("PRAGMA max_page_count = " + std::to_string(std::stoll(pages) + 1) + ";").ok());
  NewRecord big = SmallRecord(f_.member, 1, 10);
  big.channels = {"a1"};
  big.samples.assign(100000, 0.25);
  RecordInsertResult ins;
  const StorageStatus s = repo_.InsertRecord(f_.org, big, 1, &ins);
  EXPECT_EQ(s.sqlite_code & 0xff, SQLITE_FULL) << s.message;
  EXPECT_EQ(CountRows(db_, "record"), 0);
  EXPECT_EQ(CountRows(db_, "job"), 0);
  ASSERT_TRUE(db_.Exec("PRAGMA max_page_count = 1073741823;").ok());
  const StorageStatus again = repo_.InsertRecord(f_.org, big, 1, &ins);
  EXPECT_TRUE(again.ok()) << again.message;
  Record r;
  ASSERT_TRUE(repo_.GetRecord(f_.org, ins.record_id, &r).ok());
  EXPECT_EQ(r.samples.size(), 100000u);
}

TEST_F(FaultTest, CompetingWriterGivesBusyAfterTheTimeoutAndNothingIsWritten) {
  Database other;
  ASSERT_TRUE(other.Open(file_.path()).ok());
  ASSERT_TRUE(other.Exec("BEGIN IMMEDIATE;").ok());  // holds the write lock
  constexpr int kShortTimeout_ms = 20;               // keeps the test fast; production uses kBusyTimeout_ms
  ASSERT_TRUE(db_.SetBusyTimeout(kShortTimeout_ms).ok());
  RecordInsertResult ins;
  const StorageStatus s = repo_.InsertRecord(f_.org, SmallRecord(f_.member, 1, 10), 1, &ins);
  EXPECT_TRUE(s.busy()) << s.sqlite_code << " " << s.message;
  EXPECT_NE(s.message.find("attempts"), std::string::npos) << s.message;
  // WAL: reads go on while the other connection holds the write lock.
  Member m;
  EXPECT_TRUE(repo_.GetMember(f_.org, f_.member, &m).ok());
  ASSERT_TRUE(other.Exec("COMMIT;").ok());
  EXPECT_EQ(CountRows(db_, "record"), 0);
  ASSERT_TRUE(repo_.InsertRecord(f_.org, SmallRecord(f_.member, 1, 10), 1, &ins).ok());
  EXPECT_EQ(CountRows(db_, "record"), 1);
}

TEST_F(FaultTest, WriterWaitsForAShortLockInsteadOfFailing) {
  std::promise<void> locked;
  std::thread holder([&] {
    Database other;
    ASSERT_TRUE(other.Open(file_.path()).ok());
    ASSERT_TRUE(other.Exec("BEGIN IMMEDIATE;").ok());
    locked.set_value();
    // Hold the lock for a fixed 200 ms, well inside kBusyTimeout_ms (5 s).
    std::this_thread::sleep_for(std::chrono::milliseconds(200));
    ASSERT_TRUE(other.Exec("COMMIT;").ok());
  });
  locked.get_future().wait();
  RecordInsertResult ins;
  const StorageStatus s = repo_.InsertRecord(f_.org, SmallRecord(f_.member, 1, 10), 1, &ins);
  holder.join();
  EXPECT_TRUE(s.ok()) << s.message;
}

// Both backends: SQLite's single writer, PostgreSQL's serializable
// transactions retried on conflict (statement.h).
class ConcurrencyTest : public testing::BackendTest {};
TAUT_BOTH_BACKENDS(ConcurrencyTest);

TEST_P(ConcurrencyTest, EightWritersLoseAndDuplicateNothing) {
  Fixture f;
  {
    Repository repo(db_);
    f = MakeFixture(repo, "Eight Gateways Ltd");
  }
  constexpr int kThreads = 8, kUnique = 30, kShared = 10;
  std::vector<std::vector<RecordInsertResult>> unique(kThreads), shared(kThreads);
  std::vector<std::string> errors(kThreads);
  std::vector<std::thread> threads;
  for (int t = 0; t < kThreads; ++t) {
    threads.emplace_back([&, t] {
      Database db;  // one connection per thread
      if (StorageStatus s = db.Open(path()); !s.ok()) {
        errors[t] = s.message;
        return;
      }
      Repository repo(db);
      for (int i = 0; i < kUnique + kShared; ++i) {
        // Interleave: every thread also re-sends the same kShared uploads.
        const bool is_shared = i % 4 == 0 && static_cast<int>(shared[t].size()) < kShared;
        const unsigned long long content =
            is_shared ? 900000 + shared[t].size() : 1000ull * (t + 1) + unique[t].size();
        RecordInsertResult r;
        const StorageStatus s = repo.InsertRecord(f.org, SmallRecord(f.member, content, 1000 + i), 1, &r);
        if (!s.ok()) {
          errors[t] = s.message;
          return;
        }
        (is_shared ? shared[t] : unique[t]).push_back(r);
      }
    });
  }
  for (auto& th : threads) th.join();
  for (int t = 0; t < kThreads; ++t) EXPECT_EQ(errors[t], "") << "thread " << t;
  std::set<Id> record_ids, job_ids;
  for (int t = 0; t < kThreads; ++t) {
    for (const auto& r : unique[t]) {
      EXPECT_FALSE(r.duplicate);
      EXPECT_TRUE(record_ids.insert(r.record_id).second) << "record id handed out twice";
      EXPECT_TRUE(job_ids.insert(r.job_id).second);
    }
  }
  // Every thread got the same ids for the same shared upload.
  for (int i = 0; i < kShared; ++i) {
    std::set<Id> ids;
    int originals = 0;
    for (int t = 0; t < kThreads; ++t) {
      ASSERT_GT(static_cast<int>(shared[t].size()), i);
      ids.insert(shared[t][i].record_id);
      originals += shared[t][i].duplicate ? 0 : 1;
    }
    EXPECT_EQ(ids.size(), 1u) << "shared upload " << i;
    EXPECT_EQ(originals, 1) << "exactly one thread stored shared upload " << i;
  }
  Database db;
  ASSERT_TRUE(db.Open(path()).ok());
  EXPECT_EQ(CountRows(db, "record"), kThreads * kUnique + kShared);
  EXPECT_EQ(CountRows(db, "job"), kThreads * kUnique + kShared);
}

TEST_P(ConcurrencyTest, FourWorkersNeverClaimTheSameJob) {
  constexpr int kJobs = 60, kWorkers = 4;
  {
    Repository repo(db_);
    const Fixture f = MakeFixture(repo, "Four Workers Ltd");
    for (int i = 0; i < kJobs; ++i) {
      RecordInsertResult r;
      ASSERT_TRUE(repo.InsertRecord(f.org, SmallRecord(f.member, 10 + i, i), 1, &r).ok());
    }
  }
  std::vector<std::vector<Id>> claimed(kWorkers);
  std::atomic<int> failures{0};
  std::vector<std::thread> threads;
  for (int w = 0; w < kWorkers; ++w) {
    threads.emplace_back([&, w] {
      Database db;
      if (!db.Open(path()).ok()) {
        ++failures;
        return;
      }
      Repository repo(db);
      for (;;) {
        Job j;
        bool got = false;
        if (!repo.ClaimNextJob(5, &j, &got).ok()) {
          ++failures;
          return;
        }
        if (!got) return;
        claimed[w].push_back(j.id);
        if (!repo.FailJob(j.id, "test worker stops here", 6).ok()) ++failures;
      }
    });
  }
  for (auto& th : threads) th.join();
  EXPECT_EQ(failures.load(), 0);
  std::set<Id> all;
  std::size_t total = 0;
  for (const auto& c : claimed) {
    total += c.size();
    all.insert(c.begin(), c.end());
  }
  EXPECT_EQ(total, static_cast<std::size_t>(kJobs));
  EXPECT_EQ(all.size(), static_cast<std::size_t>(kJobs)) << "a job was claimed twice";
}

}  // namespace
}  // namespace taut::storage
