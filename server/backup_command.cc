#include "server/backup_command.h"

#include <cstdio>
#include <string>

#include "absl/strings/str_cat.h"
#include "storage/backup.h"

namespace ogive {
namespace {

constexpr char kBackupUsage[] =
    "usage: ogived backup --db PATH --to FILE\n"
    "\n"
    "Copies the database at PATH into the new file FILE with SQLite's online backup API: a\n"
    "consistent snapshot, safe while ogived runs on PATH (never copy a live database file with cp).\n"
    "FILE must not exist; it is written as one self-contained file and checked with\n"
    "PRAGMA integrity_check. Restore: stop ogived, remove PATH and its PATH-wal and PATH-shm\n"
    "files, put FILE in place of PATH, start ogived.\n";

int Usage(const std::string& message) {
  std::fprintf(stderr, "ogived backup: %s\n%s", message.c_str(), kBackupUsage);
  return 2;
}

}  // namespace

int RunBackupCommand(int argc, char** argv) {
  std::string db, to;
  for (int i = 0; i < argc; ++i) {
    const std::string arg = argv[i];
    if (arg == "--help" || arg == "-h") {
      std::fputs(kBackupUsage, stdout);
      return 0;
    }
    const size_t eq = arg.find('=');
    const std::string name = arg.substr(0, eq);
    if (name != "--db" && name != "--to") return Usage(absl::StrCat("unknown option '", name, "'"));
    std::string value;
    if (eq != std::string::npos) {
      value = arg.substr(eq + 1);
    } else if (i + 1 < argc) {
      value = argv[++i];
    } else {
      return Usage(absl::StrCat(name, ": needs a value"));
    }
    (name == "--db" ? db : to) = value;
  }
  if (db.empty()) return Usage("--db: the database to copy is required");
  if (to.empty()) return Usage("--to: the file to write is required");
  absl::StatusOr<storage::BackupReport> report = storage::BackupDatabase(db, to);
  if (!report.ok()) {
    std::fprintf(stderr, "ogived backup: %s: %s\n", absl::StatusCodeToString(report.status().code()).c_str(),
                 std::string(report.status().message()).c_str());
    return 1;
  }
  std::printf("ogived backup: copied '%s' to '%s' (%lld pages, %lld bytes, schema version %lld)\n", db.c_str(),
              to.c_str(), static_cast<long long>(report->pages), static_cast<long long>(report->bytes),
              static_cast<long long>(report->schema_version));
  return 0;
}

}  // namespace ogive
