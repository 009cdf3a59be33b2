// Repositories: organisation scoping, versioned members with soft delete,
// idempotent record upload, the job life cycle, estimate queries, alerts and
// webhooks, the samples blob layout.
//
// External references: IEEE Std 754-2008, section 3.4 (binary32 encoding,
// e.g. 1.0f = 0x3F800000) for the samples blob; SQLite documentation
// ("Foreign key support", "The RETURNING clause", sqlite.org) for the
// constraint behaviour relied on.
#include <gtest/gtest.h>

#include <cmath>
#include <cstring>
#include <functional>
#include <limits>

#include "tests/storage/backend_fixture.h"
#include "tests/storage/storage_test_support.h"

namespace taut::storage {
namespace {

using testing::Backend;
using testing::CountRows;
using testing::Fixture;
using testing::Hex64;
using testing::MakeFixture;
using testing::SmallRecord;
using testing::TempDbFile;

// Every repository test runs on both backends (backend_fixture.h).
class RepositoryTest : public testing::BackendTest {
 protected:
  Repository repo_{db_};
};
TAUT_BOTH_BACKENDS(RepositoryTest);

// Tests of SQLite's own machinery (its virtual machine, its planner).
class SqliteRepositoryTest : public ::testing::Test {
 protected:
  void SetUp() override {
    const StorageStatus s = OpenAndMigrate(db_, file_.path());
    ASSERT_TRUE(s.ok()) << s.message;
  }
  TempDbFile file_;
  Database db_;
  Repository repo_{db_};
};

TEST(SamplesBlob, IsLittleEndianBinary32SampleMajor) {
  // IEEE 754 binary32: 1.0 = 0x3F800000, -2.0 = 0xC0000000, 0.5 = 0x3F000000.
  const std::string blob = EncodeSamples({1.0, -2.0, 0.5});
  ASSERT_EQ(blob.size(), 12u);
  const unsigned char expect[12] = {0x00, 0x00, 0x80, 0x3F, 0x00, 0x00, 0x00, 0xC0, 0x00, 0x00, 0x00, 0x3F};
  EXPECT_EQ(std::memcmp(blob.data(), expect, 12), 0);
  // Round trip of a value with no exact binary32 form equals the binary32
  // rounding of it (C++ static_cast<float> rounds to nearest, IEEE 754 4.3).
  std::vector<double> back;
  ASSERT_TRUE(DecodeSamples(EncodeSamples({0.1, -1e-7}), 2, &back).ok());
  EXPECT_EQ(back[0], static_cast<double>(0.1f));
  EXPECT_EQ(back[1], static_cast<double>(-1e-7f));
  EXPECT_NEAR(back[0], 0.1, 0.1 * 0x1p-24) << "relative error <= 2^-24 (half an ulp of binary32)";
  // A truncated blob is corruption, named as such.
  const StorageStatus bad = DecodeSamples(blob.substr(0, 11), 3, &back);
  EXPECT_EQ(bad.sqlite_code, SQLITE_CORRUPT);
  EXPECT_NE(bad.message.find("11 bytes"), std::string::npos) << bad.message;
}

TEST_P(RepositoryTest, TokensKeepSaltHashAndRole) {
  Id org = 0, token = 0;
  ASSERT_TRUE(repo_.CreateOrganisation("Harbour Trust", 1, &org).ok());
  const std::string salt("\x00\x01\xff", 3), hash(32, '\x7f');
  ASSERT_TRUE(repo_.CreateToken(org, {"tk_abc", salt, hash, Role::kUpload, "gateway 1"}, 5, &token).ok());
  Token t;
  ASSERT_TRUE(repo_.FindToken("tk_abc", &t).ok());
  EXPECT_EQ(t.organisation_id, org);
  EXPECT_EQ(t.salt, salt) << "binary salt incl. a NUL byte survives";
  EXPECT_EQ(t.hash, hash);
  EXPECT_EQ(t.role, Role::kUpload);
  EXPECT_FALSE(t.revoked_at_unix_ms.has_value());
  EXPECT_TRUE(repo_.FindToken("tk_nope", &t).not_found());
  // The schema refuses roles outside read/upload/admin and duplicate ids.
  EXPECT_EQ(repo_.CreateToken(org, {"tk_abc", salt, hash, Role::kRead, ""}, 6, &token).sqlite_code & 0xff,
            SQLITE_CONSTRAINT);
  EXPECT_EQ(
      db_.Exec("INSERT INTO api_token (organisation_id, public_id, salt, hash, role, created_at_unix_ms) "
               "VALUES (1, 'x', " +
               ZeroByteLiteral() + ", " + ZeroByteLiteral() + ", 'root', 0);")
              .sqlite_code &
          0xff,
      SQLITE_CONSTRAINT);
  Id other = 0;
  ASSERT_TRUE(repo_.CreateOrganisation("Other Estate", 1, &other).ok());
  EXPECT_TRUE(repo_.RevokeToken(other, t.id, 9).not_found()) << "another organisation cannot revoke it";
  ASSERT_TRUE(repo_.RevokeToken(org, t.id, 9).ok());
  ASSERT_TRUE(repo_.FindToken("tk_abc", &t).ok());
  EXPECT_EQ(t.revoked_at_unix_ms.value_or(0), 9);
}

TEST_P(RepositoryTest, MemberEditsCreateVersionsAndSoftDeleteKeepsHistory) {
  const Fixture f = MakeFixture(repo_, "Kiln Lane Trust");
  std::int64_t v = 0;
  ASSERT_TRUE(repo_.UpdateMember(f.org, f.member, R"({"id":"east-tie-2","length_m":6.25})", 2000, &v).ok());
  EXPECT_EQ(v, 2);
  Member m;
  ASSERT_TRUE(repo_.GetMember(f.org, f.member, &m).ok());
  EXPECT_EQ(m.version, 2);
  EXPECT_EQ(m.current_version, 2);
  EXPECT_EQ(m.description_json, R"({"id":"east-tie-2","length_m":6.25})");
  ASSERT_TRUE(repo_.GetMemberVersion(f.org, f.member, 1, &m).ok());
  EXPECT_EQ(m.description_json, R"({"id":"east-tie-2","length_m":6.2})");
  // A record uploaded now refers to version 2.
  RecordInsertResult ins;
  ASSERT_TRUE(repo_.InsertRecord(f.org, SmallRecord(f.member, 1, 5000), 3000, &ins).ok());
  Record r;
  ASSERT_TRUE(repo_.GetRecord(f.org, ins.record_id, &r).ok());
  EXPECT_EQ(r.member_version, 2);
  // Duplicate live external id in the structure is refused.
  Id dup = 0;
  EXPECT_EQ(repo_.CreateMember(f.org, f.structure, "east-tie-2", "{}", 1, &dup).sqlite_code & 0xff,
            SQLITE_CONSTRAINT);
  // The structure cannot be deleted while the member lives.
  EXPECT_EQ(repo_.DeleteStructure(f.org, f.structure, 4000).sqlite_code, SQLITE_CONSTRAINT);
  ASSERT_TRUE(repo_.DeleteMember(f.org, f.member, 4000).ok());
  EXPECT_TRUE(repo_.GetMember(f.org, f.member, &m).not_found());
  EXPECT_TRUE(repo_.DeleteMember(f.org, f.member, 4001).not_found()) << "already deleted";
  ASSERT_TRUE(repo_.GetMemberVersion(f.org, f.member, 2, &m).ok()) << "history stays readable";
  EXPECT_EQ(m.deleted_at_unix_ms.value_or(0), 4000);
  ASSERT_TRUE(repo_.GetRecord(f.org, ins.record_id, &r).ok()) << "records of a deleted member stay";
  EXPECT_TRUE(repo_.UpdateMember(f.org, f.member, "{}", 5000, &v).not_found());
  std::vector<Member> list;
  ASSERT_TRUE(repo_.ListMembers(f.org, f.structure, &list).ok());
  EXPECT_TRUE(list.empty());
  // The external id is free again once the old member is deleted.
  EXPECT_TRUE(repo_.CreateMember(f.org, f.structure, "east-tie-2", "{}", 6000, &dup).ok());
  EXPECT_EQ(CountRows(db_, "member_version"), 3);
}

TEST_P(RepositoryTest, NoReadReturnsAnotherOrganisationsRows) {
  const Fixture a = MakeFixture(repo_, "Org A");
  const Fixture b = MakeFixture(repo_, "Org B");
  RecordInsertResult ra, rb;
  ASSERT_TRUE(repo_.InsertRecord(a.org, SmallRecord(a.member, 1, 5000), 1, &ra).ok());
  ASSERT_TRUE(repo_.InsertRecord(b.org, SmallRecord(b.member, 1, 5000), 1, &rb).ok())
      << "the same content for another member is not a duplicate";
  EXPECT_NE(ra.record_id, rb.record_id);
  Job job;
  bool claimed = false;
  ASSERT_TRUE(repo_.ClaimNextJob(2, &job, &claimed).ok());
  ASSERT_TRUE(claimed);
  Id est = 0, alert = 0, hook = 0;
  ASSERT_TRUE(
      repo_
          .CompleteJobWithEstimate(job.id, {ra.record_id, 30000, 200, 29600, 30400, 8000, 100, "{}"}, 3, &est)
          .ok());
  ASSERT_TRUE(repo_.RaiseAlert(a.org, {a.member, est, "force-residual", "inspect", "{}"}, 4, &alert).ok());
  ASSERT_TRUE(repo_.CreateWebhook(a.org, "http://127.0.0.1:9/hook", "s", 4, &hook).ok());

  // Organisation B asks for every id of organisation A: not found, always.
  Structure s;
  Member m;
  Record r;
  Job j;
  Estimate e;
  Alert al;
  EXPECT_TRUE(repo_.GetStructure(b.org, a.structure, &s).not_found());
  EXPECT_TRUE(repo_.GetMember(b.org, a.member, &m).not_found());
  EXPECT_TRUE(repo_.GetMemberVersion(b.org, a.member, 1, &m).not_found());
  EXPECT_TRUE(repo_.GetRecord(b.org, ra.record_id, &r).not_found());
  EXPECT_TRUE(repo_.GetJob(b.org, ra.job_id, &j).not_found());
  EXPECT_TRUE(repo_.GetJobForRecord(b.org, ra.record_id, &j).not_found());
  EXPECT_TRUE(repo_.GetEstimate(b.org, est, &e).not_found());
  EXPECT_TRUE(repo_.LatestEstimate(b.org, a.member, &e).not_found());
  EXPECT_TRUE(repo_.GetAlert(b.org, alert, &al).not_found());
  std::vector<Estimate> hist;
  ASSERT_TRUE(repo_.ForceHistory(b.org, a.member, 0, 1 << 30, &hist).ok());
  EXPECT_TRUE(hist.empty());
  std::vector<Member> members;
  ASSERT_TRUE(repo_.ListMembers(b.org, a.structure, &members).ok());
  EXPECT_TRUE(members.empty());
  std::vector<Alert> alerts;
  {
    const StorageStatus ls = repo_.ListAlerts(b.org, {}, &alerts);
    ASSERT_TRUE(ls.ok()) << ls.message;
  }
  EXPECT_TRUE(alerts.empty());
  std::vector<Webhook> hooks;
  ASSERT_TRUE(repo_.ListWebhooks(b.org, false, &hooks).ok());
  EXPECT_TRUE(hooks.empty());
  std::vector<Structure> structures;
  ASSERT_TRUE(repo_.ListStructures(b.org, &structures).ok());
  ASSERT_EQ(structures.size(), 1u);
  EXPECT_EQ(structures[0].id, b.structure);
  // ... and cannot write through them either.
  std::int64_t v = 0;
  RecordInsertResult ins;
  Id id = 0;
  EXPECT_TRUE(repo_.UpdateMember(b.org, a.member, "{}", 5, &v).not_found());
  EXPECT_TRUE(repo_.DeleteMember(b.org, a.member, 5).not_found());
  EXPECT_TRUE(repo_.InsertRecord(b.org, SmallRecord(a.member, 77, 1), 5, &ins).not_found());
  EXPECT_TRUE(repo_.CreateMember(b.org, a.structure, "x", "{}", 5, &id).not_found());
  EXPECT_TRUE(repo_.AcknowledgeAlert(b.org, alert, 5).not_found());
  EXPECT_TRUE(repo_.ResolveAlert(b.org, alert, 5).not_found());
  EXPECT_TRUE(repo_.RaiseAlert(b.org, {a.member, std::nullopt, "r", "m", "{}"}, 5, &id).not_found());
  EXPECT_TRUE(repo_.DeactivateWebhook(b.org, hook).not_found());
  EXPECT_TRUE(
      repo_.RecordDelivery(b.org, {0, hook, alert, 1, 5, 200, "", true, std::nullopt}, &id).not_found());
  // Even raw SQL cannot make a cross-organisation reference: the composite
  // foreign key (organisation_id, member_id) refuses it.
  EXPECT_EQ(
      db_.Exec("INSERT INTO alert (organisation_id, member_id, rule, state, message, evidence, "
               "raised_at_unix_ms) VALUES (" +
               std::to_string(b.org) + ", " + std::to_string(a.member) + ", 'r', 'open', 'm', '{}', 0);")
              .sqlite_code &
          0xff,
      SQLITE_CONSTRAINT);
}

TEST_P(RepositoryTest, RecordRoundTripKeepsMetadataAndSamples) {
  const Fixture f = MakeFixture(repo_, "Weir Cottages");
  NewRecord in = SmallRecord(f.member, 42, 1764583200000);  // 2025-12-01T10:00:00Z
  in.units = "g";
  in.excitation = "impact";
  in.idempotency_key = "gw7-000123";
  RecordInsertResult ins;
  ASSERT_TRUE(repo_.InsertRecord(f.org, in, 1764583260000, &ins).ok());
  EXPECT_FALSE(ins.duplicate);
  Record r;
  ASSERT_TRUE(repo_.GetRecord(f.org, ins.record_id, &r).ok());
  EXPECT_EQ(r.member_id, f.member);
  EXPECT_EQ(r.recorded_at_unix_ms, 1764583200000);
  EXPECT_EQ(r.temperature_c.value_or(0), 12.5);
  EXPECT_EQ(r.units, "g");
  EXPECT_EQ(r.excitation, "impact");
  EXPECT_EQ(r.sample_rate_hz, 200.0);
  EXPECT_EQ(r.channels, in.channels);
  EXPECT_EQ(r.sample_count, 4);
  ASSERT_EQ(r.samples.size(), in.samples.size());
  for (std::size_t i = 0; i < in.samples.size(); ++i) {
    EXPECT_EQ(r.samples[i], static_cast<double>(static_cast<float>(in.samples[i]))) << i;
  }
  EXPECT_EQ(r.content_sha256, in.content_sha256);
  EXPECT_EQ(r.samples_sha256, in.samples_sha256);
  EXPECT_EQ(r.idempotency_key, "gw7-000123");
  Job j;
  ASSERT_TRUE(repo_.GetJob(f.org, ins.job_id, &j).ok());
  EXPECT_EQ(j.state, JobState::kQueued);
  EXPECT_EQ(j.record_id, ins.record_id);
  EXPECT_EQ(j.progress, 0.0);
}

TEST_P(RepositoryTest, InvalidRecordsAreRefusedNamingTheField) {
  const Fixture f = MakeFixture(repo_, "Mill Race");
  RecordInsertResult ins;
  struct Case {
    const char* field;
    std::function<void(NewRecord&)> spoil;
  };
  const std::vector<Case> cases = {
      {"units", [](NewRecord& r) { r.units = "mm/s2"; }},
      {"excitation", [](NewRecord& r) { r.excitation = "shaker"; }},
      {"sample_rate_hz", [](NewRecord& r) { r.sample_rate_hz = 0; }},
      {"channel name", [](NewRecord& r) { r.channels[1] = "a,2"; }},
      {"samples size", [](NewRecord& r) { r.samples.pop_back(); }},
      {"samples must be finite",
       [](NewRecord& r) { r.samples[3] = std::numeric_limits<double>::quiet_NaN(); }},
      {"content_sha256", [](NewRecord& r) { r.content_sha256 = "ABC"; }},
      {"samples_sha256", [](NewRecord& r) { r.samples_sha256[0] = 'G'; }},
      {"temperature_c", [](NewRecord& r) { r.temperature_c = std::numeric_limits<double>::infinity(); }},
  };
  for (const Case& c : cases) {
    NewRecord r = SmallRecord(f.member, 5, 1);
    c.spoil(r);
    const StorageStatus s = repo_.InsertRecord(f.org, r, 1, &ins);
    EXPECT_EQ(s.sqlite_code, SQLITE_MISUSE) << c.field;
    EXPECT_NE(s.message.find(c.field), std::string::npos) << s.message;
  }
  EXPECT_EQ(CountRows(db_, "record"), 0);
}

TEST_P(RepositoryTest, ResentUploadReturnsTheOriginalIds) {
  const Fixture f = MakeFixture(repo_, "Ferry Landing");
  NewRecord r = SmallRecord(f.member, 7, 100);
  r.idempotency_key = "key-1";
  RecordInsertResult first, again, by_hash, other_key;
  ASSERT_TRUE(repo_.InsertRecord(f.org, r, 1, &first).ok());
  ASSERT_TRUE(repo_.InsertRecord(f.org, r, 2, &again).ok());
  EXPECT_TRUE(again.duplicate);
  EXPECT_EQ(again.record_id, first.record_id);
  EXPECT_EQ(again.job_id, first.job_id);
  // Same content, no key: found by the content hash for the same member.
  NewRecord no_key = r;
  no_key.idempotency_key.clear();
  ASSERT_TRUE(repo_.InsertRecord(f.org, no_key, 3, &by_hash).ok());
  EXPECT_TRUE(by_hash.duplicate);
  EXPECT_EQ(by_hash.record_id, first.record_id);
  // Same content, another key: still the original.
  NewRecord k2 = r;
  k2.idempotency_key = "key-2";
  ASSERT_TRUE(repo_.InsertRecord(f.org, k2, 4, &other_key).ok());
  EXPECT_EQ(other_key.record_id, first.record_id);
  // The key reused for different content is a client error.
  NewRecord clash = SmallRecord(f.member, 8, 100);
  clash.idempotency_key = "key-1";
  RecordInsertResult unused;
  const StorageStatus s = repo_.InsertRecord(f.org, clash, 5, &unused);
  EXPECT_EQ(s.sqlite_code, SQLITE_CONSTRAINT);
  EXPECT_NE(s.message.find("key-1"), std::string::npos) << s.message;
  EXPECT_EQ(CountRows(db_, "record"), 1);
  EXPECT_EQ(CountRows(db_, "job"), 1);
}

// Regression: the duplicate lookup of an upload once used one query with
// an OR over the key and the content hash, which SQLite could not answer by
// index seeks when the key was NULL, so every upload scanned the record
// table. The work of an insert is counted in virtual-machine instructions
// (sqlite3_progress_handler with N = 1, SQLite documentation): with index
// seeks (O(log n), SQLite "Query Planning") it must not grow with the number
// of stored records. Tolerance: +25 % for the deeper b-trees and the larger
// rowids of the later insert; a scan of 400 more rows would add thousands.
TEST_F(SqliteRepositoryTest, UploadCostDoesNotGrowWithStoredRecords) {
  const Fixture f = MakeFixture(repo_, "Scan Guard Ltd");
  ASSERT_TRUE(db_.Exec("PRAGMA synchronous = OFF;").ok());  // setup speed only; counted work is unaffected
  long long ops = 0;
  sqlite3_progress_handler(
      db_.handle(), 1,
      [](void* counter) {
        ++*static_cast<long long*>(counter);
        return 0;
      },
      &ops);
  const auto cost_of_insert = [&](unsigned long long content) {
    RecordInsertResult ins;
    ops = 0;
    EXPECT_TRUE(repo_.InsertRecord(f.org, SmallRecord(f.member, content, 1), 1, &ins).ok());
    return ops;
  };
  for (unsigned long long i = 0; i < 20; ++i) cost_of_insert(i);
  const long long early = cost_of_insert(5000);
  for (unsigned long long i = 20; i < 420; ++i) cost_of_insert(i);
  const long long late = cost_of_insert(5001);
  sqlite3_progress_handler(db_.handle(), 0, nullptr, nullptr);
  EXPECT_GT(early, 0);
  EXPECT_LT(static_cast<double>(late), 1.25 * static_cast<double>(early)) << early << " -> " << late;
}

// Issue 13 item 5: one organisation's backlog must not starve another's
// job. A free worker takes the oldest job of the organisation with the
// fewest running jobs.
TEST_P(RepositoryTest, ClaimingIsFairBetweenOrganisations) {
  const Fixture a = MakeFixture(repo_, "Backlog Estates");
  const Fixture b = MakeFixture(repo_, "Quiet Lane Trust");
  std::vector<RecordInsertResult> mass(4);
  for (int i = 0; i < 4; ++i) {
    ASSERT_TRUE(repo_.InsertRecord(a.org, SmallRecord(a.member, 10 + i, 100 + i), 1, &mass[i]).ok());
  }
  RecordInsertResult single;
  ASSERT_TRUE(repo_.InsertRecord(b.org, SmallRecord(b.member, 50, 500), 2, &single).ok());
  Job j;
  bool claimed = false;
  ASSERT_TRUE(repo_.ClaimNextJob(10, &j, &claimed).ok());
  EXPECT_EQ(j.id, mass[0].job_id) << "both idle: the oldest job first";
  ASSERT_TRUE(repo_.ClaimNextJob(11, &j, &claimed).ok());
  EXPECT_EQ(j.id, single.job_id) << "A has a job running, B none: B's job next, not A's backlog";
  ASSERT_TRUE(repo_.ClaimNextJob(12, &j, &claimed).ok());
  EXPECT_EQ(j.id, mass[1].job_id) << "then A again (both have one running; A's queued job is older)";
}

TEST_P(RepositoryTest, JobLifeCycleAndRequeue) {
  const Fixture f = MakeFixture(repo_, "Signal Box Row");
  RecordInsertResult r1, r2, r3;
  ASSERT_TRUE(repo_.InsertRecord(f.org, SmallRecord(f.member, 1, 100), 1, &r1).ok());
  ASSERT_TRUE(repo_.InsertRecord(f.org, SmallRecord(f.member, 2, 200), 1, &r2).ok());
  ASSERT_TRUE(repo_.InsertRecord(f.org, SmallRecord(f.member, 3, 300), 1, &r3).ok());
  Job j;
  bool claimed = false;
  ASSERT_TRUE(repo_.ClaimNextJob(10, &j, &claimed).ok());
  ASSERT_TRUE(claimed);
  EXPECT_EQ(j.id, r1.job_id) << "oldest first";
  EXPECT_EQ(j.state, JobState::kRunning);
  EXPECT_EQ(j.attempts, 1);
  EXPECT_EQ(j.started_at_unix_ms.value_or(0), 10);
  ASSERT_TRUE(repo_.SetJobProgress(j.id, 0.5).ok());
  EXPECT_EQ(repo_.SetJobProgress(j.id, 1.5).sqlite_code, SQLITE_MISUSE);
  EXPECT_EQ(repo_.SetJobProgress(j.id, -0.1).sqlite_code, SQLITE_MISUSE);
  Job got;
  ASSERT_TRUE(repo_.GetJob(f.org, j.id, &got).ok());
  EXPECT_EQ(got.progress, 0.5);
  Id est = 0;
  const NewEstimate e{r1.record_id, 30000, 150, 29700, 30300, 7950, 120, R"({"axial_force_n":{}})"};
  ASSERT_TRUE(repo_.CompleteJobWithEstimate(j.id, e, 20, &est).ok());
  ASSERT_TRUE(repo_.GetJob(f.org, j.id, &got).ok());
  EXPECT_EQ(got.state, JobState::kDone);
  EXPECT_EQ(got.progress, 1.0);
  EXPECT_TRUE(repo_.SetJobProgress(j.id, 0.2).not_found()) << "a done job is not running";
  // Second job fails with a reason that is kept.
  ASSERT_TRUE(repo_.ClaimNextJob(30, &j, &claimed).ok());
  ASSERT_EQ(j.id, r2.job_id);
  EXPECT_EQ(repo_.FailJob(j.id, "", 31).sqlite_code, SQLITE_MISUSE);
  ASSERT_TRUE(repo_.FailJob(j.id, "no mode identified between 0.5 and 50 Hz", 31).ok());
  ASSERT_TRUE(repo_.GetJob(f.org, j.id, &got).ok());
  EXPECT_EQ(got.state, JobState::kFailed);
  EXPECT_EQ(got.failure_reason, "no mode identified between 0.5 and 50 Hz");
  // Third job is running when the process stops; at start-up it is queued
  // again and claimed a second time.
  ASSERT_TRUE(repo_.ClaimNextJob(40, &j, &claimed).ok());
  ASSERT_EQ(j.id, r3.job_id);
  ASSERT_TRUE(repo_.SetJobProgress(j.id, 0.7).ok());
  int requeued = 0;
  ASSERT_TRUE(repo_.RequeueRunningJobs(&requeued).ok());
  EXPECT_EQ(requeued, 1);
  ASSERT_TRUE(repo_.GetJob(f.org, j.id, &got).ok());
  EXPECT_EQ(got.state, JobState::kQueued);
  EXPECT_EQ(got.progress, 0.0);
  ASSERT_TRUE(repo_.ClaimNextJob(50, &j, &claimed).ok());
  EXPECT_EQ(j.id, r3.job_id);
  EXPECT_EQ(j.attempts, 2);
  ASSERT_TRUE(repo_.ClaimNextJob(60, &j, &claimed).ok());
  EXPECT_FALSE(claimed) << "queue empty";
}

TEST_P(RepositoryTest, HistoryIsOrderedByTimeAndLatestIsTheNewestMeasurement) {
  const Fixture f = MakeFixture(repo_, "Granary Quay");
  // Records arrive out of time order (a gateway catching up).
  const std::int64_t times[] = {5000, 1000, 3000, 4000, 2000};
  for (int i = 0; i < 5; ++i) {
    RecordInsertResult ins;
    ASSERT_TRUE(repo_.InsertRecord(f.org, SmallRecord(f.member, 100 + i, times[i]), 1, &ins).ok());
    Job j;
    bool claimed = false;
    ASSERT_TRUE(repo_.ClaimNextJob(2, &j, &claimed).ok());
    ASSERT_TRUE(claimed);
    const double force = 30000 + static_cast<double>(times[i]);
    Id est = 0;
    ASSERT_TRUE(repo_
                    .CompleteJobWithEstimate(
                        j.id, {ins.record_id, force, 100, force - 196, force + 196, 8000, std::nullopt, "{}"},
                        3, &est)
                    .ok());
  }
  std::vector<Estimate> h;
  ASSERT_TRUE(repo_.ForceHistory(f.org, f.member, 2000, 5000, &h).ok());
  ASSERT_EQ(h.size(), 3u) << "half-open range [2000, 5000)";
  EXPECT_EQ(h[0].measured_at_unix_ms, 2000);
  EXPECT_EQ(h[1].measured_at_unix_ms, 3000);
  EXPECT_EQ(h[2].measured_at_unix_ms, 4000);
  EXPECT_EQ(h[1].axial_force_n, 33000);
  EXPECT_EQ(h[1].temperature_c.value_or(0), 12.5) << "taken from the record";
  EXPECT_EQ(h[1].member_version, 1);
  EXPECT_TRUE(h[1].result_json.empty());
  EXPECT_EQ(repo_.ForceHistory(f.org, f.member, 10, 5, &h).sqlite_code, SQLITE_MISUSE);
  Estimate latest;
  ASSERT_TRUE(repo_.LatestEstimate(f.org, f.member, &latest).ok());
  EXPECT_EQ(latest.measured_at_unix_ms, 5000);
  EXPECT_EQ(latest.result_json, "{}");
  // The query plan uses the history index (SQLite "EXPLAIN QUERY PLAN";
  // PostgreSQL EXPLAIN with sequential scans disfavoured, as a table of
  // thousands of rows would make them: PostgreSQL 15 documentation 20.7.1).
  const std::string query =
      "SELECT id FROM estimate WHERE organisation_id = 1 AND member_id = 1 AND measured_at_unix_ms >= 0 "
      "AND measured_at_unix_ms < 10 ORDER BY measured_at_unix_ms, id";
  std::string plan;
  if (postgres()) {
    ASSERT_TRUE(db_.Exec("SET enable_seqscan = off").ok());
    ASSERT_TRUE(db_.QueryText("EXPLAIN " + query, &plan).ok());  // the plan's top line
    EXPECT_NE(plan.find("estimate_member_time"), std::string::npos) << plan;
    EXPECT_EQ(plan.find("Sort"), std::string::npos) << "no sort step: " << plan;
    return;
  }
  sqlite3_stmt* stmt = nullptr;
  ASSERT_EQ(sqlite3_prepare_v2(db_.handle(), ("EXPLAIN QUERY PLAN " + query).c_str(), -1, &stmt, nullptr),
            SQLITE_OK);
  while (sqlite3_step(stmt) == SQLITE_ROW)
    plan += reinterpret_cast<const char*>(sqlite3_column_text(stmt, 3));
  sqlite3_finalize(stmt);
  EXPECT_NE(plan.find("estimate_member_time"), std::string::npos) << plan;
  EXPECT_EQ(plan.find("TEMP B-TREE"), std::string::npos) << "no sort step: " << plan;
}

TEST_P(RepositoryTest, EstimateOutsideItsIntervalIsRefused) {
  const Fixture f = MakeFixture(repo_, "Lock Keeper");
  RecordInsertResult ins;
  ASSERT_TRUE(repo_.InsertRecord(f.org, SmallRecord(f.member, 1, 1), 1, &ins).ok());
  Job j;
  bool claimed = false;
  ASSERT_TRUE(repo_.ClaimNextJob(2, &j, &claimed).ok());
  Id est = 0;
  EXPECT_EQ(repo_
                .CompleteJobWithEstimate(
                    j.id, {ins.record_id, 100, 1, 200, 300, std::nullopt, std::nullopt, "{}"}, 3, &est)
                .sqlite_code,
            SQLITE_MISUSE);
  EXPECT_TRUE(repo_
                  .CompleteJobWithEstimate(
                      j.id, {ins.record_id + 1, 100, 1, 90, 110, std::nullopt, std::nullopt, "{}"}, 3, &est)
                  .not_found())
      << "a job stores estimates of its own record only";
  EXPECT_EQ(CountRows(db_, "estimate"), 0);
}

TEST_P(RepositoryTest, AlertStatesMoveForwardOnly) {
  const Fixture f = MakeFixture(repo_, "Tannery Yard");
  Id a1 = 0, a2 = 0;
  ASSERT_TRUE(repo_
                  .RaiseAlert(f.org,
                              {f.member, std::nullopt, "force-residual", "Inspect the anchor plates.",
                               R"({"z":[3.4,3.9]})"},
                              100, &a1)
                  .ok());
  ASSERT_TRUE(
      repo_.RaiseAlert(f.org, {f.member, std::nullopt, "force-below-design", "Inspect.", "{}"}, 200, &a2)
          .ok());
  ASSERT_TRUE(repo_.AcknowledgeAlert(f.org, a1, 300).ok());
  const StorageStatus twice = repo_.AcknowledgeAlert(f.org, a1, 301);
  EXPECT_EQ(twice.sqlite_code, SQLITE_CONSTRAINT);
  EXPECT_NE(twice.message.find("acknowledged"), std::string::npos) << twice.message;
  ASSERT_TRUE(repo_.ResolveAlert(f.org, a1, 400).ok());
  EXPECT_EQ(repo_.ResolveAlert(f.org, a1, 401).sqlite_code, SQLITE_CONSTRAINT);
  EXPECT_EQ(repo_.AcknowledgeAlert(f.org, a1, 402).sqlite_code, SQLITE_CONSTRAINT);
  Alert a;
  ASSERT_TRUE(repo_.GetAlert(f.org, a1, &a).ok());
  EXPECT_EQ(a.state, AlertState::kResolved);
  EXPECT_EQ(a.acknowledged_at_unix_ms.value_or(0), 300);
  EXPECT_EQ(a.resolved_at_unix_ms.value_or(0), 400);
  EXPECT_EQ(a.evidence, R"({"z":[3.4,3.9]})");
  std::vector<Alert> open;
  ASSERT_TRUE(repo_.ListAlerts(f.org, {f.member, AlertState::kOpen}, &open).ok());
  ASSERT_EQ(open.size(), 1u);
  EXPECT_EQ(open[0].id, a2);
  std::vector<Alert> all;
  ASSERT_TRUE(repo_.ListAlerts(f.org, {}, &all).ok());
  EXPECT_EQ(all.size(), 2u);
}

TEST_P(RepositoryTest, WebhookDeliveriesAreLogged) {
  const Fixture f = MakeFixture(repo_, "Bridge Street");
  Id hook = 0, alert = 0, d = 0;
  ASSERT_TRUE(repo_.CreateWebhook(f.org, "http://127.0.0.1:8123/alerts", "secret", 1, &hook).ok());
  ASSERT_TRUE(
      repo_.RaiseAlert(f.org, {f.member, std::nullopt, "cusum-force", "Inspect.", "{}"}, 2, &alert).ok());
  ASSERT_TRUE(
      repo_.RecordDelivery(f.org, {0, hook, alert, 1, 3, std::nullopt, "connection refused", false, 63}, &d)
          .ok());
  ASSERT_TRUE(repo_.RecordDelivery(f.org, {0, hook, alert, 2, 63, 200, "", true, std::nullopt}, &d).ok());
  EXPECT_EQ(
      repo_.RecordDelivery(f.org, {0, hook, alert, 2, 64, 200, "", true, std::nullopt}, &d).sqlite_code &
          0xff,
      SQLITE_CONSTRAINT)
      << "one row per attempt number";
  std::vector<DeliveryAttempt> log;
  ASSERT_TRUE(repo_.ListDeliveries(f.org, alert, &log).ok());
  ASSERT_EQ(log.size(), 2u);
  EXPECT_FALSE(log[0].http_status.has_value());
  EXPECT_EQ(log[0].error, "connection refused");
  EXPECT_EQ(log[0].next_attempt_at_unix_ms.value_or(0), 63);
  EXPECT_EQ(log[1].http_status.value_or(0), 200);
  EXPECT_TRUE(log[1].succeeded);
  ASSERT_TRUE(repo_.DeactivateWebhook(f.org, hook).ok());
  std::vector<Webhook> hooks;
  ASSERT_TRUE(repo_.ListWebhooks(f.org, true, &hooks).ok());
  EXPECT_TRUE(hooks.empty());
  ASSERT_TRUE(repo_.ListWebhooks(f.org, false, &hooks).ok());
  ASSERT_EQ(hooks.size(), 1u);
  EXPECT_EQ(hooks[0].secret, "secret");
}

// Several replicas (schema step 8): a leased job is renewed by its owner's
// heartbeat, taken over by another worker once the lease expired, and the
// first owner can then store nothing. Times are the caller's "now", so the
// expiry is exact (no sleeping).
TEST_P(RepositoryTest, ExpiredLeaseIsClaimedAgainAndTheLoserStoresNothing) {
  const Fixture f = MakeFixture(repo_, "Lease Street Works");
  RecordInsertResult ins;
  ASSERT_TRUE(repo_.InsertRecord(f.org, SmallRecord(f.member, 1, 1), 1, &ins).ok());
  Job a, b;
  bool claimed = false;
  ASSERT_TRUE(repo_.ClaimNextJob(1000, JobLease{"replica-a/w0", 2000}, &a, &claimed).ok());
  ASSERT_TRUE(claimed);
  EXPECT_EQ(a.lease_owner, "replica-a/w0");
  EXPECT_EQ(a.lease_expires_at_unix_ms.value_or(0), 3000);
  // Within the lease nobody else gets it; the heartbeat extends it.
  ASSERT_TRUE(repo_.ClaimNextJob(2500, JobLease{"replica-b/w0", 2000}, &b, &claimed).ok());
  EXPECT_FALSE(claimed);
  ASSERT_TRUE(repo_.RenewJobLease(a.id, "replica-a/w0", 2900, 2000).ok());
  ASSERT_TRUE(repo_.ClaimNextJob(4000, JobLease{"replica-b/w0", 2000}, &b, &claimed).ok());
  EXPECT_FALSE(claimed) << "renewed until 4900";
  EXPECT_TRUE(repo_.RenewJobLease(a.id, "replica-b/w0", 4000, 2000).not_found()) << "not b's lease";
  // Replica a stops renewing (it died): after 4900 replica b takes the job.
  ASSERT_TRUE(repo_.ClaimNextJob(5000, JobLease{"replica-b/w0", 2000}, &b, &claimed).ok());
  ASSERT_TRUE(claimed);
  EXPECT_EQ(b.id, a.id);
  EXPECT_EQ(b.attempts, 2);
  EXPECT_EQ(b.lease_owner, "replica-b/w0");
  // a, late, can neither renew, report progress, store nor fail the job.
  EXPECT_TRUE(repo_.RenewJobLease(a.id, "replica-a/w0", 5100, 2000).not_found());
  EXPECT_TRUE(repo_.SetJobProgress(a.id, 0.5, "replica-a/w0").not_found());
  Id est = 0;
  const NewEstimate e{ins.record_id, 30000, 200, 29600, 30400, 8000, 100, "{}"};
  EXPECT_TRUE(repo_.CompleteJobWithEstimate(a.id, e, 5200, &est, "replica-a/w0").not_found());
  EXPECT_TRUE(repo_.FailJob(a.id, "late", 5200, "replica-a/w0").not_found());
  ASSERT_TRUE(repo_.CompleteJobWithEstimate(b.id, e, 5300, &est, "replica-b/w0").ok());
  EXPECT_EQ(CountRows(db_, "estimate"), 1);
  Job done;
  ASSERT_TRUE(repo_.GetJob(f.org, a.id, &done).ok());
  EXPECT_EQ(done.state, JobState::kDone);
  EXPECT_FALSE(done.lease_expires_at_unix_ms.has_value()) << "a finished job holds no lease";
}

// Of several replicas reading the same due delivery, one claims the attempt;
// after its claim expired (the replica died before logging it) another may
// make it; once logged it is claimed by nobody.
TEST_P(RepositoryTest, OneReplicaClaimsEachDeliveryAttempt) {
  const Fixture f = MakeFixture(repo_, "Claim Row Estate");
  Id hook = 0, alert = 0;
  ASSERT_TRUE(repo_.CreateWebhook(f.org, "https://hooks.example.invalid/t", "s3cret", 10, &hook).ok());
  ASSERT_TRUE(
      repo_.RaiseAlert(f.org, {f.member, std::nullopt, "force-residual", "m", "{}"}, 20, &alert).ok());
  std::vector<Repository::DueDelivery> due;
  ASSERT_TRUE(repo_.DueDeliveries(30, 10, &due).ok());
  ASSERT_EQ(due.size(), 1u);
  bool a = false, b = false;
  ASSERT_TRUE(repo_.ClaimDelivery(due[0], "replica-a", 30, 1000, &a).ok());
  ASSERT_TRUE(repo_.ClaimDelivery(due[0], "replica-b", 40, 1000, &b).ok());
  EXPECT_TRUE(a);
  EXPECT_FALSE(b) << "replica a's claim holds until 1030";
  ASSERT_TRUE(repo_.ClaimDelivery(due[0], "replica-b", 1030, 1000, &b).ok());
  EXPECT_TRUE(b) << "expired claim taken over";
  Id d = 0;
  ASSERT_TRUE(repo_.RecordDelivery(f.org, {0, hook, alert, 1, 1100, 200, "", true, std::nullopt}, &d).ok());
  ASSERT_TRUE(repo_.ClaimDelivery(due[0], "replica-c", 5000, 1000, &b).ok());
  EXPECT_FALSE(b) << "attempt 1 is logged";
}

// RaiseAlertOnce(unless_standing): a rule with an open or acknowledged
// alert for the member raises no other, whichever estimate fires it.
TEST_P(RepositoryTest, AStandingAlertOfTheRuleBlocksAnotherForTheMember) {
  const Fixture f = MakeFixture(repo_, "Standing Rule Trust");
  Id est[2] = {};
  for (int i = 0; i < 2; ++i) {
    RecordInsertResult ins;
    ASSERT_TRUE(repo_.InsertRecord(f.org, SmallRecord(f.member, 10 + i, 100 + i), 1, &ins).ok());
    Job j;
    bool claimed = false;
    ASSERT_TRUE(repo_.ClaimNextJob(2, &j, &claimed).ok());
    ASSERT_TRUE(
        repo_.CompleteJobWithEstimate(j.id, {ins.record_id, 1, 0, 0, 2, 1, 0, "{}"}, 3, &est[i]).ok());
  }
  Id first = 0, second = 0;
  bool created = false;
  NewAlert alert{f.member, est[0], "force-cusum", "inspect", "{}"};
  ASSERT_TRUE(repo_.RaiseAlertOnce(f.org, alert, 10, &first, &created, true).ok());
  EXPECT_TRUE(created);
  alert.estimate_id = est[1];
  ASSERT_TRUE(repo_.RaiseAlertOnce(f.org, alert, 11, &second, &created, true).ok());
  EXPECT_FALSE(created);
  EXPECT_EQ(second, first);
  ASSERT_TRUE(repo_.ResolveAlert(f.org, first, 12).ok());
  ASSERT_TRUE(repo_.RaiseAlertOnce(f.org, alert, 13, &second, &created, true).ok());
  EXPECT_TRUE(created) << "resolved: the condition may be raised again";
}

}  // namespace
}  // namespace taut::storage
