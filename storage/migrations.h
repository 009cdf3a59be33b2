// Versioned schema migrations of the taut database.
//
// The schema is built by a fixed, append-only list of steps (version 1, 2,
// ...). Table `schema_migration(version, name, applied_at_unix_ms)` records
// each step applied; the database version is its largest `version` (0 for an
// empty file). Each step runs in its own BEGIN IMMEDIATE transaction together
// with its row in `schema_migration`, so a failed step leaves the database
// at the previous version, never between two. The version is re-read inside
// the transaction, so two processes opening the same file at once apply each
// step exactly once.
//
// Released steps are never edited: a change to the schema is a new step.
//   1  organisation, api_token, structure, member, member_version, record,
//      job, estimate (force and EI columns)
//   2  estimate gains member_version, temperature_c, force_std_n,
//      bending_stiffness_std_nm2 (backfilled from the record) and the
//      (organisation, member, time) index of the force-history query
//   3  alert, webhook_subscription, webhook_delivery
//   4  drift checks that survive a restart, one alert per rule and
//      estimate, member_drift_settings
//   5  estimate.end_fixity_json extracted from the result
//   6  record.reader_notes (dialect, calibration applied)
//   7  estimate.verdict_code (in the history index), member_log
//   8  job leases (owner, expiry) and webhook delivery claims: several
//      replicas on one database
// Every step has a PostgreSQL twin of the same number
// (postgres_migrations.h). Every call below works on both backends: on a
// Database opened with a postgresql:// URI it runs the PostgreSQL steps.
#pragma once

#include <string>

#include "storage/database.h"

namespace taut::storage {

// The version a fully migrated database has (the number of steps).
int LatestSchemaVersion();

// Reads the version of `db` (0 when no step has been applied).
StorageStatus SchemaVersion(Database& db, int* version);

// Applies every step above the current version up to `target_version`
// (1..LatestSchemaVersion()). A database newer than `target_version` is an
// error (SQLITE_MISMATCH): this build does not know its schema.
StorageStatus Migrate(Database& db, int target_version);
inline StorageStatus Migrate(Database& db) { return Migrate(db, LatestSchemaVersion()); }

// Database::Open followed by Migrate(): what server/ calls at start-up.
StorageStatus OpenAndMigrate(Database& db, const std::string& path);

}  // namespace taut::storage
