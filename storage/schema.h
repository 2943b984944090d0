// The SQLite schema of SqliteStore and its migrations. The schema version is PRAGMA user_version:
// version v means that the first v steps of kMigrations have been applied. Internal to storage/.
//
// To change the schema, append one step to kMigrations in schema.cc (a string of SQL statements);
// kSchemaVersion follows from the list's length, and Migrate() brings every older database up to it
// on open. Never edit or reorder a step that has been released: databases already carry it.
#ifndef OGIVE_STORAGE_SCHEMA_H_
#define OGIVE_STORAGE_SCHEMA_H_

#include <cstdint>

#include "absl/status/status.h"
#include "absl/types/span.h"
#include "storage/sqlite_connection.h"

namespace ogive::storage::internal {

// Every migration step, oldest first; step i (0-based) takes the schema from version i to i + 1.
absl::Span<const char* const> Migrations();

// The version a database has once Migrations() are all applied.
int64_t SchemaVersion();

// Brings the database of `writer` up to steps.size(): reads user_version, then applies the missing
// steps and sets user_version in one BEGIN IMMEDIATE transaction (all or nothing). Returns
// FAILED_PRECONDITION naming both versions when the database is newer than `steps` knows, and the
// mapped SQLite error (the database unchanged) when a step fails. `steps` is a parameter so that
// tests can migrate through lists of their own; the store passes Migrations().
// REQUIRES: `writer` is the store's only writing connection and no transaction is open on it.
absl::Status Migrate(Connection& writer, absl::Span<const char* const> steps);

// Checks, without writing, that a database read through `reader` is exactly at steps.size():
// FAILED_PRECONDITION naming both versions when it is older (it needs a writable open to migrate)
// or newer.
absl::Status CheckVersion(Connection& reader, absl::Span<const char* const> steps);

}  // namespace ogive::storage::internal

#endif  // OGIVE_STORAGE_SCHEMA_H_
