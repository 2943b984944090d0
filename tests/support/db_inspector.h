// DbInspector: reads an ogive database file directly with SQLite, around the server, for tests that
// check what is on disk after a crash or a fault: PRAGMA integrity_check, and one campaign's engine
// state, trial records, generation summaries and "tell" events as stored.
//
// Opens the file read-only (SQLITE_OPEN_READONLY, no checkpoint on close), so it may run while
// ogived runs or after it died; it never writes the database. Not thread-safe; one per thread.
#ifndef OGIVE_TESTS_SUPPORT_DB_INSPECTOR_H_
#define OGIVE_TESTS_SUPPORT_DB_INSPECTOR_H_

#include <cstdint>
#include <map>
#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "ogive/v1/campaign.pb.h"

struct sqlite3;

namespace ogive::testing {

// One campaign as the file holds it.
struct StoredCampaignState {
  v1::EngineState engine;                        // without its distribution
  std::map<int64_t, v1::TrialRecord> trials;     // by number
  std::map<int64_t, double> score_column;        // trials.score where not NULL, by number
  std::vector<v1::GenerationSummary> generations;  // in generation order
  std::map<int64_t, int> tell_events;            // "tell" events per trial number
};

class DbInspector {
 public:
  // Opens `path` read-only. UNAVAILABLE if SQLite cannot open it.
  static absl::StatusOr<DbInspector> Open(const std::string& path);
  DbInspector(DbInspector&& other) noexcept;
  DbInspector& operator=(DbInspector&& other) = delete;
  DbInspector(const DbInspector&) = delete;
  ~DbInspector();

  // The rows of PRAGMA integrity_check joined by "; " ("ok" for a sound file).
  absl::StatusOr<std::string> IntegrityCheck();
  // The campaign named `name`, read in one transaction. NOT_FOUND if there is none; DATA_LOSS if a
  // stored message does not parse.
  absl::StatusOr<StoredCampaignState> ReadCampaign(const std::string& name);

 private:
  explicit DbInspector(sqlite3* db) : db_(db) {}
  sqlite3* db_;
};

}  // namespace ogive::testing

#endif  // OGIVE_TESTS_SUPPORT_DB_INSPECTOR_H_
