// BackupDatabase: a consistent copy of an ogive database, taken with SQLite's online backup API
// (sqlite3_backup_*) while ogived may be running and writing it. A file copy of a live database is
// not a backup: it can catch the main file and its write-ahead log at different moments.
//
// The source is opened read-only, so the backup never writes or checkpoints the live file (the
// store's writer stays the only connection that does). The copy is one read transaction: it holds
// the database as of the moment the copy began, every committed write before that and none after.
// The copy is written next to the destination under a temporary name, set to journal_mode=DELETE
// (a single self-contained file), checked with PRAGMA integrity_check, synced, and renamed into
// place; a failed backup leaves no destination file.
//
// Plain function; no shared state.
#ifndef OGIVE_STORAGE_BACKUP_H_
#define OGIVE_STORAGE_BACKUP_H_

#include <cstdint>
#include <string>

#include "absl/status/statusor.h"

namespace ogive::storage {

struct BackupReport {
  int64_t pages = 0;           // database pages copied
  int64_t bytes = 0;           // size of the backup file
  int64_t schema_version = 0;  // PRAGMA user_version of the copy
};

// Copies the database at `from` into a new file `to`. INVALID_ARGUMENT for an empty path or the
// same path twice; ALREADY_EXISTS when `to` exists (nothing is overwritten); NOT_FOUND when `from`
// does not exist; DATA_LOSS when `from` is not a database or the copy fails its integrity check;
// UNAVAILABLE when the source stays locked or a file cannot be written.
absl::StatusOr<BackupReport> BackupDatabase(const std::string& from, const std::string& to);

}  // namespace ogive::storage

#endif  // OGIVE_STORAGE_BACKUP_H_
