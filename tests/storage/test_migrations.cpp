// Schema migrations: from an empty file, from every earlier version, a
// failing step, a newer database, concurrent openers.
//
// Reference for the behaviour checked: SQLite documentation, "Transaction"
// (a transaction is atomic: all of it or none), "ALTER TABLE" (table rebuild
// procedure) and "PRAGMA table_info", sqlite.org.
#include <gtest/gtest.h>

#include <set>
#include <thread>
#include <vector>

#include "storage/statement.h"
#include "tests/storage/storage_test_support.h"

namespace taut::storage {
namespace {

using testing::CountRows;
using testing::TempDbFile;

std::set<std::string> Tables(Database& db) {
  internal::Statement s(db, "SELECT name FROM sqlite_master WHERE type = 'table' ORDER BY name");
  std::set<std::string> out;
  while (s.Step() == SQLITE_ROW) out.insert(s.Text(0));
  return out;
}

std::set<std::string> Columns(Database& db, const std::string& table) {
  internal::Statement s(db, "SELECT name FROM pragma_table_info(?1)");
  s.Bind(1, table);
  std::set<std::string> out;
  while (s.Step() == SQLITE_ROW) out.insert(s.Text(0));
  return out;
}

int Version(Database& db) {
  int v = -1;
  EXPECT_TRUE(SchemaVersion(db, &v).ok());
  return v;
}

void ExpectLatestSchema(Database& db) {
  EXPECT_EQ(Version(db), LatestSchemaVersion());
  const std::set<std::string> tables = Tables(db);
  for (const char* t :
       {"organisation", "api_token", "structure", "member", "member_version", "record", "job", "estimate",
        "alert", "webhook_subscription", "webhook_delivery", "schema_migration", "member_log"}) {
    EXPECT_TRUE(tables.count(t)) << "missing table " << t;
  }
  EXPECT_FALSE(tables.count("estimate_v2")) << "the rebuild's scratch table must be gone";
  const std::set<std::string> est = Columns(db, "estimate");
  for (const char* c :
       {"member_version", "temperature_c", "force_std_n", "bending_stiffness_std_nm2", "verdict_code"}) {
    EXPECT_TRUE(est.count(c)) << "estimate lacks " << c;
  }
  // PRAGMA foreign_key_check returns one row per violation: none allowed.
  std::string v;
  ASSERT_TRUE(db.QueryText("PRAGMA foreign_key_check;", &v).ok());
  EXPECT_EQ(v, "");
  ASSERT_TRUE(db.QueryText("PRAGMA integrity_check;", &v).ok());
  EXPECT_EQ(v, "ok");
}

TEST(Migrations, EmptyFileReachesLatestVersionWithOneRowPerStep) {
  TempDbFile file;
  Database db;
  ASSERT_TRUE(db.Open(file.path()).ok());
  EXPECT_EQ(Version(db), 0);
  const StorageStatus s = Migrate(db);
  ASSERT_TRUE(s.ok()) << s.message;
  ExpectLatestSchema(db);
  EXPECT_EQ(CountRows(db, "schema_migration"), LatestSchemaVersion());
  // Applying again is a no-op (no new step rows, same version).
  ASSERT_TRUE(Migrate(db).ok());
  EXPECT_EQ(CountRows(db, "schema_migration"), LatestSchemaVersion());
}

// Fills a database that stopped at `version` with rows valid for that
// version, using raw SQL of that version's schema (the repositories speak
// only the latest one).
void SeedAtVersion(Database& db, int version) {
  ASSERT_TRUE(
      db.Exec("INSERT INTO organisation (id, name, created_at_unix_ms) VALUES (1, 'Tidewater Works', 1);"
              "INSERT INTO structure (id, organisation_id, name, created_at_unix_ms) "
              "  VALUES (1, 1, 'North shed', 1);"
              "INSERT INTO member (id, organisation_id, structure_id, external_id, current_version, "
              "  created_at_unix_ms) VALUES (1, 1, 1, 'north-tie-1', 2, 1);"
              "INSERT INTO member_version VALUES (1, 1, '{\"v\":1}', 1), (1, 2, '{\"v\":2}', 2);"
              "INSERT INTO record (id, organisation_id, member_id, member_version, recorded_at_unix_ms, "
              "  temperature_c, units, excitation, sample_rate_hz, channels, channel_count, sample_count, "
              "  sample_format, samples, content_sha256, samples_sha256, created_at_unix_ms) "
              "  VALUES (1, 1, 1, 2, 5000, 17.5, 'm/s2', 'ambient', 100, 'a1', 1, 1, 'f32le', "
              "  x'0000803f', printf('%064d', 1), printf('%064d', 2), 3);"
              "INSERT INTO job (id, organisation_id, record_id, state, progress, created_at_unix_ms) "
              "  VALUES (1, 1, 1, 'done', 1, 3);")
          .ok());
  if (version == 1) {
    ASSERT_TRUE(db.Exec("INSERT INTO estimate (id, organisation_id, member_id, record_id, job_id, "
                        "  measured_at_unix_ms, axial_force_n, force_ci95_low_n, force_ci95_high_n, "
                        "  bending_stiffness_nm2, result_json, created_at_unix_ms) "
                        "  VALUES (1, 1, 1, 1, 1, 5000, 30000, 29000, 31000, 8000, '{}', 4);")
                    .ok());
  } else {
    ASSERT_TRUE(
        db.Exec("INSERT INTO estimate (id, organisation_id, member_id, member_version, record_id, job_id, "
                "  measured_at_unix_ms, temperature_c, axial_force_n, force_std_n, force_ci95_low_n, "
                "  force_ci95_high_n, bending_stiffness_nm2, result_json, created_at_unix_ms) "
                "  VALUES (1, 1, 1, 2, 1, 1, 5000, 17.5, 30000, 510.2042, 29000, 31000, 8000, "
                "  '{\"end_fixity\": {\"left\": {\"value\": 0.4}}, \"verdict\": {\"code\": \"unusable\"}}', "
                "4);")
            .ok());
  }
}

TEST(Migrations, EveryEarlierVersionUpgradesAndKeepsItsRows) {
  for (int from = 1; from < LatestSchemaVersion(); ++from) {
    SCOPED_TRACE("from version " + std::to_string(from));
    TempDbFile file;
    {
      Database db;
      ASSERT_TRUE(db.Open(file.path()).ok());
      const StorageStatus s = Migrate(db, from);
      ASSERT_TRUE(s.ok()) << s.message;
      EXPECT_EQ(Version(db), from);
      if (from < 3) {
        EXPECT_FALSE(Tables(db).count("alert"));
      }
      SeedAtVersion(db, from);
    }
    Database db;  // a later start of the service
    const StorageStatus s = OpenAndMigrate(db, file.path());
    ASSERT_TRUE(s.ok()) << s.message;
    ExpectLatestSchema(db);
    EXPECT_EQ(CountRows(db, "schema_migration"), LatestSchemaVersion());

    Repository repo(db);
    Estimate e;
    ASSERT_TRUE(repo.GetEstimate(1, 1, &e).ok());
    EXPECT_EQ(e.axial_force_n, 30000.0);
    EXPECT_EQ(e.member_version, 2) << "backfilled from the record";
    ASSERT_TRUE(e.temperature_c.has_value());
    EXPECT_EQ(*e.temperature_c, 17.5);
    // From version 1, force_std_n is backfilled as the half-width of the
    // 95 % interval over z_0.975 = 1.959964 (scipy.stats.norm.ppf(0.975) =
    // 1.959963985): 1000 / 1.959964 = 510.2135 N; tolerance 0.01 N covers
    // the 7-digit quantile. From version 2 on the column existed and the
    // seeded value must pass the rebuild-free upgrade unchanged.
    ASSERT_TRUE(e.force_std_n.has_value());
    if (from == 1) {
      EXPECT_NEAR(*e.force_std_n, 510.2135, 0.01);
    } else {
      EXPECT_EQ(*e.force_std_n, 510.2042);
    }
    Record r;
    ASSERT_TRUE(repo.GetRecord(1, 1, &r).ok());
    ASSERT_EQ(r.samples.size(), 1u);
    EXPECT_EQ(r.samples[0], 1.0) << "x'0000803f' is binary32 1.0 little-endian (IEEE 754-2008, 3.4)";
    // The upgraded database accepts new rows of the latest schema.
    NewAlert a{1, 1, "force-residual", "inspect", "{}"};
    Id alert = 0;
    EXPECT_TRUE(repo.RaiseAlert(1, a, 10, &alert).ok());
    // Step 5: the end fixities of results stored before it are extracted.
    std::vector<Repository::FixityRow> fixity;
    ASSERT_TRUE(repo.FixityHistory(1, 1, 0, 10000, &fixity).ok());
    ASSERT_EQ(fixity.size(), 1u);
    // (From version 5 on the seed's raw INSERT leaves the column empty:
    // the repository fills it at insert, the step-5 backfill ran before.)
    EXPECT_EQ(fixity[0].end_fixity_json, from == 1 || from >= 5 ? "" : R"({"left":{"value":0.4}})");
    // Step 7: the verdict of results stored before it is extracted (the
    // version-1 seed has none: "", which counts as usable; from version 7
    // on the seed's raw INSERT leaves the column empty, as for step 5).
    EXPECT_EQ(e.verdict_code, from == 1 || from >= 7 ? "" : "unusable");
    // Step 4: estimates stored before it count as drift-checked (their
    // alerts, if any, were the business of the service that stored them),
    // so an upgrade does not re-run the rules over the whole history.
    std::vector<Estimate> pending;
    ASSERT_TRUE(repo.PendingDriftChecks(10, &pending).ok());
    // (From version 4 the seeded row was stored unchecked and stays pending.)
    EXPECT_EQ(pending.size(), from < 4 ? 0u : 1u);
    // ... and a rule fires once per estimate: the alert above (rule
    // force-residual at estimate 1) is found, a new rule is created once.
    Id first = 0, again = 0;
    bool created = true;
    ASSERT_TRUE(repo.RaiseAlertOnce(1, a, 11, &first, &created).ok());
    EXPECT_FALSE(created);
    EXPECT_EQ(first, alert);
    a.rule = "ei-residual";
    ASSERT_TRUE(repo.RaiseAlertOnce(1, a, 11, &first, &created).ok());
    EXPECT_TRUE(created);
    ASSERT_TRUE(repo.RaiseAlertOnce(1, a, 12, &again, &created).ok());
    EXPECT_FALSE(created);
    EXPECT_EQ(again, first);
  }
}

TEST(Migrations, FailingStepLeavesThePreviousVersion) {
  TempDbFile file;
  Database db;
  ASSERT_TRUE(db.Open(file.path()).ok());
  ASSERT_TRUE(Migrate(db, 2).ok());
  // A table of step 3's name already exists, so CREATE TABLE alert fails
  // half-way through the step (after nothing, but webhook_* come later).
  ASSERT_TRUE(db.Exec("CREATE TABLE webhook_delivery (x INTEGER);").ok());
  const StorageStatus s = Migrate(db);
  EXPECT_FALSE(s.ok());
  EXPECT_NE(s.message.find("schema step 3"), std::string::npos) << s.message;
  EXPECT_NE(s.message.find("webhook_delivery"), std::string::npos) << s.message;
  EXPECT_EQ(Version(db), 2);
  // Step 3 created `alert` and `webhook_subscription` before failing: the
  // rollback removed them (SQLite DDL is transactional).
  EXPECT_FALSE(Tables(db).count("alert"));
  EXPECT_FALSE(Tables(db).count("webhook_subscription"));
  // Repaired, the upgrade completes.
  ASSERT_TRUE(db.Exec("DROP TABLE webhook_delivery;").ok());
  ASSERT_TRUE(Migrate(db).ok());
  ExpectLatestSchema(db);
}

TEST(Migrations, NewerDatabaseIsRefused) {
  TempDbFile file;
  Database db;
  ASSERT_TRUE(OpenAndMigrate(db, file.path()).ok());
  ASSERT_TRUE(db.Exec("INSERT INTO schema_migration VALUES (99, 'from the future', 0);").ok());
  const StorageStatus s = Migrate(db);
  EXPECT_EQ(s.sqlite_code, SQLITE_MISMATCH);
  EXPECT_NE(s.message.find("99"), std::string::npos) << s.message;
  EXPECT_EQ(Migrate(db, 0).sqlite_code, SQLITE_MISUSE);
}

TEST(Migrations, ConcurrentOpenersApplyEachStepOnce) {
  TempDbFile file;
  constexpr int kOpeners = 4;
  std::vector<StorageStatus> results(kOpeners);
  std::vector<std::thread> threads;
  for (int i = 0; i < kOpeners; ++i) {
    threads.emplace_back([&, i] {
      Database db;
      results[i] = OpenAndMigrate(db, file.path());
    });
  }
  for (auto& t : threads) t.join();
  for (const auto& r : results) EXPECT_TRUE(r.ok()) << r.message;
  Database db;
  ASSERT_TRUE(db.Open(file.path()).ok());
  ExpectLatestSchema(db);
  EXPECT_EQ(CountRows(db, "schema_migration"), LatestSchemaVersion());
}

}  // namespace
}  // namespace taut::storage
