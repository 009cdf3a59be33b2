// Connection settings every taut database relies on (SQLite documentation:
// "PRAGMA foreign_keys", "Write-Ahead Logging", sqlite.org, 2024).
#include <gtest/gtest.h>

#include <filesystem>

#include "storage/database.h"

namespace taut::storage {
namespace {

TEST(Database, OpensFileWithWalAndForeignKeys) {
  const auto path = std::filesystem::temp_directory_path() /
                    ("taut-db-" + std::to_string(::testing::UnitTest::GetInstance()->random_seed()) + ".db");
  std::filesystem::remove(path);
  {
    Database db;
    const StorageStatus s = db.Open(path.string());
    ASSERT_TRUE(s.ok()) << s.message;
    std::string v;
    ASSERT_TRUE(db.QueryText("PRAGMA journal_mode;", &v).ok());
    EXPECT_EQ(v, "wal");
    ASSERT_TRUE(db.QueryText("PRAGMA foreign_keys;", &v).ok());
    EXPECT_EQ(v, "1");
    // Foreign keys are enforced: an orphan row is refused with
    // SQLITE_CONSTRAINT (not silently stored).
    ASSERT_TRUE(db.Exec("CREATE TABLE p(id INTEGER PRIMARY KEY); "
                        "CREATE TABLE c(id INTEGER PRIMARY KEY, p INTEGER NOT NULL REFERENCES p(id));")
                    .ok());
    const StorageStatus orphan = db.Exec("INSERT INTO c(p) VALUES (42);");
    EXPECT_EQ(orphan.sqlite_code, SQLITE_CONSTRAINT);
    EXPECT_NE(orphan.message.find("FOREIGN KEY"), std::string::npos) << orphan.message;
  }
  std::filesystem::remove(path);
  std::filesystem::remove(path.string() + "-wal");
  std::filesystem::remove(path.string() + "-shm");
}

TEST(Database, OpenFailureNamesThePath) {
  Database db;
  const StorageStatus s = db.Open("/nonexistent-dir/sub/taut.db");
  EXPECT_FALSE(s.ok());
  EXPECT_NE(s.message.find("/nonexistent-dir/sub/taut.db"), std::string::npos) << s.message;
}

TEST(Database, SqlErrorsCarryTheCode) {
  Database db;
  ASSERT_TRUE(db.Open(":memory:").ok());
  const StorageStatus s = db.Exec("SELEC 1;");
  EXPECT_EQ(s.sqlite_code, SQLITE_ERROR);
  EXPECT_NE(s.message.find("syntax error"), std::string::npos) << s.message;
}

}  // namespace
}  // namespace taut::storage
