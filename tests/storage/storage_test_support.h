// Shared helpers of the storage suites: a fresh database file per test and
// small builders of valid inputs. Only invented organisations and members.
#pragma once

#include <gtest/gtest.h>
#include <unistd.h>

#include <cstdio>
#include <filesystem>
#include <string>

#include "storage/database.h"
#include "storage/migrations.h"
#include "storage/repository.h"

namespace taut::storage::testing {

// A database file in the temp directory, unique per test, removed (with
// its -wal and -shm companions) on destruction.
class TempDbFile {
 public:
  TempDbFile() {
    const auto* info = ::testing::UnitTest::GetInstance()->current_test_info();
    std::string name = std::string("taut-") + info->test_suite_name() + "-" + info->name() + "-" +
                       std::to_string(::getpid()) + ".db";
    for (char& c : name) {
      if (c == '/') c = '_';
    }
    path_ = (std::filesystem::temp_directory_path() / name).string();
    Remove();
  }
  ~TempDbFile() { Remove(); }
  const std::string& path() const { return path_; }

 private:
  void Remove() {
    std::filesystem::remove(path_);
    std::filesystem::remove(path_ + "-wal");
    std::filesystem::remove(path_ + "-shm");
  }
  std::string path_;
};

// 64 lowercase hex digits derived from n (storage treats the hash as an
// opaque caller-supplied string, so any well-formed value will do).
inline std::string Hex64(unsigned long long n) {
  char buf[65];
  std::snprintf(buf, sizeof buf, "%064llx", n);
  return buf;
}

// A small valid record: 3 channels x 4 samples at 200 Hz.
inline NewRecord SmallRecord(Id member_id, unsigned long long content, std::int64_t recorded_at_unix_ms) {
  NewRecord r;
  r.member_id = member_id;
  r.recorded_at_unix_ms = recorded_at_unix_ms;
  r.temperature_c = 12.5;
  r.sample_rate_hz = 200.0;
  r.channels = {"a1", "a2", "a3"};
  r.samples = {0.01, -0.02, 0.03, 0.5, -0.25, 0.125, 1.0, 2.0, -3.0, 1e-3, -1e-4, 7.5};
  r.content_sha256 = Hex64(content);
  r.samples_sha256 = Hex64(content + 1000000);
  return r;
}

// Row count of a table (name is a test constant, never user input).
inline long long CountRows(Database& db, const std::string& table) {
  std::string v;
  const StorageStatus s = db.QueryText("SELECT count(*) FROM " + table + ";", &v);
  EXPECT_TRUE(s.ok()) << s.message;
  return v.empty() ? -1 : std::stoll(v);
}

// An organisation with one structure and one member, for tests that need a
// place to put records.
struct Fixture {
  Id org = 0, structure = 0, member = 0;
};

inline Fixture MakeFixture(Repository& repo, const std::string& org_name) {
  Fixture f;
  EXPECT_TRUE(repo.CreateOrganisation(org_name, 1000, &f.org).ok());
  EXPECT_TRUE(repo.CreateStructure(f.org, "Old Maltings east hall", "", 1000, &f.structure).ok());
  const StorageStatus s = repo.CreateMember(f.org, f.structure, "east-tie-2",
                                            R"({"id":"east-tie-2","length_m":6.2})", 1000, &f.member);
  EXPECT_TRUE(s.ok()) << s.message;
  return f;
}

}  // namespace taut::storage::testing
