// SqliteStore meeting a failing disk through SQLite's own error paths: every write and every fsync
// of one commit fails in turn (an I/O error, a full disk, a failed fsync), injected by FaultVfs
// beneath SQLite. Checks, for each point: the caller gets UNAVAILABLE naming the database and the
// cause; the stored state is exactly the last acknowledged one (readers, and a fresh open after the
// process died right after the failure); the next write succeeds; PRAGMA integrity_check is ok. A
// failing checkpoint (the main file cannot be written) must not fail the commits it follows.
#include <sqlite3.h>
#include <sys/wait.h>
#include <unistd.h>

#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <memory>
#include <string>
#include <vector>

#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "absl/strings/str_cat.h"
#include "gmock/gmock.h"
#include "google/protobuf/io/coded_stream.h"
#include "google/protobuf/io/zero_copy_stream_impl_lite.h"
#include "gtest/gtest.h"
#include "storage/sqlite_store.h"
#include "tests/support/fault_vfs.h"

namespace ogive::storage {
namespace {

using ::ogive::testing::FaultFile;
using ::ogive::testing::FaultOp;
using ::ogive::testing::FaultRule;
using ::ogive::testing::FaultVfs;
using ::testing::AllOf;
using ::testing::HasSubstr;

constexpr char kVfs[] = "ogive-fault-store";

std::string Bytes(const google::protobuf::MessageLite& message) {
  std::string out;
  {
    google::protobuf::io::StringOutputStream stream(&out);
    google::protobuf::io::CodedOutputStream coded(&stream);
    coded.SetSerializationDeterministic(true);
    message.SerializeToCodedStream(&coded);
  }
  return out;
}

v1::CampaignDesign Design() {
  v1::CampaignDesign design;
  design.set_name("kiln");
  v1::Parameter* p = design.add_parameters();
  p->set_name("peak_temp");
  p->mutable_real()->set_low(900);
  p->mutable_real()->set_high(1300);
  design.mutable_objective()->set_direction(v1::DIRECTION_LOWER_IS_BETTER);
  return design;
}

v1::EngineState Engine(int64_t next_trial) {
  v1::EngineState engine;
  engine.set_phase(v1::CAMPAIGN_PHASE_OPEN);
  for (uint64_t word : {1u, 2u, 3u, 4u}) engine.add_random_state(word);
  engine.set_next_trial(next_trial);
  engine.set_generation(next_trial - 1);
  engine.mutable_distribution()->mutable_gaussian()->set_dimension(1);
  engine.mutable_distribution()->mutable_gaussian()->add_mean(0.5);
  engine.mutable_distribution()->mutable_gaussian()->set_sigma(0.3);
  return engine;
}

// Write n of a campaign: trial n reported (its record padded with `internal_values` numbers), the engine
// at next_trial n + 1, generation n, one event. Four parts, so that a half-applied write shows.
CampaignWrite WriteNumber(int64_t campaign_id, int64_t n, int internal_values = 8) {
  CampaignWrite write;
  write.campaign_id = campaign_id;
  v1::TrialRecord& trial = write.trials.emplace_back();
  trial.set_number(n);
  trial.set_state(v1::TRIAL_STATE_REPORTED);
  trial.set_outcome_kind(v1::OUTCOME_KIND_SCORE);
  trial.set_score(static_cast<double>(n) + 0.5);
  trial.set_consumed_by(-1);
  for (int i = 0; i < internal_values; ++i) trial.add_internal(0.001 * (n * 31 + i));
  write.engine = Engine(n + 1);
  write.engine->clear_distribution();
  v1::GenerationSummary& generation = write.generations.emplace_back();
  generation.set_generation(n);
  generation.add_cohort(n);
  write.events.push_back({"tell", n, "kiln-1", "", 1000 + n});
  return write;
}

// Everything stored of the campaign, as comparable bytes.
std::string Fingerprint(SqliteStore& store, int64_t id) {
  absl::StatusOr<StoredCampaign> campaign = store.LoadCampaign(id);
  absl::StatusOr<std::vector<v1::GenerationSummary>> generations = store.ListGenerations(id);
  absl::StatusOr<std::vector<Event>> events = store.ListEvents(id, 1 << 20);
  if (!campaign.ok() || !generations.ok() || !events.ok()) {
    return absl::StrCat("<unreadable: ", campaign.status().ToString(), generations.status().ToString(),
                        events.status().ToString(), ">");
  }
  std::string out = Bytes(campaign->snapshot);
  for (const v1::GenerationSummary& g : *generations) absl::StrAppend(&out, "|g", Bytes(g));
  for (const Event& e : *events) absl::StrAppend(&out, "|e", e.kind, e.trial, e.message);
  return out;
}

// How many of the four parts of write n are stored (0 or 4 unless a write was torn). REQUIRES:
// writes 1..n-1 are stored.
int PartsOf(SqliteStore& store, int64_t id, int64_t n) {
  int parts = 0;
  absl::StatusOr<StoredCampaign> campaign = store.LoadCampaign(id);
  if (!campaign.ok()) return -1;
  for (const v1::TrialRecord& t : campaign->snapshot.trials()) parts += t.number() == n;
  parts += campaign->snapshot.engine().next_trial() > n;  // write n sets it to n + 1, later ones beyond
  absl::StatusOr<std::vector<v1::GenerationSummary>> generations = store.ListGenerations(id);
  if (generations.ok()) {
    for (const v1::GenerationSummary& g : *generations) parts += g.generation() == n;
  }
  absl::StatusOr<std::vector<Event>> events = store.ListEvents(id, 1 << 20);
  if (events.ok()) {
    for (const Event& e : *events) parts += e.trial == n;
  }
  return parts;
}

// One kind of disk failure and what the caller should read about it.
struct Failure {
  const char* name;
  FaultOp op;
  int error;
  const char* cause;  // in the message the caller gets
  // A commit whose log frames were all written but not synced may come back after a crash: SQLite
  // finds a complete transaction in the log. Only a failed fsync leaves that.
  bool may_survive_crash;
};

class StoreFaultFixture : public ::testing::Test {
 protected:
  void SetUp() override {
    std::string pattern = ::testing::TempDir() + "ogive_store_fault_XXXXXX";
    ASSERT_NE(mkdtemp(pattern.data()), nullptr);
    dir_ = pattern;
    path_ = dir_ + "/ogive.db";
  }
  void TearDown() override {
    FaultVfs::Get(kVfs).Clear();
    std::error_code error;
    std::filesystem::remove_all(dir_, error);
  }

  std::unique_ptr<SqliteStore> Open() {
    SqliteStore::Options options;
    options.vfs = FaultVfs::Get(kVfs).name();
    absl::StatusOr<std::unique_ptr<SqliteStore>> store = SqliteStore::Open(path_, options);
    EXPECT_TRUE(store.ok()) << store.status();
    return store.ok() ? *std::move(store) : nullptr;
  }

  // Opens the store in a child process, fails write n there with `rule` and ends the child at
  // once, without closing anything, as a SIGKILL right after the failure would. The child's exit
  // status: 0 when the write failed as it should, 1 when it did not, 2 when the store did not open.
  int FailInAChildThatDies(const FaultRule& rule, int64_t id, int64_t n) {
    std::fflush(nullptr);
    const pid_t child = fork();
    if (child == 0) {
      SqliteStore::Options options;
      options.vfs = FaultVfs::Get(kVfs).name();
      absl::StatusOr<std::unique_ptr<SqliteStore>> store = SqliteStore::Open(path_, options);
      if (!store.ok()) _exit(2);
      FaultVfs::Get(kVfs).Arm(rule);
      const absl::Status status = (*store)->Commit(WriteNumber(id, n));
      _exit(!status.ok() && FaultVfs::Get(kVfs).injected() == 1 ? 0 : 1);
    }
    int wstatus = 0;
    EXPECT_EQ(waitpid(child, &wstatus, 0), child);
    return WIFEXITED(wstatus) ? WEXITSTATUS(wstatus) : 100 + WTERMSIG(wstatus);
  }

  std::string dir_;
  std::string path_;
};

class StoreFaultTest : public StoreFaultFixture, public ::testing::WithParamInterface<Failure> {};

TEST_P(StoreFaultTest, EveryWritePointOfACommitFailsCleanly) {
  const Failure& failure = GetParam();
  FaultVfs& vfs = FaultVfs::Get(kVfs);
  int64_t id = 0;
  std::string acknowledged;
  {
    std::unique_ptr<SqliteStore> store = Open();
    ASSERT_NE(store, nullptr);
    absl::StatusOr<int64_t> created = store->CreateCampaign("kiln", Design(), Engine(1), "create-1");
    ASSERT_TRUE(created.ok()) << created.status();
    id = *created;
    ASSERT_TRUE(store->Commit(WriteNumber(id, 1)).ok());
    acknowledged = Fingerprint(*store, id);
  }

  // Point k: let k matching calls through, fail the next one. The sweep ends at the first k beyond
  // the calls one commit makes (that commit then goes through untouched).
  int64_t n = 2;
  int points = 0;
  int survived_crashes = 0;
  for (int64_t k = 0;; ++k) {
    SCOPED_TRACE(absl::StrCat(failure.name, " at matching call ", k + 1, ", write ", n));
    const FaultRule rule{failure.op, FaultFile::kWal, k, 1, failure.error};

    // 1. The process dies right after the failure: what a fresh open finds is whole.
    const int child = FailInAChildThatDies(rule, id, n);
    if (child == 1) {
      // The commit made no more than k such calls, so it went through: every point is covered.
      std::unique_ptr<SqliteStore> store = Open();
      ASSERT_NE(store, nullptr);
      EXPECT_EQ(PartsOf(*store, id, n), 4);
      acknowledged = Fingerprint(*store, id);
      break;
    }
    ASSERT_EQ(child, 0) << "the child could not run the failing write";
    ++points;
    bool survived = false;
    {
      std::unique_ptr<SqliteStore> store = Open();
      ASSERT_NE(store, nullptr);
      EXPECT_TRUE(store->CheckIntegrity().ok());
      const int parts = PartsOf(*store, id, n);
      if (parts == 4 && failure.may_survive_crash) {
        survived = true;  // found whole in the log; it counts as stored from now on
        ++survived_crashes;
        acknowledged = Fingerprint(*store, id);
      } else {
        EXPECT_EQ(parts, 0) << "write " << n << " is torn or was stored after a failed write";
        EXPECT_EQ(Fingerprint(*store, id), acknowledged);
      }
    }
    if (survived) {
      ++n;
      continue;
    }

    // 2. The same failure in a live store: the caller hears of it, nothing is stored, the next
    // write goes through.
    std::unique_ptr<SqliteStore> store = Open();
    ASSERT_NE(store, nullptr);
    vfs.Arm(rule);
    const absl::Status failed = store->Commit(WriteNumber(id, n));
    ASSERT_EQ(vfs.injected(), 1);
    vfs.Clear();
    EXPECT_EQ(failed.code(), absl::StatusCode::kUnavailable) << failed;
    EXPECT_THAT(std::string(failed.message()), AllOf(HasSubstr(path_), HasSubstr(failure.cause)));
    EXPECT_EQ(Fingerprint(*store, id), acknowledged);
    EXPECT_EQ(PartsOf(*store, id, n), 0);
    EXPECT_TRUE(store->CheckIntegrity().ok());

    const absl::Status retried = store->Commit(WriteNumber(id, n));
    ASSERT_TRUE(retried.ok()) << retried;
    EXPECT_EQ(PartsOf(*store, id, n), 4);
    acknowledged = Fingerprint(*store, id);
    ++n;
  }
  EXPECT_GE(points, 1) << "no point of a commit matched the rule";
  std::printf("%s: %d failure points in one commit; after %d of them a crash found the write whole\n",
              failure.name, points, survived_crashes);

  // Closing folds the log into the file; a plain open (no fault VFS) finds every acknowledged write.
  absl::StatusOr<std::unique_ptr<SqliteStore>> plain = SqliteStore::Open(path_);
  ASSERT_TRUE(plain.ok()) << plain.status();
  EXPECT_EQ(Fingerprint(**plain, id), acknowledged);
  EXPECT_TRUE((*plain)->CheckIntegrity().ok());
}

INSTANTIATE_TEST_SUITE_P(
    DiskFailures, StoreFaultTest,
    ::testing::Values(Failure{"log_write_io_error", FaultOp::kWrite, SQLITE_IOERR_WRITE,
                              "disk I/O error", false},
                      Failure{"log_write_disk_full", FaultOp::kWrite, SQLITE_FULL, "disk is full",
                              false},
                      Failure{"log_fsync_io_error", FaultOp::kSync, SQLITE_IOERR_FSYNC,
                              "disk I/O error", true}),
    [](const ::testing::TestParamInfo<Failure>& param) { return std::string(param.param.name); });

// A commit whose fsync failed leaves its frames in the log; the next commit writes over them. After
// a crash right after that next commit, the file holds it and nothing of the failed one, even when
// the failed one was longer (its tail no longer chains onto the log's checksums).
TEST_F(StoreFaultFixture, TheCommitAfterAFailedFsyncReplacesItInTheLog) {
  FaultVfs& vfs = FaultVfs::Get(kVfs);
  int64_t id = 0;
  {
    std::unique_ptr<SqliteStore> store = Open();
    ASSERT_NE(store, nullptr);
    absl::StatusOr<int64_t> created = store->CreateCampaign("kiln", Design(), Engine(1), "create-1");
    ASSERT_TRUE(created.ok()) << created.status();
    id = *created;
  }
  int points = 0;
  for (int64_t k = 0, n = 1;; ++k, ++n) {
    SCOPED_TRACE(absl::StrCat("fsync ", k + 1, ", write ", n));
    std::fflush(nullptr);
    const pid_t child = fork();
    if (child == 0) {
      SqliteStoreOptions options;
      options.vfs = vfs.name();
      absl::StatusOr<std::unique_ptr<SqliteStore>> store = SqliteStore::Open(path_, options);
      if (!store.ok()) _exit(2);
      vfs.Arm({FaultOp::kSync, FaultFile::kWal, k, 1, SQLITE_IOERR_FSYNC});
      // A long record (several pages), then the same write short.
      const absl::Status failed = (*store)->Commit(WriteNumber(id, n, 3000));
      if (failed.ok()) _exit(1);  // the commit made no more than k fsyncs
      vfs.Clear();
      _exit((*store)->Commit(WriteNumber(id, n, 2)).ok() ? 0 : 3);  // then die at once
    }
    int wstatus = 0;
    ASSERT_EQ(waitpid(child, &wstatus, 0), child);
    ASSERT_TRUE(WIFEXITED(wstatus));
    std::unique_ptr<SqliteStore> store = Open();
    ASSERT_NE(store, nullptr);
    EXPECT_TRUE(store->CheckIntegrity().ok());
    absl::StatusOr<StoredCampaign> campaign = store->LoadCampaign(id);
    ASSERT_TRUE(campaign.ok()) << campaign.status();
    ASSERT_EQ(campaign->snapshot.trials_size(), n);
    if (WEXITSTATUS(wstatus) == 1) break;  // stored long: every fsync point is covered
    ASSERT_EQ(WEXITSTATUS(wstatus), 0);
    ++points;
    EXPECT_EQ(campaign->snapshot.trials(static_cast<int>(n - 1)).internal_size(), 2)
        << "the failed commit's record came back";
    EXPECT_EQ(PartsOf(*store, id, n), 4);
  }
  EXPECT_GE(points, 1);
}

// A checkpoint copies the log into the main file after a commit; when it cannot write the main
// file, the commits before it are still durable in the log and must be acknowledged as such.
TEST_F(StoreFaultFixture, AFailingCheckpointDoesNotFailTheCommitsItFollows) {
  FaultVfs& vfs = FaultVfs::Get(kVfs);
  std::unique_ptr<SqliteStore> store = Open();
  ASSERT_NE(store, nullptr);
  absl::StatusOr<int64_t> created = store->CreateCampaign("kiln", Design(), Engine(1), "create-1");
  ASSERT_TRUE(created.ok()) << created.status();
  const int64_t id = *created;

  vfs.Arm({FaultOp::kWrite, FaultFile::kMainDb, 0, FaultRule::kForever, SQLITE_IOERR_WRITE});
  // Records of ~4 KB: the log passes SQLite's checkpoint threshold (1000 pages) well within 400
  // writes.
  int failed = 0;
  for (int64_t n = 1; n <= 400; ++n) {
    const absl::Status status = store->Commit(WriteNumber(id, n, 500));
    if (!status.ok()) {
      ++failed;
      ADD_FAILURE() << "write " << n << " failed although its transaction is in the log: " << status;
      if (failed > 3) break;
    }
  }
  EXPECT_GT(vfs.injected(), 0) << "no checkpoint was attempted; write more";
  vfs.Clear();
  EXPECT_TRUE(store->CheckIntegrity().ok());
  store.reset();  // the last connection checkpoints for real now
  absl::StatusOr<std::unique_ptr<SqliteStore>> plain = SqliteStore::Open(path_);
  ASSERT_TRUE(plain.ok()) << plain.status();
  for (int64_t n = 1; n <= 400; ++n) ASSERT_EQ(PartsOf(**plain, id, n), 4) << "write " << n;
  EXPECT_TRUE((*plain)->CheckIntegrity().ok());
}

}  // namespace
}  // namespace ogive::storage
