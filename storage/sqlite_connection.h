// Thin RAII wrappers over the SQLite C API for SqliteStore: a Connection owns one sqlite3 handle
// and the statements prepared on it, a Statement owns one prepared statement, and SqliteStatus()
// maps SQLite result codes to absl::Status with the store's error table. Internal to storage/.
//
// Not thread-safe: a Connection (and its statements) is used by one thread at a time; connections
// are opened with SQLITE_OPEN_NOMUTEX, so the caller provides that exclusion.
#ifndef OGIVE_STORAGE_SQLITE_CONNECTION_H_
#define OGIVE_STORAGE_SQLITE_CONNECTION_H_

#include <cstdint>
#include <memory>
#include <string>
#include <vector>

#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "absl/strings/string_view.h"

struct sqlite3;
struct sqlite3_stmt;

// Returns from the calling function when `expr` (an absl::Status) is not OK.
#define OGIVE_STORAGE_RETURN_IF_ERROR(expr)                         \
  do {                                                              \
    if (absl::Status ogive_status_ = (expr); !ogive_status_.ok()) { \
      return ogive_status_;                                         \
    }                                                               \
  } while (false)

namespace ogive::storage::internal {

// Maps a failed SQLite result code to a status: BUSY, LOCKED, IOERR, FULL, READONLY, CANTOPEN (and
// other transient failures) -> UNAVAILABLE; CORRUPT, NOTADB -> DATA_LOSS; UNIQUE and PRIMARY KEY
// constraints -> ALREADY_EXISTS; FOREIGN KEY constraints -> NOT_FOUND; anything else -> INTERNAL.
// The message names `operation` and carries sqlite3_errmsg(db) (or the code's text when db is
// null). REQUIRES: rc is not SQLITE_OK, SQLITE_ROW or SQLITE_DONE; called right after the failing
// call on the thread that made it (sqlite3_errmsg reports the connection's latest error).
absl::Status SqliteStatus(int rc, sqlite3* db, absl::string_view operation);

// One prepared statement. Bind parameters (1-based, as in SQL `?1`), Step() through the rows, read
// columns (0-based) of the current row; Reset() before the next use (ResetOnExit does it).
class Statement {
 public:
  // Takes ownership of `stmt`, prepared on `db`. `name` is used in error messages.
  Statement(sqlite3* db, sqlite3_stmt* stmt, std::string name);
  ~Statement();
  Statement(const Statement&) = delete;
  Statement& operator=(const Statement&) = delete;

  // Binders. Aborts on a misuse (an index out of range), which is a bug.
  void BindInt64(int index, int64_t value);
  // REQUIRES: std::isfinite(value). SQLite would turn NaN into NULL; callers check and refuse
  // first.
  void BindDouble(int index, double value);
  void BindText(int index, absl::string_view value);
  void BindBlob(int index, absl::string_view value);  // an empty view binds a zero-length blob
  void BindNull(int index);

  // Advances to the next row: true when a row is available, false when done, or the mapped error.
  absl::StatusOr<bool> Step();
  // Steps until done (rows, if any, are skipped).
  absl::Status Run();

  // Columns of the current row. REQUIRES: the last Step() returned true.
  int64_t ColumnInt64(int column) const;
  double ColumnDouble(int column) const;
  bool ColumnIsNull(int column) const;
  // Views into SQLite's buffer: valid until the next Step() or Reset().
  absl::string_view ColumnText(int column) const;
  absl::string_view ColumnBlob(int column) const;

  // Makes the statement ready for its next use: resets it and clears its bindings.
  void Reset();

  // The name given at preparation, for error messages.
  const std::string& name() const { return name_; }

 private:
  sqlite3* db_;
  sqlite3_stmt* stmt_;
  std::string name_;
};

// Resets a statement when leaving the scope, whatever the path out.
class ResetOnExit {
 public:
  explicit ResetOnExit(Statement& statement) : statement_(statement) {}
  ~ResetOnExit() { statement_.Reset(); }
  ResetOnExit(const ResetOnExit&) = delete;
  ResetOnExit& operator=(const ResetOnExit&) = delete;

 private:
  Statement& statement_;
};

// One SQLite connection and the statements prepared on it (finalized before the connection closes).
class Connection {
 public:
  // Opens `path` read-write (created if missing) or, with read_only, SQLITE_OPEN_READONLY, through
  // the VFS named `vfs` (empty: SQLite's default). Sets the busy timeout and turns on extended
  // result codes. Errors are mapped by SqliteStatus().
  static absl::StatusOr<std::unique_ptr<Connection>> Open(const std::string& path, bool read_only,
                                                          int busy_timeout_ms,
                                                          const std::string& vfs = "");
  ~Connection();
  Connection(const Connection&) = delete;
  Connection& operator=(const Connection&) = delete;

  // Prepares one SQL statement for repeated use; it lives as long as the connection.
  absl::StatusOr<Statement*> Prepare(std::string name, absl::string_view sql);

  // Runs one or more SQL statements once, without keeping them (schema changes, PRAGMAs).
  absl::Status Execute(const std::string& sql, absl::string_view operation);

  // Runs one statement and returns the first column of its first row (PRAGMA read-backs).
  // FAILED_PRECONDITION when it returns no row.
  absl::StatusOr<std::string> QueryText(const std::string& sql, absl::string_view operation);
  absl::StatusOr<int64_t> QueryInt64(const std::string& sql, absl::string_view operation);

  // True while a transaction is open (SQLite may end one by itself after an I/O error).
  bool InTransaction() const;
  // True when SQLite opened the main database read-only (asked for, or the file is not writable).
  bool ReadOnly() const;

  // The raw handle, for diagnostics.
  sqlite3* db() const { return db_; }

 private:
  explicit Connection(sqlite3* db) : db_(db) {}

  sqlite3* db_;
  std::vector<std::unique_ptr<Statement>> statements_;
};

}  // namespace ogive::storage::internal

#endif  // OGIVE_STORAGE_SQLITE_CONNECTION_H_
