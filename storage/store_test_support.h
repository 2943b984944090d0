// Test helpers shared by the storage tests (sqlite_store_test.cc, schema_migration_test.cc): status
// matchers, deterministic bytes of a message, sample records, a raw connection to the file for checks
// from outside the store, and a fixture that owns a temporary directory with one database path.
// Test code only; every function is inline so each test binary has its own copy.
#ifndef OGIVE_STORAGE_STORE_TEST_SUPPORT_H_
#define OGIVE_STORAGE_STORE_TEST_SUPPORT_H_

#include <sqlite3.h>
#include <stdlib.h>

#include <filesystem>
#include <functional>
#include <memory>
#include <string>
#include <utility>

#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "absl/strings/str_cat.h"
#include "absl/time/clock.h"
#include "absl/time/time.h"
#include "gmock/gmock.h"
#include "google/protobuf/io/coded_stream.h"
#include "google/protobuf/io/zero_copy_stream_impl_lite.h"
#include "gtest/gtest.h"
#include "storage/sqlite_store.h"

namespace ogive::storage::test_support {

inline const absl::Status& StatusOf(const absl::Status& status) { return status; }
template <typename T>
inline const absl::Status& StatusOf(const absl::StatusOr<T>& status_or) {
  return status_or.status();
}

// Matches an absl::Status or absl::StatusOr whose code is `code` and whose message matches.
MATCHER_P2(StatusIs, code, message_matcher, "") {
  const absl::Status& status = StatusOf(arg);
  *result_listener << "status is " << status;
  return status.code() == code &&
         testing::ExplainMatchResult(message_matcher, std::string(status.message()),
                                     result_listener);
}

MATCHER(IsOk, "") {
  const absl::Status& status = StatusOf(arg);
  *result_listener << "status is " << status;
  return status.ok();
}

// The bytes of a message with deterministic map order (the design holds a map).
inline std::string Bytes(const google::protobuf::MessageLite& message) {
  std::string out;
  {
    google::protobuf::io::StringOutputStream stream(&out);
    google::protobuf::io::CodedOutputStream coded(&stream);
    coded.SetSerializationDeterministic(true);
    message.SerializeToCodedStream(&coded);
  }
  return out;
}

inline v1::CampaignDesign MakeDesign(const std::string& name) {
  v1::CampaignDesign design;
  design.set_name(name);
  v1::Parameter* temp = design.add_parameters();
  temp->set_name("temp");
  temp->set_unit("degC");
  temp->mutable_real()->set_low(20.0);
  temp->mutable_real()->set_high(80.0);
  v1::Parameter* passes = design.add_parameters();
  passes->set_name("passes");
  passes->mutable_integer()->set_low(1);
  passes->mutable_integer()->set_high(9);
  v1::Parameter* glaze = design.add_parameters();
  glaze->set_name("glaze");
  glaze->mutable_categorical()->add_options("matte");
  glaze->mutable_categorical()->add_options("gloss");
  design.mutable_objective()->set_direction(v1::DIRECTION_LOWER_IS_BETTER);
  design.set_seed(20240611);
  (*design.mutable_start()->mutable_values())["temp"].set_real(55.5);
  (*design.mutable_start()->mutable_values())["passes"].set_integer(3);
  (*design.mutable_start()->mutable_values())["glaze"].set_categorical("gloss");
  return design;
}

inline v1::DistributionState MakeDistribution(double mean0) {
  v1::DistributionState distribution;
  v1::GaussianState* gaussian = distribution.mutable_gaussian();
  gaussian->set_dimension(2);
  gaussian->add_mean(mean0);
  gaussian->add_mean(-0.25);
  gaussian->set_sigma(0.3);
  for (double c : {1.0, 0.1, 0.1, 0.5}) gaussian->add_covariance(c);
  distribution.mutable_categorical()->add_parameters()->add_probabilities(0.5);
  distribution.set_population_size(6);
  return distribution;
}

inline v1::EngineState MakeEngine(double mean0) {
  v1::EngineState engine;
  engine.set_phase(v1::CAMPAIGN_PHASE_OPEN);
  for (uint64_t word : {11u, 22u, 33u, 44u}) engine.add_random_state(word);
  engine.set_next_trial(1);
  engine.set_sigma0(0.3);
  engine.set_base_population(6);
  *engine.mutable_distribution() = MakeDistribution(mean0);
  return engine;
}

inline v1::TrialRecord MakeTrial(int64_t number, v1::TrialState state, double score = 0.0) {
  v1::TrialRecord trial;
  trial.set_number(number);
  trial.set_generation(number / 7);
  trial.add_internal(0.125 * static_cast<double>(number));
  trial.add_internal(-0.5);
  trial.set_state(state);
  trial.set_worker(absl::StrCat("worker-", number % 3));
  trial.set_leased_at_ns(1'000'000 + number);
  trial.set_lease_deadline_ns(2'000'000 + number);
  trial.set_consumed_by(-1);
  if (state == v1::TRIAL_STATE_REPORTED) {
    trial.set_outcome_kind(v1::OUTCOME_KIND_SCORE);
    trial.set_score(score);
    trial.set_reported_at_ns(3'000'000 + number);
    trial.set_use(v1::OUTCOME_USE_PENDING);
  }
  return trial;
}

inline v1::GenerationSummary MakeSummary(int64_t generation) {
  v1::GenerationSummary summary;
  summary.set_generation(generation);
  summary.set_population_size(6);
  summary.add_cohort(generation * 10);
  summary.add_mean(0.5 / static_cast<double>(generation));
  summary.set_sigma(0.3 / static_cast<double>(generation));
  return summary;
}

inline Event MakeEvent(const std::string& kind, int64_t trial, const std::string& message) {
  Event event;
  event.kind = kind;
  event.trial = trial;
  event.worker = "worker-1";
  event.message = message;
  event.at_ns = 5'000'000 + trial;
  return event;
}

// Polls `condition` every millisecond; false if it is still false after `timeout`.
inline bool WaitFor(const std::function<bool()>& condition, absl::Duration timeout = absl::Seconds(10)) {
  const absl::Time deadline = absl::Now() + timeout;
  while (!condition()) {
    if (absl::Now() > deadline) return false;
    absl::SleepFor(absl::Milliseconds(1));
  }
  return true;
}

// A raw connection to the database file, for checks from outside the store. It never checkpoints
// on close, and it writes only while no store is open on the file.
class RawDb {
 public:
  explicit RawDb(const std::string& path) {
    EXPECT_EQ(sqlite3_open_v2(path.c_str(), &db_, SQLITE_OPEN_READWRITE, nullptr), SQLITE_OK);
    sqlite3_db_config(db_, SQLITE_DBCONFIG_NO_CKPT_ON_CLOSE, 1, nullptr);
    sqlite3_busy_timeout(db_, 5000);
  }
  ~RawDb() { sqlite3_close_v2(db_); }
  RawDb(const RawDb&) = delete;
  RawDb& operator=(const RawDb&) = delete;

  // The SQLite result code of running `sql`.
  int Exec(const std::string& sql) {
    return sqlite3_exec(db_, sql.c_str(), nullptr, nullptr, nullptr);
  }

  // The first column of the first row of `sql`, or "<error ...>".
  std::string Text(const std::string& sql) {
    sqlite3_stmt* stmt = nullptr;
    if (sqlite3_prepare_v2(db_, sql.c_str(), -1, &stmt, nullptr) != SQLITE_OK) {
      return absl::StrCat("<error ", sqlite3_errmsg(db_), ">");
    }
    std::string text = "<no row>";
    if (sqlite3_step(stmt) == SQLITE_ROW) {
      const unsigned char* value = sqlite3_column_text(stmt, 0);
      text = value == nullptr ? "<null>" : reinterpret_cast<const char*>(value);
    }
    sqlite3_finalize(stmt);
    return text;
  }

 private:
  sqlite3* db_ = nullptr;
};

class SqliteStoreTest : public testing::Test {
 protected:
  void SetUp() override {
    std::string pattern = testing::TempDir() + "ogive_storage_XXXXXX";
    ASSERT_NE(mkdtemp(pattern.data()), nullptr);
    dir_ = pattern;
    path_ = dir_ + "/ogive.db";
  }

  void TearDown() override {
    std::error_code error;
    std::filesystem::remove_all(dir_, error);
  }

  std::unique_ptr<SqliteStore> OpenStore(SqliteStore::Options options = SqliteStore::Options()) {
    absl::StatusOr<std::unique_ptr<SqliteStore>> store = SqliteStore::Open(path_, options);
    EXPECT_THAT(store, IsOk());
    return store.ok() ? *std::move(store) : nullptr;
  }

  // Creates campaign `name` with MakeDesign/MakeEngine and returns its id (0 on failure).
  static int64_t Create(SqliteStore& store, const std::string& name) {
    absl::StatusOr<int64_t> id =
        store.CreateCampaign(name, MakeDesign(name), MakeEngine(0.5), "create-" + name);
    EXPECT_THAT(id, IsOk());
    return id.ok() ? *id : 0;
  }

  std::string dir_;
  std::string path_;
};

}  // namespace ogive::storage::test_support

#endif  // OGIVE_STORAGE_STORE_TEST_SUPPORT_H_
