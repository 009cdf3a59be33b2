// Runs a storage test on both backends: gtest value-parametrised fixtures
// get a fresh, migrated database per test, an SQLite file or a PostgreSQL
// database on the one server this test binary starts on first use
// (postgres_server.h; stopped when the binary exits). A PostgreSQL database
// is created from a migrated template (CREATE DATABASE ... TEMPLATE, a file
// copy), so a test costs tens of milliseconds, not a migration.
#pragma once

#include <gtest/gtest.h>

#include <atomic>
#include <memory>
#include <string>

#include "storage/database.h"
#include "storage/migrations.h"
#include "storage/postgres.h"
#include "tests/storage/postgres_server.h"
#include "tests/storage/storage_test_support.h"

namespace taut::storage::testing {

enum class Backend { kSqlite, kPostgres };

inline std::string BackendName(const ::testing::TestParamInfo<Backend>& info) {
  return info.param == Backend::kSqlite ? "Sqlite" : "Postgres";
}

// The binary's PostgreSQL server, started at the first call; *error says
// why when it could not start (a test failure, never a skip).
inline taut::testing::PostgresServer* SharedPostgres(std::string* error) {
  static std::string start_error;
  static std::unique_ptr<taut::testing::PostgresServer> server = [] {
    auto s = std::make_unique<taut::testing::PostgresServer>();
    if (!s->Start(&start_error)) s.reset();
    return s;
  }();
  *error = start_error;
  return server.get();
}

// A fresh PostgreSQL database on the shared server; migrated (a copy of a
// migrated template) unless `migrated` is false. Returns its URI, or "" with
// a test failure.
inline std::string FreshPostgresDatabase(bool migrated = true) {
  std::string error;
  taut::testing::PostgresServer* server = SharedPostgres(&error);
  if (server == nullptr) {
    ADD_FAILURE() << "PostgreSQL server: " << error;
    return "";
  }
  static std::atomic<int> counter{0};
  static const bool template_ready = [&] {
    PgConnection admin;
    if (!admin.Open(server->Uri("postgres")).ok()) return false;
    if (!admin.Exec("CREATE DATABASE taut_template").ok()) return false;
    Database db;
    return OpenAndMigrate(db, server->Uri("taut_template")).ok();
  }();
  if (migrated && !template_ready) {
    ADD_FAILURE() << "cannot create the migrated template database";
    return "";
  }
  const std::string name = "t" + std::to_string(::getpid()) + "_" + std::to_string(++counter);
  PgConnection admin;
  StorageStatus s = admin.Open(server->Uri("postgres"));
  if (s.ok()) s = admin.Exec("CREATE DATABASE " + name + (migrated ? " TEMPLATE taut_template" : ""));
  if (!s.ok()) {
    ADD_FAILURE() << "CREATE DATABASE " << name << ": " << s.message;
    return "";
  }
  return server->Uri(name);
}

// A migrated database of the test's backend, open in db().
class BackendTest : public ::testing::TestWithParam<Backend> {
 protected:
  void SetUp() override {
    path_ = GetParam() == Backend::kSqlite ? file_.path() : FreshPostgresDatabase();
    ASSERT_FALSE(path_.empty());
    const StorageStatus s = OpenAndMigrate(db_, path_);
    ASSERT_TRUE(s.ok()) << s.message;
  }
  bool postgres() const { return GetParam() == Backend::kPostgres; }
  // A binary literal of one zero byte in the backend's SQL.
  std::string ZeroByteLiteral() const { return postgres() ? "'\\x00'::bytea" : "x'00'"; }
  const std::string& path() const { return path_; }

  TempDbFile file_;
  std::string path_;
  Database db_;
};

#define TAUT_BOTH_BACKENDS(suite)                                                           \
  INSTANTIATE_TEST_SUITE_P(Backends, suite,                                                 \
                           ::testing::Values(::taut::storage::testing::Backend::kSqlite,    \
                                             ::taut::storage::testing::Backend::kPostgres), \
                           ::taut::storage::testing::BackendName)

}  // namespace taut::storage::testing
