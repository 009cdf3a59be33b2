// Versioned schema of the PostgreSQL backend.
//
// The version numbers are the SQLite schema's (migrations.h): a PostgreSQL
// database at version v has the same tables, columns, keys and checks as an
// SQLite file at version v, in PostgreSQL's types (BIGINT identity keys,
// DOUBLE PRECISION, BYTEA for the samples). PostgreSQL support began at
// version 5, so its first step is a baseline that creates the version-5
// schema in one go; every later SQLite step gets a PostgreSQL twin with the
// same number (tests/storage/test_postgres.cpp compares the two schemas
// column by column, so a step written for one backend only fails there).
//
// Several replicas may start at once against one database: each step runs
// in one transaction that first takes a transaction-level advisory lock
// (pg_advisory_xact_lock, PostgreSQL documentation section 9.27.10) and
// re-reads the version under it, so every step is applied exactly once and
// a failed step leaves the database at the previous version.
#pragma once

#include "storage/postgres.h"

namespace taut::storage {

// The version a fully migrated PostgreSQL database has; equals
// LatestSchemaVersion() of the SQLite side.
int PgLatestSchemaVersion();

// The database's version (0 for a database without taut's tables).
StorageStatus PgSchemaVersion(PgConnection& db, int* version);

// Applies every missing step up to `target_version` (5, the baseline, ..
// PgLatestSchemaVersion()). A database at a newer version than this build
// knows is refused (SQLITE_MISMATCH) with a message naming both versions,
// and nothing is written to it.
StorageStatus PgMigrate(PgConnection& db, int target_version);
inline StorageStatus PgMigrate(PgConnection& db) { return PgMigrate(db, PgLatestSchemaVersion()); }

// PgConnection::Open followed by PgMigrate: what a replica does at start.
StorageStatus PgOpenAndMigrate(PgConnection& db, const std::string& uri);

}  // namespace taut::storage
