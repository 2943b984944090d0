#include "storage/backup.h"

#include <fcntl.h>
#include <unistd.h>

#include <sqlite3.h>

#include <cerrno>
#include <cstring>
#include <filesystem>
#include <memory>
#include <system_error>

#include "absl/strings/str_cat.h"
#include "absl/time/clock.h"
#include "absl/time/time.h"
#include "storage/sqlite_connection.h"

namespace ogive::storage {
namespace {

using internal::Connection;

constexpr int kBusyTimeoutMs = 5000;

// Flushes a file or directory to disk.
absl::Status SyncPath(const std::string& path, bool directory) {
  const int fd = ::open(path.c_str(), (directory ? O_RDONLY | O_DIRECTORY : O_RDONLY) | O_CLOEXEC);
  if (fd < 0) return absl::UnavailableError(absl::StrCat("open '", path, "' to sync it: ", std::strerror(errno)));
  const int rc = ::fsync(fd);
  const int error = errno;
  ::close(fd);
  if (rc != 0) return absl::UnavailableError(absl::StrCat("fsync '", path, "': ", std::strerror(error)));
  return absl::OkStatus();
}

// Copies every page of `source` into `dest` in one step (one read transaction on the source).
absl::StatusOr<int64_t> CopyPages(Connection& source, Connection& dest) {
  sqlite3_backup* backup = sqlite3_backup_init(dest.db(), "main", source.db(), "main");
  if (backup == nullptr) {
    return internal::SqliteStatus(sqlite3_errcode(dest.db()), dest.db(), "start the backup");
  }
  int rc = SQLITE_OK;
  const absl::Time deadline = absl::Now() + absl::Milliseconds(kBusyTimeoutMs);
  while (true) {
    rc = sqlite3_backup_step(backup, -1);
    if (rc == SQLITE_OK) continue;  // more pages (not with -1, but harmless)
    if ((rc == SQLITE_BUSY || rc == SQLITE_LOCKED) && absl::Now() < deadline) {
      absl::SleepFor(absl::Milliseconds(20));
      continue;
    }
    break;
  }
  const int64_t pages = sqlite3_backup_pagecount(backup);
  const int finished = sqlite3_backup_finish(backup);
  if (rc != SQLITE_DONE) return internal::SqliteStatus(rc, dest.db(), "copy the database");
  if (finished != SQLITE_OK) return internal::SqliteStatus(finished, dest.db(), "finish the backup");
  return pages;
}

absl::StatusOr<BackupReport> Copy(const std::string& from, const std::string& partial) {
  absl::StatusOr<std::unique_ptr<Connection>> source = Connection::Open(from, /*read_only=*/true, kBusyTimeoutMs);
  if (!source.ok()) return source.status();
  // Reading the schema first turns "not a database" into an error here, not an empty copy.
  absl::StatusOr<int64_t> version = (*source)->QueryInt64("PRAGMA user_version", "read the schema version");
  if (!version.ok()) return version.status();
  absl::StatusOr<std::unique_ptr<Connection>> dest = Connection::Open(partial, /*read_only=*/false, kBusyTimeoutMs);
  if (!dest.ok()) return dest.status();
  BackupReport report;
  absl::StatusOr<int64_t> pages = CopyPages(**source, **dest);
  if (!pages.ok()) return pages.status();
  report.pages = *pages;
  // The copy carries the source's WAL mode in its header; a backup is better as one file.
  absl::StatusOr<std::string> mode = (*dest)->QueryText("PRAGMA journal_mode = DELETE", "set journal_mode");
  if (!mode.ok()) return mode.status();
  absl::StatusOr<std::string> integrity = (*dest)->QueryText("PRAGMA integrity_check", "check the copy");
  if (!integrity.ok()) return integrity.status();
  if (*integrity != "ok") return absl::DataLossError(absl::StrCat("the copy fails PRAGMA integrity_check: ", *integrity));
  absl::StatusOr<int64_t> copied_version = (*dest)->QueryInt64("PRAGMA user_version", "read the copy's version");
  if (!copied_version.ok()) return copied_version.status();
  report.schema_version = *copied_version;
  return report;
}

}  // namespace

absl::StatusOr<BackupReport> BackupDatabase(const std::string& from, const std::string& to) {
  if (from.empty() || to.empty()) return absl::InvalidArgumentError("backup: both paths must be given");
  std::error_code error;
  if (std::filesystem::equivalent(from, to, error) || from == to) {
    return absl::InvalidArgumentError(absl::StrCat("backup: '", to, "' is the database itself"));
  }
  if (!std::filesystem::exists(from, error)) {
    return absl::NotFoundError(absl::StrCat("backup: no database file '", from, "'"));
  }
  if (std::filesystem::exists(to, error)) {
    return absl::AlreadyExistsError(absl::StrCat("backup: '", to, "' exists; give a new file name"));
  }
  const std::string partial = absl::StrCat(to, ".partial-", ::getpid());
  auto remove_partial = [&partial] {
    std::error_code ignored;
    for (const char* suffix : {"", "-journal", "-wal", "-shm"}) std::filesystem::remove(partial + suffix, ignored);
  };
  absl::StatusOr<BackupReport> report = Copy(from, partial);  // the connections are closed on return
  if (!report.ok()) {
    remove_partial();
    return report.status();
  }
  if (absl::Status s = SyncPath(partial, /*directory=*/false); !s.ok()) {
    remove_partial();
    return s;
  }
  // link() instead of rename(): it fails if `to` appeared meanwhile instead of replacing it.
  if (::link(partial.c_str(), to.c_str()) != 0) {
    const int e = errno;
    remove_partial();
    if (e == EEXIST) return absl::AlreadyExistsError(absl::StrCat("backup: '", to, "' exists; give a new file name"));
    return absl::UnavailableError(absl::StrCat("backup: cannot create '", to, "': ", std::strerror(e)));
  }
  remove_partial();
  std::filesystem::path parent = std::filesystem::path(to).parent_path();
  if (absl::Status s = SyncPath(parent.empty() ? "." : parent.string(), /*directory=*/true); !s.ok()) return s;
  report->bytes = static_cast<int64_t>(std::filesystem::file_size(to, error));
  return report;
}

}  // namespace ogive::storage
