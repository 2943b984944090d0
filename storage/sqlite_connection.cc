#include "storage/sqlite_connection.h"

#include <sqlite3.h>

#include <cmath>
#include <utility>

#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "server/base/check.h"

namespace ogive::storage::internal {

absl::Status SqliteStatus(int rc, sqlite3* db, absl::string_view operation) {
  const std::string message =
      absl::StrCat(operation, ": ", db != nullptr ? sqlite3_errmsg(db) : sqlite3_errstr(rc),
                   " (sqlite code ", rc, ")");
  switch (rc & 0xff) {
    case SQLITE_BUSY:
    case SQLITE_LOCKED:
    case SQLITE_IOERR:
    case SQLITE_FULL:
    case SQLITE_READONLY:
    case SQLITE_CANTOPEN:
    case SQLITE_PROTOCOL:
    case SQLITE_INTERRUPT:
    case SQLITE_NOMEM:
    case SQLITE_SCHEMA:
      return absl::UnavailableError(message);
    case SQLITE_CORRUPT:
    case SQLITE_NOTADB:
      return absl::DataLossError(message);
    case SQLITE_CONSTRAINT:
      if (rc == SQLITE_CONSTRAINT_UNIQUE || rc == SQLITE_CONSTRAINT_PRIMARYKEY) {
        return absl::AlreadyExistsError(message);
      }
      if (rc == SQLITE_CONSTRAINT_FOREIGNKEY) return absl::NotFoundError(message);
      return absl::InternalError(message);
    default:
      return absl::InternalError(message);
  }
}

Statement::Statement(sqlite3* db, sqlite3_stmt* stmt, std::string name)
    : db_(db), stmt_(stmt), name_(std::move(name)) {}

Statement::~Statement() { sqlite3_finalize(stmt_); }

void Statement::BindInt64(int index, int64_t value) {
  OGIVE_CHECK(sqlite3_bind_int64(stmt_, index, value) == SQLITE_OK);
}

void Statement::BindDouble(int index, double value) {
  // The last line of defence: SQLite stores NaN as NULL without a word.
  OGIVE_CHECK(std::isfinite(value));
  OGIVE_CHECK(sqlite3_bind_double(stmt_, index, value) == SQLITE_OK);
}

void Statement::BindText(int index, absl::string_view value) {
  OGIVE_CHECK(sqlite3_bind_text64(stmt_, index, value.data(), value.size(), SQLITE_TRANSIENT,
                                  SQLITE_UTF8) == SQLITE_OK);
}

void Statement::BindBlob(int index, absl::string_view value) {
  // sqlite3_bind_blob64 with a null pointer would bind NULL; an empty message is a zero-length
  // blob.
  static constexpr char kEmpty = 0;
  const char* data = value.data() != nullptr ? value.data() : &kEmpty;
  OGIVE_CHECK(sqlite3_bind_blob64(stmt_, index, data, value.size(), SQLITE_TRANSIENT) == SQLITE_OK);
}

void Statement::BindNull(int index) { OGIVE_CHECK(sqlite3_bind_null(stmt_, index) == SQLITE_OK); }

absl::StatusOr<bool> Statement::Step() {
  const int rc = sqlite3_step(stmt_);
  if (rc == SQLITE_ROW) return true;
  if (rc == SQLITE_DONE) return false;
  return SqliteStatus(rc, db_, name_);
}

absl::Status Statement::Run() {
  while (true) {
    absl::StatusOr<bool> row = Step();
    if (!row.ok()) return row.status();
    if (!*row) return absl::OkStatus();
  }
}

int64_t Statement::ColumnInt64(int column) const { return sqlite3_column_int64(stmt_, column); }

double Statement::ColumnDouble(int column) const { return sqlite3_column_double(stmt_, column); }

bool Statement::ColumnIsNull(int column) const {
  return sqlite3_column_type(stmt_, column) == SQLITE_NULL;
}

absl::string_view Statement::ColumnText(int column) const {
  const unsigned char* text = sqlite3_column_text(stmt_, column);
  const int size = sqlite3_column_bytes(stmt_, column);
  if (text == nullptr) return {};
  return absl::string_view(reinterpret_cast<const char*>(text), static_cast<size_t>(size));
}

absl::string_view Statement::ColumnBlob(int column) const {
  const void* blob = sqlite3_column_blob(stmt_, column);
  const int size = sqlite3_column_bytes(stmt_, column);
  if (blob == nullptr) return {};
  return absl::string_view(static_cast<const char*>(blob), static_cast<size_t>(size));
}

void Statement::Reset() {
  // sqlite3_reset repeats the last step's error, which the caller has already seen.
  sqlite3_reset(stmt_);
  sqlite3_clear_bindings(stmt_);
}

absl::StatusOr<std::unique_ptr<Connection>> Connection::Open(const std::string& path,
                                                             bool read_only, int busy_timeout_ms,
                                                             const std::string& vfs) {
  const int flags =
      (read_only ? SQLITE_OPEN_READONLY : SQLITE_OPEN_READWRITE | SQLITE_OPEN_CREATE) |
      SQLITE_OPEN_NOMUTEX;
  sqlite3* db = nullptr;
  const int rc = sqlite3_open_v2(path.c_str(), &db, flags, vfs.empty() ? nullptr : vfs.c_str());
  if (rc != SQLITE_OK) {
    absl::Status status = SqliteStatus(rc, db, absl::StrCat("open '", path, "'"));
    sqlite3_close_v2(db);  // a handle is usually allocated even when opening fails
    return status;
  }
  sqlite3_extended_result_codes(db, 1);
  sqlite3_busy_timeout(db, busy_timeout_ms);
  return std::unique_ptr<Connection>(new Connection(db));
}

Connection::~Connection() {
  statements_.clear();  // finalize first, so that close releases everything
  sqlite3_close_v2(db_);
}

absl::StatusOr<Statement*> Connection::Prepare(std::string name, absl::string_view sql) {
  sqlite3_stmt* stmt = nullptr;
  const int rc = sqlite3_prepare_v3(db_, sql.data(), static_cast<int>(sql.size()),
                                    SQLITE_PREPARE_PERSISTENT, &stmt, nullptr);
  if (rc != SQLITE_OK) return SqliteStatus(rc, db_, absl::StrCat("prepare ", name));
  OGIVE_CHECK(stmt != nullptr);  // empty SQL is a bug
  statements_.push_back(std::make_unique<Statement>(db_, stmt, std::move(name)));
  return statements_.back().get();
}

absl::Status Connection::Execute(const std::string& sql, absl::string_view operation) {
  const int rc = sqlite3_exec(db_, sql.c_str(), nullptr, nullptr, nullptr);
  if (rc != SQLITE_OK) return SqliteStatus(rc, db_, operation);
  return absl::OkStatus();
}

absl::StatusOr<std::string> Connection::QueryText(const std::string& sql,
                                                  absl::string_view operation) {
  sqlite3_stmt* raw = nullptr;
  const int rc = sqlite3_prepare_v2(db_, sql.c_str(), -1, &raw, nullptr);
  if (rc != SQLITE_OK) return SqliteStatus(rc, db_, operation);
  if (raw == nullptr) return absl::InternalError(absl::StrCat(operation, ": empty SQL"));
  Statement statement(db_, raw, std::string(operation));
  absl::StatusOr<bool> row = statement.Step();
  if (!row.ok()) return row.status();
  if (!*row) return absl::FailedPreconditionError(absl::StrCat(operation, ": returned no row"));
  std::string value(statement.ColumnText(0));
  // Finish the statement so that it holds no read transaction open.
  absl::Status done = statement.Run();
  if (!done.ok()) return done;
  return value;
}

absl::StatusOr<int64_t> Connection::QueryInt64(const std::string& sql,
                                               absl::string_view operation) {
  absl::StatusOr<std::string> text = QueryText(sql, operation);
  if (!text.ok()) return text.status();
  int64_t value = 0;
  if (!absl::SimpleAtoi(*text, &value)) {
    return absl::InternalError(absl::StrCat(operation, ": expected an integer, got '", *text, "'"));
  }
  return value;
}

bool Connection::InTransaction() const { return sqlite3_get_autocommit(db_) == 0; }

bool Connection::ReadOnly() const { return sqlite3_db_readonly(db_, "main") == 1; }

}  // namespace ogive::storage::internal
