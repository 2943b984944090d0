#include "tests/support/db_inspector.h"

#include <sqlite3.h>

#include <functional>
#include <utility>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_join.h"

namespace ogive::testing {
namespace {

absl::Status Error(sqlite3* db, const std::string& what) {
  return absl::UnavailableError(absl::StrCat(what, ": ", sqlite3_errmsg(db)));
}

// Runs `sql` with `bind` applied, calling `row` for each row.
absl::Status Query(sqlite3* db, const std::string& sql,
                   const std::function<void(sqlite3_stmt*)>& bind,
                   const std::function<absl::Status(sqlite3_stmt*)>& row) {
  sqlite3_stmt* stmt = nullptr;
  if (sqlite3_prepare_v2(db, sql.c_str(), -1, &stmt, nullptr) != SQLITE_OK) {
    return Error(db, absl::StrCat("prepare ", sql));
  }
  if (bind) bind(stmt);
  absl::Status status;
  while (true) {
    const int rc = sqlite3_step(stmt);
    if (rc == SQLITE_DONE) break;
    if (rc != SQLITE_ROW) {
      status = Error(db, absl::StrCat("step ", sql));
      break;
    }
    status = row(stmt);
    if (!status.ok()) break;
  }
  sqlite3_finalize(stmt);
  return status;
}

template <typename Message>
bool ParseColumn(sqlite3_stmt* stmt, int column, Message& message) {
  const void* blob = sqlite3_column_blob(stmt, column);
  const int size = sqlite3_column_bytes(stmt, column);
  return message.ParseFromArray(blob, size);
}

}  // namespace

absl::StatusOr<DbInspector> DbInspector::Open(const std::string& path) {
  sqlite3* db = nullptr;
  if (sqlite3_open_v2(path.c_str(), &db, SQLITE_OPEN_READONLY, nullptr) != SQLITE_OK) {
    absl::Status status = Error(db, absl::StrCat("open '", path, "' read-only"));
    sqlite3_close_v2(db);
    return status;
  }
  sqlite3_db_config(db, SQLITE_DBCONFIG_NO_CKPT_ON_CLOSE, 1, nullptr);
  sqlite3_busy_timeout(db, 5000);
  return DbInspector(db);
}

DbInspector::DbInspector(DbInspector&& other) noexcept : db_(std::exchange(other.db_, nullptr)) {}

DbInspector::~DbInspector() {
  if (db_ != nullptr) sqlite3_close_v2(db_);
}

absl::StatusOr<std::string> DbInspector::IntegrityCheck() {
  std::vector<std::string> rows;
  absl::Status status = Query(db_, "PRAGMA integrity_check", nullptr, [&](sqlite3_stmt* stmt) {
    rows.emplace_back(reinterpret_cast<const char*>(sqlite3_column_text(stmt, 0)));
    return absl::OkStatus();
  });
  if (!status.ok()) return status;
  return absl::StrJoin(rows, "; ");
}

absl::StatusOr<StoredCampaignState> DbInspector::ReadCampaign(const std::string& name) {
  if (sqlite3_exec(db_, "BEGIN", nullptr, nullptr, nullptr) != SQLITE_OK) return Error(db_, "BEGIN");
  StoredCampaignState state;
  int64_t id = 0;
  absl::Status status = Query(
      db_, "SELECT s.id, e.engine FROM campaigns s JOIN campaign_engines e ON e.campaign_id = s.id WHERE s.name = ?1",
      [&](sqlite3_stmt* stmt) { sqlite3_bind_text(stmt, 1, name.c_str(), -1, SQLITE_TRANSIENT); },
      [&](sqlite3_stmt* stmt) {
        id = sqlite3_column_int64(stmt, 0);
        if (!ParseColumn(stmt, 1, state.engine)) {
          return absl::DataLossError("the engine state does not parse");
        }
        return absl::OkStatus();
      });
  if (status.ok() && id == 0) status = absl::NotFoundError(absl::StrCat("no campaign '", name, "'"));
  auto bind_id = [&](sqlite3_stmt* stmt) { sqlite3_bind_int64(stmt, 1, id); };
  if (status.ok()) {
    status = Query(db_, "SELECT number, score, record FROM trials WHERE campaign_id = ?1", bind_id,
                   [&](sqlite3_stmt* stmt) {
                     const int64_t number = sqlite3_column_int64(stmt, 0);
                     if (sqlite3_column_type(stmt, 1) != SQLITE_NULL) {
                       state.score_column[number] = sqlite3_column_double(stmt, 1);
                     }
                     v1::TrialRecord& record = state.trials[number];
                     if (!ParseColumn(stmt, 2, record) || record.number() != number) {
                       return absl::DataLossError(absl::StrCat("trial ", number, ": bad record"));
                     }
                     return absl::OkStatus();
                   });
  }
  if (status.ok()) {
    status = Query(db_,
                   "SELECT generation, summary FROM generations WHERE campaign_id = ?1 "
                   "ORDER BY generation",
                   bind_id, [&](sqlite3_stmt* stmt) {
                     v1::GenerationSummary& g = state.generations.emplace_back();
                     if (!ParseColumn(stmt, 1, g) || g.generation() != sqlite3_column_int64(stmt, 0)) {
                       return absl::DataLossError("a generation summary does not parse");
                     }
                     return absl::OkStatus();
                   });
  }
  if (status.ok()) {
    status = Query(db_, "SELECT trial, COUNT(*) FROM events WHERE campaign_id = ?1 AND kind = 'tell' "
                        "GROUP BY trial",
                   bind_id, [&](sqlite3_stmt* stmt) {
                     state.tell_events[sqlite3_column_int64(stmt, 0)] =
                         sqlite3_column_int(stmt, 1);
                     return absl::OkStatus();
                   });
  }
  sqlite3_exec(db_, "COMMIT", nullptr, nullptr, nullptr);
  if (!status.ok()) return status;
  return state;
}

}  // namespace ogive::testing
