// Shared by the storage and service benchmarks: a database holding one
// member with 100,000 estimates (and their records and jobs), plus a second
// member in another organisation with as many, and per-call timing.
//
// Backend: an SQLite file; or, with TAUT_BENCH_POSTGRES=1 in the
// environment, a PostgreSQL database on a server the benchmark starts
// itself (tests/storage/postgres_server.h: initdb in a temporary folder,
// loopback port; Debian postgresql). The same benchmark code then measures
// the PostgreSQL backend, e.g.
//   TAUT_BENCH_POSTGRES=1 build/bench/bench_service --benchmark_filter=ForceQuery
#pragma once

#include <benchmark/benchmark.h>
#include <sqlite3.h>

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <string>
#include <utility>
#include <vector>

#include "storage/migrations.h"
#include "storage/postgres.h"
#include "storage/repository.h"
#include "tests/storage/postgres_server.h"

namespace taut_bench {

using taut::storage::Database;
using taut::storage::Id;
using taut::storage::Repository;

inline constexpr int kEstimates = 100000;
inline constexpr std::int64_t kSpacing_ms = 15 * 60 * 1000;  // one estimate every 15 min: ~1042 days
inline constexpr std::int64_t kStart_ms = 1764547200000;     // 2025-12-01T00:00:00Z
inline constexpr std::int64_t kDay_ms = 86400000;

inline std::string Hex64(unsigned long long n) {
  char buf[65];
  std::snprintf(buf, sizeof buf, "%064llx", n);
  return buf;
}

// exit, not abort: static destructors then stop a PostgreSQL server the
// benchmark started (NewPostgresDatabase) instead of leaving it running.
inline void Check(const taut::storage::StorageStatus& s, const char* what) {
  if (!s.ok()) {
    std::fprintf(stderr, "%s: %s\n", what, s.message.c_str());
    std::exit(1);
  }
}

inline bool BenchOnPostgres() {
  const char* v = std::getenv("TAUT_BENCH_POSTGRES");
  return v != nullptr && std::string(v) == "1";
}

// The benchmark's PostgreSQL server (started at the first call, stopped at
// exit) and a new database on it (a copy of `template_db` if given);
// aborts when the server cannot start.
inline std::string NewPostgresDatabase(const std::string& name, const std::string& template_db = "") {
  static taut::testing::PostgresServer server;
  static const bool started = [] {
    std::string error;
    if (!server.Start(&error)) std::fprintf(stderr, "PostgreSQL: %s\n", error.c_str());
    return server.port() > 0 && error.empty();
  }();
  if (!started) std::exit(1);
  taut::storage::PgConnection admin;
  Check(admin.Open(server.Uri("postgres")), "postgres");
  Check(admin.Exec("CREATE DATABASE " + name + (template_db.empty() ? "" : " TEMPLATE " + template_db)),
        "create database");
  return server.Uri(name);
}

// A database holding one member with kEstimates estimates (and their
// records and jobs), plus a second member in another organisation with
// as many, so that scoping is exercised. Built once per process with raw
// bulk inserts in one transaction (setup, not measured).
struct Store {
  std::string path;
  Id org = 0, member = 0;

  explicit Store(const std::string& file_name) {
    if (BenchOnPostgres()) {
      std::string name = file_name.substr(0, file_name.find('.'));
      for (char& c : name)
        if (c == '-') c = '_';
      path = NewPostgresDatabase(name);
    } else {
      path = (std::filesystem::temp_directory_path() / file_name).string();
      for (const char* suffix : {"", "-wal", "-shm"}) std::filesystem::remove(path + suffix);
    }
    Database db;
    Check(taut::storage::OpenAndMigrate(db, path), "open");
    Repository repo(db);
    Id other_org = 0, s1 = 0, s2 = 0, other_member = 0;
    Check(repo.CreateOrganisation("Bench Estates", 0, &org), "org");
    Check(repo.CreateOrganisation("Other Estates", 0, &other_org), "org");
    Check(repo.CreateStructure(org, "Long Market hall", "", 0, &s1), "structure");
    Check(repo.CreateStructure(other_org, "Quay footbridge", "", 0, &s2), "structure");
    Check(repo.CreateMember(org, s1, "tie-1", "{}", 0, &member), "member");
    Check(repo.CreateMember(other_org, s2, "hanger-1", "{}", 0, &other_member), "member");
    // A realistic result object size (~1.5 kB of JSON).
    const std::string json = "{\"axial_force_n\":{\"value\":30000}," + std::string(1500, ' ') + "}";
    if (db.is_postgres()) {
      LoadPostgres(db, {{org, member}, {other_org, other_member}}, json);
      return;
    }
    Check(db.Exec("BEGIN;"), "begin");
    sqlite3_stmt* rec = nullptr;
    sqlite3_stmt* job = nullptr;
    sqlite3_stmt* est = nullptr;
    sqlite3_prepare_v2(
        db.handle(),
        "INSERT INTO record (organisation_id, member_id, member_version, recorded_at_unix_ms, "
        "temperature_c, units, excitation, sample_rate_hz, channels, channel_count, sample_count, "
        "sample_format, samples, content_sha256, samples_sha256, created_at_unix_ms) VALUES "
        "(?1, ?2, 1, ?3, 10, 'm/s2', 'ambient', 200, 'a1', 1, 1, 'f32le', x'0000803f', ?4, ?4, ?3)",
        -1, &rec, nullptr);
    sqlite3_prepare_v2(db.handle(),
                       "INSERT INTO job (organisation_id, record_id, state, progress, created_at_unix_ms) "
                       "VALUES (?1, ?2, 'done', 1, 0)",
                       -1, &job, nullptr);
    sqlite3_prepare_v2(
        db.handle(),
        "INSERT INTO estimate (organisation_id, member_id, member_version, record_id, job_id, "
        "measured_at_unix_ms, temperature_c, axial_force_n, force_std_n, force_ci95_low_n, "
        "force_ci95_high_n, bending_stiffness_nm2, bending_stiffness_std_nm2, result_json, "
        "created_at_unix_ms) VALUES (?1, ?2, 1, ?3, ?4, ?5, 10, 30000, 200, 29600, 30400, 8000, "
        "100, ?6, ?5)",
        -1, &est, nullptr);
    unsigned long long n = 0;
    for (const auto& [o, m] : {std::pair{org, member}, std::pair{other_org, other_member}}) {
      for (int i = 0; i < kEstimates; ++i) {
        const std::int64_t t = kStart_ms + i * kSpacing_ms;
        const std::string h = Hex64(++n);
        sqlite3_bind_int64(rec, 1, o);
        sqlite3_bind_int64(rec, 2, m);
        sqlite3_bind_int64(rec, 3, t);
        sqlite3_bind_text(rec, 4, h.c_str(), -1, SQLITE_TRANSIENT);
        if (sqlite3_step(rec) != SQLITE_DONE) std::abort();
        sqlite3_reset(rec);
        const Id record = sqlite3_last_insert_rowid(db.handle());
        sqlite3_bind_int64(job, 1, o);
        sqlite3_bind_int64(job, 2, record);
        if (sqlite3_step(job) != SQLITE_DONE) std::abort();
        sqlite3_reset(job);
        const Id job_id = sqlite3_last_insert_rowid(db.handle());
        sqlite3_bind_int64(est, 1, o);
        sqlite3_bind_int64(est, 2, m);
        sqlite3_bind_int64(est, 3, record);
        sqlite3_bind_int64(est, 4, job_id);
        sqlite3_bind_int64(est, 5, t);
        sqlite3_bind_text(est, 6, json.c_str(), -1, SQLITE_STATIC);
        if (sqlite3_step(est) != SQLITE_DONE) std::abort();
        sqlite3_reset(est);
      }
    }
    sqlite3_finalize(rec);
    sqlite3_finalize(job);
    sqlite3_finalize(est);
    Check(db.Exec("COMMIT; ANALYZE;"), "commit");
    // Fold the bulk load into the main file so the queries read the b-trees
    // directly, as a long-running service does after its checkpoints.
    Check(db.Exec("PRAGMA wal_checkpoint(TRUNCATE);"), "checkpoint");
  }
  ~Store() {
    if (BenchOnPostgres()) return;  // the server and its folder go at exit
    for (const char* suffix : {"", "-wal", "-shm"}) std::filesystem::remove(path + suffix);
  }

  // The same rows on PostgreSQL, each table filled by one INSERT ... SELECT
  // over generate_series; then VACUUM ANALYZE, so the history query can be
  // answered by an index-only scan as on a database in service.
  static void LoadPostgres(Database& db, const std::vector<std::pair<Id, Id>>& members,
                           const std::string& json) {
    unsigned long long base = 0;
    for (const auto& [o, m] : members) {
      const std::string om = std::to_string(o) + ", " + std::to_string(m);
      const std::string t = std::to_string(kStart_ms) + " + i * " + std::to_string(kSpacing_ms);
      Check(
          db.Exec("INSERT INTO record (organisation_id, member_id, member_version, recorded_at_unix_ms, "
                  "temperature_c, units, excitation, sample_rate_hz, channels, channel_count, sample_count, "
                  "sample_format, samples, content_sha256, samples_sha256, created_at_unix_ms) SELECT " +
                  om + ", 1, " + t +
                  ", 10, 'm/s2', 'ambient', 200, 'a1', 1, 1, 'f32le', '\\x0000803f'::bytea, lpad(to_hex(" +
                  std::to_string(base) + " + i), 64, '0'), lpad(to_hex(" + std::to_string(base) +
                  " + i), 64, '0'), " + t + " FROM generate_series(0::bigint, " +
                  std::to_string(kEstimates - 1) + ") AS i"),
          "records");
      base += kEstimates;
      Check(db.Exec("INSERT INTO job (organisation_id, record_id, state, progress, created_at_unix_ms) "
                    "SELECT organisation_id, id, 'done', 1, 0 FROM record WHERE member_id = " +
                    std::to_string(m)),
            "jobs");
      Check(db.Exec("INSERT INTO estimate (organisation_id, member_id, member_version, record_id, job_id, "
                    "measured_at_unix_ms, temperature_c, axial_force_n, force_std_n, force_ci95_low_n, "
                    "force_ci95_high_n, bending_stiffness_nm2, bending_stiffness_std_nm2, result_json, "
                    "created_at_unix_ms) SELECT r.organisation_id, r.member_id, 1, r.id, j.id, "
                    "r.recorded_at_unix_ms, 10, 30000, 200, 29600, 30400, 8000, 100, '" +
                    json +
                    "', r.recorded_at_unix_ms FROM record r JOIN job j ON j.record_id = r.id WHERE "
                    "r.member_id = " +
                    std::to_string(m)),
            "estimates");
    }
    Check(db.Exec("VACUUM ANALYZE"), "vacuum");
  }
};

// Times each call of `query` and reports median and p99 of the calls.
template <typename Query>
void TimedCalls(benchmark::State& state, Query query) {
  std::vector<double> us;
  for (auto _ : state) {
    const auto t0 = std::chrono::steady_clock::now();
    query();
    us.push_back(std::chrono::duration<double, std::micro>(std::chrono::steady_clock::now() - t0).count());
  }
  std::sort(us.begin(), us.end());
  if (!us.empty()) {
    state.counters["median_us"] = us[us.size() / 2];
    state.counters["p99_us"] = us[std::min(us.size() - 1, us.size() * 99 / 100)];
  }
}

}  // namespace taut_bench
