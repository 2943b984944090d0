// Tests of the schema's migrations on databases written at older versions. Versions 1 to 3 called
// the resource a study, so the rows written here before a migration use that version's table and
// column names; what is read back goes through today's store. The whole path from a database made
// by a released build is tests/migration/migration_test.py, on the fixture beside it.
#include <sqlite3.h>

#include <memory>
#include <string>
#include <vector>

#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "absl/strings/escaping.h"
#include "absl/strings/str_cat.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "storage/schema.h"
#include "storage/sqlite_connection.h"
#include "storage/sqlite_store.h"
#include "storage/store_test_support.h"

namespace ogive::storage {
namespace {

using ::testing::ElementsAre;
using ::testing::Pair;
using ::testing::SizeIs;
using namespace ::ogive::storage::test_support;  // NOLINT(build/namespaces): test helpers

class SchemaMigrationTest : public SqliteStoreTest {};

StoredToken MakeToken(const std::string& label) {
  StoredToken t;
  t.label = label;
  t.digest = std::string(32, 'f');
  t.role = "worker";
  t.created_at_ns = 1800000000000000000;
  return t;
}

// A database written by a build at schema version 2 (ask requests keyed by id, trials indexed by
// state, the resource still called a study) keeps every trial and ask request through the
// migrations to version 3 and 4.
TEST_F(SchemaMigrationTest, AVersionTwoDatabaseKeepsTrialsAndAskRequestsThroughEveryLaterStep) {
  {
    absl::StatusOr<std::unique_ptr<internal::Connection>> connection =
        internal::Connection::Open(path_, /*read_only=*/false, 1000);
    ASSERT_THAT(connection, IsOk());
    ASSERT_THAT(internal::Migrate(**connection, internal::Migrations().first(2)), IsOk());
    ASSERT_THAT((*connection)->Execute("PRAGMA journal_mode = WAL", "wal"), IsOk());
  }
  {
    RawDb raw(path_);
    v1::EngineState engine = MakeEngine(0.5);
    const std::string distribution = Bytes(engine.distribution());
    engine.clear_distribution();
    engine.set_next_trial(4);
    ASSERT_EQ(raw.Exec(absl::StrCat("INSERT INTO studies (id, name, design, engine, distribution, create_request_id, "
                                    "created_at_ns) VALUES (7, 'alpha', X'", absl::BytesToHexString(Bytes(MakeDesign("alpha"))),
                                    "', X'", absl::BytesToHexString(Bytes(engine)), "', X'",
                                    absl::BytesToHexString(distribution), "', 'create-alpha', 1)")),
              SQLITE_OK);
    for (int64_t n = 1; n <= 3; ++n) {
      const v1::TrialRecord trial = MakeTrial(n, n == 2 ? v1::TRIAL_STATE_REPORTED : v1::TRIAL_STATE_LEASED, 2.5);
      ASSERT_EQ(raw.Exec(absl::StrCat("INSERT INTO trials (study_id, number, state, worker, reported_at_ns, score, "
                                      "record) VALUES (7, ", n, ", ", trial.state(), ", '", trial.worker(), "', ",
                                      trial.reported_at_ns(), ", NULL, X'", absl::BytesToHexString(Bytes(trial)), "')")),
                SQLITE_OK);
    }
    ASSERT_EQ(raw.Exec("INSERT INTO ask_requests (study_id, request_id, trials) VALUES (7, 'r-b', '3'), "
                       "(7, 'r-a', '1,2')"),
              SQLITE_OK);
    ASSERT_EQ(raw.Text("PRAGMA user_version"), "2");
  }

  std::unique_ptr<SqliteStore> store = OpenStore();  // migrates
  ASSERT_NE(store, nullptr);
  absl::StatusOr<StoredCampaign> loaded = store->LoadCampaign(7);
  ASSERT_THAT(loaded, IsOk());
  EXPECT_EQ(Bytes(loaded->design), Bytes(MakeDesign("alpha")));
  v1::EngineState expected_engine = MakeEngine(0.5);
  expected_engine.set_next_trial(4);
  EXPECT_EQ(Bytes(loaded->snapshot.engine()), Bytes(expected_engine));
  ASSERT_EQ(loaded->snapshot.trials_size(), 3);
  for (int n = 1; n <= 3; ++n) {
    EXPECT_EQ(Bytes(loaded->snapshot.trials(n - 1)),
              Bytes(MakeTrial(n, n == 2 ? v1::TRIAL_STATE_REPORTED : v1::TRIAL_STATE_LEASED, 2.5)));
  }
  // The stored requests keep their trials (copied in request-id order), and a new one follows them.
  EXPECT_THAT(loaded->ask_requests, ElementsAre(Pair("r-a", ElementsAre(1, 2)), Pair("r-b", ElementsAre(3))));
  CampaignWrite ask;
  ask.campaign_id = 7;
  ask.trials = {MakeTrial(4, v1::TRIAL_STATE_LEASED)};
  ask.ask_request = std::make_pair(std::string("r-0"), std::vector<int64_t>{4});
  ASSERT_THAT(store->Commit(ask), IsOk());
  loaded = store->LoadCampaign(7);
  ASSERT_THAT(loaded, IsOk());
  EXPECT_THAT(loaded->ask_requests, ElementsAre(Pair("r-a", ElementsAre(1, 2)), Pair("r-b", ElementsAre(3)),
                                                Pair("r-0", ElementsAre(4))));
  // Listing by state still works without the index.
  absl::StatusOr<TrialPage> leased = store->ListTrials(7, v1::TRIAL_STATE_LEASED, 0, 10);
  ASSERT_THAT(leased, IsOk());
  ASSERT_THAT(leased->trials, SizeIs(3));
  EXPECT_EQ(leased->trials[0].number(), 1);
  EXPECT_EQ(leased->trials[1].number(), 3);
  EXPECT_EQ(leased->trials[2].number(), 4);
  store.reset();
  RawDb raw(path_);
  EXPECT_EQ(raw.Text("PRAGMA user_version"), absl::StrCat(SqliteStore::schema_version()));
  EXPECT_EQ(raw.Text("SELECT count(*) FROM sqlite_master WHERE name = 'trials_by_state'"), "0");
  EXPECT_EQ(raw.Text("PRAGMA integrity_check"), "ok");
  EXPECT_EQ(raw.Text("PRAGMA foreign_key_check"), "<no row>");
  // The design stays with the campaign; the engine state and the distribution have rows of their own.
  EXPECT_EQ(raw.Text("SELECT count(*) FROM pragma_table_info('campaigns') WHERE name IN ('engine', 'distribution')"),
            "0");
  EXPECT_EQ(raw.Text("SELECT count(*) FROM campaign_engines WHERE campaign_id = 7"), "1");
  EXPECT_EQ(raw.Text("SELECT count(*) FROM campaign_distributions WHERE campaign_id = 7"), "1");
}

TEST_F(SchemaMigrationTest, AVersionOneDatabaseIsMigratedKeepingItsEvents) {
  // Build a version-1 database by hand: the first migration step only, with a study and an event.
  {
    absl::StatusOr<std::unique_ptr<internal::Connection>> c = internal::Connection::Open(path_, false, 1000);
    ASSERT_TRUE(c.ok()) << c.status();
    ASSERT_TRUE((*c)->Execute("PRAGMA journal_mode = WAL", "wal").ok());
    const char* const version1[] = {internal::Migrations()[0]};
    ASSERT_TRUE(internal::Migrate(**c, version1).ok());
    ASSERT_TRUE((*c)->Execute("INSERT INTO studies (id, name, design, engine, create_request_id, created_at_ns) "
                              "VALUES (1, 'old', x'', x'', '', 1); "
                              "INSERT INTO events (study_id, at_ns, kind, trial, worker, message) "
                              "VALUES (1, 7, 'tell', 3, 'node-1', '')",
                              "fill")
                    .ok());
    ASSERT_EQ(*(*c)->QueryInt64("PRAGMA user_version", "v"), 1);
  }
  std::unique_ptr<SqliteStore> store = OpenStore();
  ASSERT_NE(store, nullptr);
  absl::StatusOr<std::vector<Event>> events = store->ListEvents(1, 10);
  ASSERT_TRUE(events.ok()) << events.status();
  ASSERT_EQ(events->size(), 1u);
  EXPECT_EQ((*events)[0].kind, "tell");
  EXPECT_EQ((*events)[0].worker, "node-1");
  EXPECT_EQ((*events)[0].token_label, "");
  absl::StatusOr<std::vector<StoredToken>> tokens = store->ListTokens();
  ASSERT_TRUE(tokens.ok()) << tokens.status();
  EXPECT_TRUE(tokens->empty());
  ASSERT_TRUE(store->CreateToken(MakeToken("first")).ok());
  store.reset();
  sqlite3* db = nullptr;
  ASSERT_EQ(sqlite3_open_v2(path_.c_str(), &db, SQLITE_OPEN_READONLY, nullptr), SQLITE_OK);
  sqlite3_stmt* stmt = nullptr;
  ASSERT_EQ(sqlite3_prepare_v2(db, "PRAGMA user_version", -1, &stmt, nullptr), SQLITE_OK);
  ASSERT_EQ(sqlite3_step(stmt), SQLITE_ROW);
  EXPECT_EQ(sqlite3_column_int64(stmt, 0), SqliteStore::schema_version());
  sqlite3_finalize(stmt);
  sqlite3_close(db);
}

// A version-3 database (the last one that called the resource a study) keeps every row through
// the rename: campaigns, engines, distributions, trials, generations, ask requests, events and
// tokens, each under its new table and column names, and the old names are gone.
TEST_F(SchemaMigrationTest, VersionFourRenamesEveryTableAndColumnAndKeepsEveryRow) {
  {
    absl::StatusOr<std::unique_ptr<internal::Connection>> connection =
        internal::Connection::Open(path_, /*read_only=*/false, 1000);
    ASSERT_THAT(connection, IsOk());
    ASSERT_THAT(internal::Migrate(**connection, internal::Migrations().first(3)), IsOk());
    ASSERT_THAT((*connection)->Execute("PRAGMA journal_mode = WAL", "wal"), IsOk());
  }
  {
    RawDb raw(path_);
    ASSERT_EQ(raw.Exec(absl::StrCat(
                  "INSERT INTO studies (id, name, design, create_request_id, created_at_ns) VALUES (3, 'kiln', X'",
                  absl::BytesToHexString(Bytes(MakeDesign("kiln"))), "', 'create-kiln', 1);",
                  "INSERT INTO study_engines (study_id, engine) VALUES (3, X'",
                  absl::BytesToHexString(Bytes(MakeEngine(0.25))), "');",
                  "INSERT INTO study_distributions (study_id, distribution) VALUES (3, X'",
                  absl::BytesToHexString(Bytes(MakeDistribution(0.25))), "');",
                  "INSERT INTO trials (study_id, number, state, worker, reported_at_ns, score, record) VALUES (3, 1, ",
                  v1::TRIAL_STATE_REPORTED, ", 'bench', 9, 2.5, X'",
                  absl::BytesToHexString(Bytes(MakeTrial(1, v1::TRIAL_STATE_REPORTED, 2.5))), "');",
                  "INSERT INTO generations (study_id, generation, summary) VALUES (3, 1, X'",
                  absl::BytesToHexString(Bytes(MakeSummary(1))), "');",
                  "INSERT INTO ask_requests (study_id, request_id, trials) VALUES (3, 'r-1', '1');",
                  "INSERT INTO events (study_id, at_ns, kind, trial, worker, message, token_label) ",
                  "VALUES (3, 7, 'tell', 1, 'bench', '', 'alice');",
                  "INSERT INTO tokens (label, digest, role, studies, created_at_ns) ",
                  "VALUES ('alice', X'", std::string(64, 'a'), "', 'worker', 'kiln', 1);")),
              SQLITE_OK);
  }
  std::unique_ptr<SqliteStore> store = OpenStore();  // migrates
  ASSERT_NE(store, nullptr);
  absl::StatusOr<StoredCampaign> loaded = store->LoadCampaign(3);
  ASSERT_THAT(loaded, IsOk());
  EXPECT_EQ(loaded->name, "kiln");
  EXPECT_EQ(Bytes(loaded->design), Bytes(MakeDesign("kiln")));
  ASSERT_EQ(loaded->snapshot.trials_size(), 1);
  EXPECT_EQ(Bytes(loaded->snapshot.trials(0)), Bytes(MakeTrial(1, v1::TRIAL_STATE_REPORTED, 2.5)));
  EXPECT_EQ(Bytes(loaded->snapshot.engine().distribution()), Bytes(MakeDistribution(0.25)));
  EXPECT_THAT(loaded->ask_requests, ElementsAre(Pair("r-1", ElementsAre(1))));
  absl::StatusOr<std::vector<Event>> events = store->ListEvents(3, 10);
  ASSERT_THAT(events, IsOk());
  ASSERT_THAT(*events, SizeIs(1));
  EXPECT_EQ((*events)[0].token_label, "alice");
  absl::StatusOr<std::vector<StoredToken>> tokens = store->ListTokens();
  ASSERT_THAT(tokens, IsOk());
  ASSERT_THAT(*tokens, SizeIs(1));
  EXPECT_THAT((*tokens)[0].campaigns, ElementsAre("kiln"));
  store.reset();
  RawDb raw(path_);
  EXPECT_EQ(raw.Text("PRAGMA integrity_check"), "ok");
  EXPECT_EQ(raw.Text("PRAGMA foreign_key_check"), "<no row>");
  EXPECT_EQ(raw.Text("SELECT count(*) FROM sqlite_master WHERE sql LIKE '%stud%' OR name LIKE '%stud%'"), "0");
  EXPECT_EQ(raw.Text("SELECT count(*) FROM generations WHERE campaign_id = 3"), "1");
  EXPECT_EQ(raw.Text("SELECT count(*) FROM campaign_engines WHERE campaign_id = 3"), "1");
  EXPECT_EQ(raw.Text("SELECT count(*) FROM sqlite_master WHERE name IN ('ask_requests_by_campaign', "
                     "'events_by_campaign')"),
            "2");
}

}  // namespace
}  // namespace ogive::storage
