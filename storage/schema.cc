#include "storage/schema.h"

#include <string>

#include "absl/strings/str_cat.h"

namespace ogive::storage::internal {
namespace {

// Versions 1 to 3 called the resource a study; their SQL is kept as released (version 4 renames).
//
// Version 1: studies, their trials, generation summaries, ask requests and the event log.
//
// Blobs are serialized ogive.v1 messages: studies.design a StudyDesign; studies.engine an
// EngineState without its distribution, which is studies.distribution (a DistributionState, NULL
// when the engine has none) so that a commit can replace one without the other (version 3 moves
// both to tables of their own, since SQLite rewrites a whole row when one column changes);
// trials.record a TrialRecord; generations.summary a GenerationSummary. trials.state, worker,
// reported_at_ns and score copy fields of the record for queries (score is NULL unless the outcome
// is a score). ask_requests.trials lists the trial numbers an ask returned, comma-separated
// ("4,5,6").
constexpr const char kVersion1[] = R"sql(
CREATE TABLE studies (
  id INTEGER PRIMARY KEY,
  name TEXT NOT NULL UNIQUE,
  design BLOB NOT NULL,
  engine BLOB NOT NULL,
  distribution BLOB,
  create_request_id TEXT NOT NULL,
  created_at_ns INTEGER NOT NULL
);
CREATE TABLE trials (
  study_id INTEGER NOT NULL REFERENCES studies (id),
  number INTEGER NOT NULL,
  state INTEGER NOT NULL,
  worker TEXT NOT NULL,
  reported_at_ns INTEGER NOT NULL,
  score REAL,
  record BLOB NOT NULL,
  PRIMARY KEY (study_id, number)
);
CREATE INDEX trials_by_state ON trials (study_id, state, number);
CREATE TABLE generations (
  study_id INTEGER NOT NULL REFERENCES studies (id),
  generation INTEGER NOT NULL,
  summary BLOB NOT NULL,
  PRIMARY KEY (study_id, generation)
);
CREATE TABLE ask_requests (
  study_id INTEGER NOT NULL REFERENCES studies (id),
  request_id TEXT NOT NULL,
  trials TEXT NOT NULL,
  PRIMARY KEY (study_id, request_id)
);
CREATE TABLE events (
  id INTEGER PRIMARY KEY,
  study_id INTEGER NOT NULL REFERENCES studies (id),
  at_ns INTEGER NOT NULL,
  kind TEXT NOT NULL,
  trial INTEGER NOT NULL,
  worker TEXT NOT NULL,
  message TEXT NOT NULL
);
CREATE INDEX events_by_study ON events (study_id, id);
)sql";

// Version 2: access tokens, and the label of the token behind each event.
//
// tokens.digest is the SHA-256 of a token (the token itself is never stored). tokens.studies lists
// the study names a token is limited to, comma-separated (study names hold no commas), '' for every
// study. revoked_at_ns is NULL while the token is valid. Labels are unique for ever, revoked tokens
// included, so that an audit label names one token. events.token_label is '' for events written
// without tokens and for every event stored before version 2.
constexpr const char kVersion2[] = R"sql(
CREATE TABLE tokens (
  label TEXT PRIMARY KEY,
  digest BLOB NOT NULL UNIQUE CHECK (length(digest) = 32),
  role TEXT NOT NULL CHECK (role IN ('reader', 'worker', 'admin')),
  studies TEXT NOT NULL,
  created_at_ns INTEGER NOT NULL,
  revoked_at_ns INTEGER
);
ALTER TABLE events ADD COLUMN token_label TEXT NOT NULL DEFAULT '';
)sql";

// Version 3: writes that touch fewer pages. Each commit used to write about twice the pages its
// rows needed:
// - ask_requests was keyed by (study_id, request_id), and request ids are random, so every ask
//   inserted into a different page of that index. It is now kept in the order of the asks (its
//   rowid), with an index on (study_id, id) that grows at its end. Uniqueness of a study's request
//   ids is the service's rule (it answers a repeated id from memory and never stores it again), not
//   the table's.
// - trials_by_state moved an entry on every change of a trial's state, for a query the server answers
//   from memory; it goes (listing one state scans the study's trials by number).
// - SQLite rewrites a whole row when one column changes, so every ask and tell, which replaces the
//   engine state, rewrote the study's design and distribution too (for a large design, many overflow
//   pages). The engine state (small, replaced by every write) and the distribution (large, replaced
//   by each update) get tables of their own, one row per study; studies keeps what never changes.
//   study_distributions has no row for an engine without a distribution.
constexpr const char kVersion3[] = R"sql(
CREATE TABLE ask_requests_v3 (
  id INTEGER PRIMARY KEY,
  study_id INTEGER NOT NULL REFERENCES studies (id),
  request_id TEXT NOT NULL,
  trials TEXT NOT NULL
);
INSERT INTO ask_requests_v3 (study_id, request_id, trials)
  SELECT study_id, request_id, trials FROM ask_requests ORDER BY study_id, request_id;
DROP TABLE ask_requests;
ALTER TABLE ask_requests_v3 RENAME TO ask_requests;
CREATE INDEX ask_requests_by_study ON ask_requests (study_id, id);
DROP INDEX trials_by_state;
CREATE TABLE study_engines (
  study_id INTEGER PRIMARY KEY REFERENCES studies (id),
  engine BLOB NOT NULL
);
CREATE TABLE study_distributions (
  study_id INTEGER PRIMARY KEY REFERENCES studies (id),
  distribution BLOB NOT NULL
);
INSERT INTO study_engines (study_id, engine) SELECT id, engine FROM studies;
INSERT INTO study_distributions (study_id, distribution)
  SELECT id, distribution FROM studies WHERE distribution IS NOT NULL;
ALTER TABLE studies DROP COLUMN engine;
ALTER TABLE studies DROP COLUMN distribution;
)sql";

// Version 4: the resource is called a campaign. Tables and columns named after the old noun are
// renamed; every row stays. SQLite (3.26 and later, legacy_alter_table off) carries a renamed table
// into the other tables' foreign keys and a renamed column into the indexes on it; the two indexes
// whose names held the old noun are made again under new names.
//
// From here on: campaigns (id, name, design, create_request_id, created_at_ns);
// campaign_engines (campaign_id, engine); campaign_distributions (campaign_id, distribution);
// trials, generations, ask_requests and events keyed by campaign_id; tokens.campaigns lists the
// campaign names a token is limited to.
constexpr const char kVersion4[] = R"sql(
ALTER TABLE studies RENAME TO campaigns;
ALTER TABLE study_engines RENAME TO campaign_engines;
ALTER TABLE campaign_engines RENAME COLUMN study_id TO campaign_id;
ALTER TABLE study_distributions RENAME TO campaign_distributions;
ALTER TABLE campaign_distributions RENAME COLUMN study_id TO campaign_id;
ALTER TABLE trials RENAME COLUMN study_id TO campaign_id;
ALTER TABLE generations RENAME COLUMN study_id TO campaign_id;
ALTER TABLE ask_requests RENAME COLUMN study_id TO campaign_id;
ALTER TABLE events RENAME COLUMN study_id TO campaign_id;
ALTER TABLE tokens RENAME COLUMN studies TO campaigns;
DROP INDEX ask_requests_by_study;
CREATE INDEX ask_requests_by_campaign ON ask_requests (campaign_id, id);
DROP INDEX events_by_study;
CREATE INDEX events_by_campaign ON events (campaign_id, id);
)sql";

// Append new steps at the end (one line each, the SQL in a constant above). Never change a step
// that has been released.
constexpr const char* kMigrations[] = {
    kVersion1,
    kVersion2,
    kVersion3,
    kVersion4,
};

absl::Status VersionMismatch(int64_t found, int64_t known, absl::string_view what) {
  return absl::FailedPreconditionError(absl::StrCat("database schema version ", found, " is ", what,
                                                    " than this build's version ", known));
}

}  // namespace

absl::Span<const char* const> Migrations() { return kMigrations; }

int64_t SchemaVersion() { return static_cast<int64_t>(Migrations().size()); }

absl::Status Migrate(Connection& writer, absl::Span<const char* const> steps) {
  const int64_t known = static_cast<int64_t>(steps.size());
  // Read the version inside the write transaction, so that nothing can change it in between.
  OGIVE_STORAGE_RETURN_IF_ERROR(writer.Execute("BEGIN IMMEDIATE", "begin migration"));
  auto fail = [&writer](absl::Status status) {
    if (writer.InTransaction()) (void)writer.Execute("ROLLBACK", "roll back migration");
    return status;
  };
  absl::StatusOr<int64_t> found = writer.QueryInt64("PRAGMA user_version", "read user_version");
  if (!found.ok()) return fail(found.status());
  if (*found > known) return fail(VersionMismatch(*found, known, "newer"));
  if (*found < 0) return fail(VersionMismatch(*found, known, "older (and negative)"));
  for (int64_t v = *found; v < known; ++v) {
    absl::Status applied =
        writer.Execute(steps[static_cast<size_t>(v)],
                       absl::StrCat("migrate schema from version ", v, " to ", v + 1));
    if (!applied.ok()) return fail(applied);
  }
  if (*found < known) {
    absl::Status set =
        writer.Execute(absl::StrCat("PRAGMA user_version = ", known), "set user_version");
    if (!set.ok()) return fail(set);
  }
  absl::Status committed = writer.Execute("COMMIT", "commit migration");
  if (!committed.ok()) return fail(committed);
  return absl::OkStatus();
}

absl::Status CheckVersion(Connection& reader, absl::Span<const char* const> steps) {
  const int64_t known = static_cast<int64_t>(steps.size());
  absl::StatusOr<int64_t> found = reader.QueryInt64("PRAGMA user_version", "read user_version");
  if (!found.ok()) return found.status();
  if (*found > known) return VersionMismatch(*found, known, "newer");
  if (*found < known) {
    return absl::FailedPreconditionError(absl::StrCat("database schema version ", *found,
                                                      " is older than this build's version ", known,
                                                      "; open it writable once to migrate it"));
  }
  return absl::OkStatus();
}

}  // namespace ogive::storage::internal
