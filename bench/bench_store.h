// Shared by the storage and service benchmarks: a database file holding
// one member with 100,000 estimates (and their records and jobs), plus a
// second member in another organisation with as many, and per-call timing.
#pragma once

#include <benchmark/benchmark.h>
#include <sqlite3.h>

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <string>
#include <vector>

#include "storage/migrations.h"
#include "storage/repository.h"

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

inline void Check(const taut::storage::StorageStatus& s, const char* what) {
  if (!s.ok()) {
    std::fprintf(stderr, "%s: %s\n", what, s.message.c_str());
    std::abort();
  }
}

// A database file holding one member with kEstimates estimates (and their
// records and jobs), plus a second member in another organisation with
// as many, so that scoping is exercised. Built once per process with raw
// bulk inserts in one transaction (setup, not measured).
struct Store {
  std::string path;
  Id org = 0, member = 0;

  explicit Store(const std::string& file_name) {
    path = (std::filesystem::temp_directory_path() / file_name).string();
    for (const char* suffix : {"", "-wal", "-shm"}) std::filesystem::remove(path + suffix);
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
    // A realistic result object size (~1.5 kB of JSON).
    const std::string json = "{\"axial_force_n\":{\"value\":30000}," + std::string(1500, ' ') + "}";
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
    for (const char* suffix : {"", "-wal", "-shm"}) std::filesystem::remove(path + suffix);
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
