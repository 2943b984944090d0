// A campaign whose commit fails: the request gets UNAVAILABLE, nothing of it is stored, the campaign goes
// back to what the database holds, and the next request succeeds. Two ways in (STYLE: fake the
// environment, not the logic): a store wrapper that fails one chosen commit, and a real SqliteStore
// over FaultVfs (tests/support/fault_vfs.h), whose disk fails beneath SQLite — a failed log write, a
// full disk, a failed fsync, another connection holding the write lock, a disk that is slow while a
// client's deadline runs out.
#include <sqlite3.h>
#include <unistd.h>

#include <chrono>
#include <cmath>
#include <functional>
#include <filesystem>
#include <memory>
#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "absl/time/clock.h"
#include "gmock/gmock.h"
#include "google/protobuf/util/message_differencer.h"
#include "grpcpp/grpcpp.h"
#include "gtest/gtest.h"
#include "ogive/v1/service.grpc.pb.h"
#include "server/service/authorizer.h"
#include "server/service/grpc_service.h"
#include "server/service/handlers.h"
#include "server/service/registry.h"
#include "storage/sqlite_store.h"
#include "tests/support/fault_vfs.h"
#include "tests/support/forwarding_store.h"
#include "tests/support/status_activity.h"

namespace ogive::service {
namespace {

// Delegates to a real store; when armed, the next write fails as a disk error would. The failed
// write is passed on poisoned (a NaN the store refuses in its place), so that the store's chain rule
// fails the writes queued behind it exactly as a real failure does.
class FaultyStore final : public testing::ForwardingStore {
 public:
  using ForwardingStore::ForwardingStore;
  void FailNextCommit() { fail_next_ = true; }

  std::unique_ptr<storage::PendingCommit> CommitAsync(storage::CampaignWrite write) override {
    if (!fail_next_) return real()->CommitAsync(std::move(write));
    fail_next_ = false;
    write.trials.emplace_back().set_number(1);
    write.trials.back().set_score(std::nan(""));
    return std::make_unique<Injected>(real()->CommitAsync(std::move(write)));
  }

 private:
  class Injected final : public storage::PendingCommit {
   public:
    explicit Injected(std::unique_ptr<storage::PendingCommit> real) : real_(std::move(real)) {}
    absl::Status Wait() override {
      (void)real_->Wait();  // refused by the store, which breaks the chain
      return absl::UnavailableError("injected: disk I/O error");
    }

   private:
    std::unique_ptr<storage::PendingCommit> real_;
  };

  bool fail_next_ = false;
};

v1::CampaignDesign Design() {
  v1::CampaignDesign d;
  d.set_name("kiln-fault");
  for (const char* name : {"peak_temp", "soak"}) {
    v1::Parameter* p = d.add_parameters();
    p->set_name(name);
    p->mutable_real()->set_low(0);
    p->mutable_real()->set_high(10);
  }
  d.mutable_objective()->set_direction(v1::DIRECTION_LOWER_IS_BETTER);
  d.set_seed(5);
  return d;
}

TEST(CommitFailureTest, AFailedCommitStoresNothingAndTheCampaignKeepsServing) {
  const std::string dir = ::testing::TempDir() + "/commit_failure_" + std::to_string(::getpid());
  std::filesystem::create_directories(dir);
  const std::string path = dir + "/fault.db";
  std::filesystem::remove(path);
  absl::StatusOr<std::unique_ptr<storage::SqliteStore>> real = storage::SqliteStore::Open(path);
  ASSERT_TRUE(real.ok()) << real.status();
  FaultyStore store(real->get());
  Registry registry(&store, ServiceLimits());
  const absl::Time now = absl::FromUnixSeconds(1800000000);

  v1::CreateCampaignRequest create;
  *create.mutable_design() = Design();
  ASSERT_TRUE(CreateCampaign(registry, create).ok());
  v1::AskRequest ask;
  ask.set_campaign("kiln-fault");
  ask.set_count(3);
  ask.set_worker("kiln-1");
  absl::StatusOr<v1::AskResponse> asked = Ask(registry, ask, now);
  ASSERT_TRUE(asked.ok()) << asked.status();

  v1::TellRequest tell;
  tell.set_campaign("kiln-fault");
  tell.set_worker("kiln-1");
  v1::Report* report = tell.add_reports();
  report->set_trial(asked->trials(0).number());
  report->mutable_outcome()->set_score(2.5);

  store.FailNextCommit();
  absl::StatusOr<v1::TellResponse> failed = Tell(registry, tell, now);
  EXPECT_EQ(failed.status().code(), absl::StatusCode::kUnavailable) << failed.status();

  // Memory went back to the database: the trial is still leased, nothing counts as reported.
  v1::GetCampaignRequest get;
  get.set_campaign("kiln-fault");
  absl::StatusOr<v1::CampaignView> view = GetCampaign(registry, get);
  ASSERT_TRUE(view.ok());
  EXPECT_EQ(view->status().reported(), 0);
  EXPECT_EQ(view->status().leased(), 3);
  absl::StatusOr<storage::TrialPage> stored = store.ListTrials(1, v1::TRIAL_STATE_REPORTED, 0, 10);
  ASSERT_TRUE(stored.ok());
  EXPECT_TRUE(stored->trials.empty());

  // The retry succeeds and is stored; a restarted registry sees exactly the same campaign.
  absl::StatusOr<v1::TellResponse> retried = Tell(registry, tell, now + absl::Seconds(1));
  ASSERT_TRUE(retried.ok()) << retried.status();
  EXPECT_EQ(retried->results(0).code(), 0);
  EXPECT_FALSE(retried->results(0).duplicate());
  absl::StatusOr<v1::AskResponse> more = Ask(registry, ask, now + absl::Seconds(2));
  ASSERT_TRUE(more.ok()) << more.status();
  EXPECT_EQ(more->trials(0).number(), 4);  // numbering continued from what is on disk

  Registry restarted(&store, ServiceLimits());
  ASSERT_TRUE(restarted.LoadAll().ok());
  absl::StatusOr<v1::CampaignView> before = GetCampaign(registry, get);
  absl::StatusOr<v1::CampaignView> after = GetCampaign(restarted, get);
  ASSERT_TRUE(before.ok() && after.ok());
  // Recent activity is dated by the clock and asks are kept in memory only: not compared.
  for (v1::CampaignView* compared : {&*before, &*after}) {
    testing::ClearActivity(compared->mutable_status());
  }
  // Compared as data: map fields (candidate values) serialize in no fixed order.
  EXPECT_TRUE(google::protobuf::util::MessageDifferencer::Equals(*before, *after))
      << before->DebugString() << "\nvs\n" << after->DebugString();
  EXPECT_EQ(after->status().reported(), 1);
}

// ---- Disk failures beneath SQLite ----

using ::ogive::testing::FaultFile;
using ::ogive::testing::FaultOp;
using ::ogive::testing::FaultRule;
using ::ogive::testing::FaultVfs;
using ::testing::AllOf;
using ::testing::HasSubstr;

constexpr char kVfs[] = "ogive-fault-service";
constexpr char kCampaign[] = "kiln-disk";

bool Same(const google::protobuf::Message& a, const google::protobuf::Message& b) {
  return google::protobuf::util::MessageDifferencer::Equals(a, b);
}

// One kind of failure, as the campaign meets it.
struct DiskFailure {
  const char* name;
  FaultRule rule;     // armed for every write (times = kForever) while the failure lasts
  bool lock_held;     // instead of a rule: another connection holds the write lock
  const char* cause;  // in the message the client gets
};

// One request that writes, run while the failure lasts and again once it is over.
struct WriteRequest {
  const char* name;
  std::function<absl::Status(Registry&, absl::Time)> run;
};

// Everything a client can read of the campaign (its view and every trial), and what the file holds.
struct CampaignState {
  v1::CampaignView view;
  v1::ListTrialsResponse trials;
  std::string stored;  // the stored snapshot, generations and events, as bytes
};

class DiskFailureTest : public ::testing::TestWithParam<std::tuple<DiskFailure, WriteRequest>> {
 protected:
  void SetUp() override {
    std::string pattern = ::testing::TempDir() + "ogive_disk_failure_XXXXXX";
    ASSERT_NE(mkdtemp(pattern.data()), nullptr);
    dir_ = pattern;
    path_ = dir_ + "/ogive.db";
    storage::SqliteStore::Options options;
    options.vfs = FaultVfs::Get(kVfs).name();
    options.busy_timeout_ms = 50;
    absl::StatusOr<std::unique_ptr<storage::SqliteStore>> store = storage::SqliteStore::Open(path_, options);
    ASSERT_TRUE(store.ok()) << store.status();
    store_ = *std::move(store);
    registry_ = std::make_unique<Registry>(store_.get(), ServiceLimits());

    // A campaign with 3 reports pending and one to go before an update (population 4), 4 trials leased.
    v1::CreateCampaignRequest create;
    *create.mutable_design() = Design();
    create.mutable_design()->set_name(kCampaign);
    create.mutable_design()->set_population_size(4);
    ASSERT_TRUE(CreateCampaign(*registry_, create).ok());
    v1::AskRequest ask;
    ask.set_campaign(kCampaign);
    ask.set_count(8);
    ask.set_worker("kiln-1");
    absl::StatusOr<v1::AskResponse> asked = Ask(*registry_, ask, now_);
    ASSERT_TRUE(asked.ok()) << asked.status();
    v1::TellRequest tell;
    tell.set_campaign(kCampaign);
    tell.set_worker("kiln-1");
    for (int64_t trial : {1, 2, 3}) {
      v1::Report* r = tell.add_reports();
      r->set_trial(trial);
      r->mutable_outcome()->set_score(0.5 * static_cast<double>(trial));
    }
    ASSERT_TRUE(Tell(*registry_, tell, now_).ok());
  }

  void TearDown() override {
    FaultVfs::Get(kVfs).Clear();
    registry_.reset();
    store_.reset();
    std::error_code error;
    std::filesystem::remove_all(dir_, error);
  }

  CampaignState Read(Registry& registry) {
    CampaignState state;
    v1::GetCampaignRequest get;
    get.set_campaign(kCampaign);
    absl::StatusOr<v1::CampaignView> view = GetCampaign(registry, get);
    EXPECT_TRUE(view.ok()) << view.status();
    if (view.ok()) state.view = *view;
    v1::ListTrialsRequest list;
    list.set_campaign(kCampaign);
    list.set_page_size(1000);
    absl::StatusOr<v1::ListTrialsResponse> trials = ListTrials(registry, list);
    EXPECT_TRUE(trials.ok()) << trials.status();
    if (trials.ok()) state.trials = *trials;
    absl::StatusOr<storage::StoredCampaign> stored = store_->LoadCampaign(1);
    absl::StatusOr<std::vector<v1::GenerationSummary>> generations = store_->ListGenerations(1);
    absl::StatusOr<std::vector<storage::Event>> events = store_->ListEvents(1, 100000);
    EXPECT_TRUE(stored.ok() && generations.ok() && events.ok());
    if (stored.ok() && generations.ok() && events.ok()) {
      // Compared as data: candidate maps serialize in no fixed order.
      state.stored = absl::StrCat(stored->snapshot.trials_size(), " trials, engine ",
                                  stored->snapshot.engine().ShortDebugString(), ", ",
                                  generations->size(), " generations, ", events->size(), " events");
      for (const v1::TrialRecord& t : stored->snapshot.trials()) absl::StrAppend(&state.stored, "|", t.ShortDebugString());
    }
    return state;
  }

  void ExpectSame(const CampaignState& a, const CampaignState& b) {
    // Recent activity is dated by the clock and asks are kept in memory only: not compared.
    v1::CampaignView va = a.view, vb = b.view;
    for (v1::CampaignView* v : {&va, &vb}) {
      testing::ClearActivity(v->mutable_status());
    }
    EXPECT_TRUE(Same(va, vb)) << va.DebugString() << "\nvs\n" << vb.DebugString();
    EXPECT_TRUE(Same(a.trials, b.trials));
    EXPECT_EQ(a.stored, b.stored);
  }

  std::string dir_;
  std::string path_;
  const absl::Time now_ = absl::FromUnixSeconds(1800000000);
  std::unique_ptr<storage::SqliteStore> store_;
  std::unique_ptr<Registry> registry_;
};

// Holds the database's write lock on a connection of its own, as another program might.
class WriteLockHolder {
 public:
  explicit WriteLockHolder(const std::string& path) {
    EXPECT_EQ(sqlite3_open_v2(path.c_str(), &db_, SQLITE_OPEN_READWRITE, nullptr), SQLITE_OK);
    sqlite3_db_config(db_, SQLITE_DBCONFIG_NO_CKPT_ON_CLOSE, 1, nullptr);
    EXPECT_EQ(sqlite3_exec(db_, "BEGIN IMMEDIATE", nullptr, nullptr, nullptr), SQLITE_OK);
  }
  ~WriteLockHolder() {
    sqlite3_exec(db_, "ROLLBACK", nullptr, nullptr, nullptr);
    sqlite3_close_v2(db_);
  }

 private:
  sqlite3* db_ = nullptr;
};

TEST_P(DiskFailureTest, TheRequestFailsClearlyReadsGoOnAndWritesResumeAfterwards) {
  const auto& [failure, request] = GetParam();
  FaultVfs& vfs = FaultVfs::Get(kVfs);
  const CampaignState before = Read(*registry_);
  const absl::Time at = now_ + absl::Seconds(1);
  {
    std::unique_ptr<WriteLockHolder> lock;
    if (failure.lock_held) {
      lock = std::make_unique<WriteLockHolder>(path_);
    } else {
      vfs.Arm(failure.rule);
    }
    // While the failure lasts, the request fails with UNAVAILABLE naming the database and the
    // cause, however often it is tried; the campaign reads as before, in memory and on disk.
    for (int attempt = 0; attempt < 2; ++attempt) {
      const absl::Status failed = request.run(*registry_, at);
      EXPECT_EQ(failed.code(), absl::StatusCode::kUnavailable) << failed;
      EXPECT_THAT(std::string(failed.message()), AllOf(HasSubstr(path_), HasSubstr(failure.cause)));
      ExpectSame(Read(*registry_), before);
    }
    if (!failure.lock_held) {
      EXPECT_GT(vfs.injected(), 0);
    }
    vfs.Clear();
  }
  // The failure is over: the request goes through, and a registry loaded from the file serves
  // what the live one serves.
  const absl::Status retried = request.run(*registry_, at);
  ASSERT_TRUE(retried.ok()) << retried;
  const CampaignState after = Read(*registry_);
  EXPECT_FALSE(Same(after.view, before.view)) << "the request changed nothing";
  Registry restarted(store_.get(), ServiceLimits());
  ASSERT_TRUE(restarted.LoadAll().ok());
  ExpectSame(Read(restarted), after);
  EXPECT_TRUE(store_->CheckIntegrity().ok());
}

const DiskFailure kDiskFailures[] = {
    {"log_write_io_error", {FaultOp::kWrite, FaultFile::kWal, 0, FaultRule::kForever, SQLITE_IOERR_WRITE}, false,
     "disk I/O error"},
    {"disk_full", {FaultOp::kWrite, FaultFile::kWal, 0, FaultRule::kForever, SQLITE_FULL}, false, "disk is full"},
    {"log_fsync_io_error", {FaultOp::kSync, FaultFile::kWal, 0, FaultRule::kForever, SQLITE_IOERR_FSYNC}, false,
     "disk I/O error"},
    {"write_lock_held", {}, true, "locked"},
};

const WriteRequest kWriteRequests[] = {
    {"tell_completing_a_cohort",
     [](Registry& registry, absl::Time now) {
       v1::TellRequest tell;
       tell.set_campaign(kCampaign);
       tell.set_worker("kiln-1");
       v1::Report* r = tell.add_reports();
       r->set_trial(4);
       r->mutable_outcome()->set_score(9.0);
       return Tell(registry, tell, now).status();
     }},
    {"ask_with_a_request_id",
     [](Registry& registry, absl::Time now) {
       v1::AskRequest ask;
       ask.set_campaign(kCampaign);
       ask.set_count(2);
       ask.set_worker("kiln-2");
       ask.set_request_id("ask-during-the-failure");
       return Ask(registry, ask, now).status();
     }},
    {"lease_sweep",
     [](Registry& registry, absl::Time now) {
       absl::StatusOr<std::shared_ptr<CampaignHost>> host = registry.Find(kCampaign);
       if (!host.ok()) return host.status();
       return (*host)->Sweep(now + absl::Hours(24 * 40)).status();  // every lease ran out
     }},
    {"pause",
     [](Registry& registry, absl::Time now) {
       v1::SetPhaseRequest pause;
       pause.set_campaign(kCampaign);
       pause.set_command(v1::PHASE_COMMAND_PAUSE);
       return SetPhase(registry, pause, now).status();
     }},
};

INSTANTIATE_TEST_SUITE_P(
    Faults, DiskFailureTest,
    ::testing::Combine(::testing::ValuesIn(kDiskFailures), ::testing::ValuesIn(kWriteRequests)),
    [](const ::testing::TestParamInfo<std::tuple<DiskFailure, WriteRequest>>& param) {
      return absl::StrCat(std::get<0>(param.param).name, "_", std::get<1>(param.param).name);
    });

// A client whose deadline runs out while its commit waits for a slow disk, and which then retries
// with the same request: the retry waits for that commit and answers what it stored; nothing is
// applied twice.
TEST(DeadlineRetryTest, ARetryAfterAnExpiredDeadlineIsAppliedOnce) {
  std::string pattern = ::testing::TempDir() + "ogive_deadline_XXXXXX";
  ASSERT_NE(mkdtemp(pattern.data()), nullptr);
  const std::string path = std::string(pattern) + "/ogive.db";
  FaultVfs& vfs = FaultVfs::Get(kVfs);
  storage::SqliteStore::Options options;
  options.vfs = vfs.name();
  absl::StatusOr<std::unique_ptr<storage::SqliteStore>> store = storage::SqliteStore::Open(path, options);
  ASSERT_TRUE(store.ok()) << store.status();
  Registry registry(store->get(), ServiceLimits());
  AuthOptions open;
  open.require_tokens = false;  // as `ogived --no-auth`
  std::unique_ptr<Authorizer> authorizer = *Authorizer::Create(nullptr, open, [] { return absl::Now(); });
  OgiveService service(&registry, authorizer.get(), [] { return absl::Now(); });
  grpc::ServerBuilder builder;
  int port = 0;
  builder.AddListeningPort("127.0.0.1:0", grpc::InsecureServerCredentials(), &port);
  builder.RegisterService(&service);
  std::unique_ptr<grpc::Server> server = builder.BuildAndStart();
  ASSERT_NE(server, nullptr);
  auto stub = v1::Ogive::NewStub(
      grpc::CreateChannel(absl::StrCat("127.0.0.1:", port), grpc::InsecureChannelCredentials()));
  auto call = [&](absl::Duration deadline, auto method, const auto& request, auto* response) {
    grpc::ClientContext context;
    context.set_deadline(std::chrono::system_clock::now() +
                         std::chrono::milliseconds(absl::ToInt64Milliseconds(deadline)));
    return ((*stub).*method)(&context, request, response);
  };

  v1::CreateCampaignRequest create;
  *create.mutable_design() = Design();
  v1::CampaignView created;
  ASSERT_TRUE(call(absl::Seconds(10), &v1::Ogive::Stub::CreateCampaign, create, &created).ok());
  const FaultRule slow_fsync{FaultOp::kSync, FaultFile::kWal, 0, 1, 0, absl::Milliseconds(1500)};

  // Ask: the first attempt's deadline passes during the slow fsync; the retry, sent at once with
  // the same request id, gets the same trials.
  v1::AskRequest ask;
  ask.set_campaign("kiln-fault");
  ask.set_count(2);
  ask.set_worker("kiln-1");
  ask.set_request_id("ask-1");
  vfs.Arm(slow_fsync);
  v1::AskResponse first;
  EXPECT_EQ(call(absl::Milliseconds(300), &v1::Ogive::Stub::Ask, ask, &first).error_code(),
            grpc::StatusCode::DEADLINE_EXCEEDED);
  v1::AskResponse retried;
  const grpc::Status retried_status = call(absl::Seconds(10), &v1::Ogive::Stub::Ask, ask, &retried);
  ASSERT_TRUE(retried_status.ok()) << retried_status.error_message();
  EXPECT_EQ(vfs.injected(), 1);
  ASSERT_EQ(retried.trials_size(), 2);
  EXPECT_EQ(retried.trials(0).number(), 1);
  EXPECT_EQ(retried.trials(1).number(), 2);

  // Tell: likewise; the retry is a duplicate of the stored report.
  v1::TellRequest tell;
  tell.set_campaign("kiln-fault");
  tell.set_worker("kiln-1");
  tell.set_worker("kiln-1");
  v1::Report* report = tell.add_reports();
  report->set_trial(1);
  report->mutable_outcome()->set_score(4.25);
  vfs.Arm(slow_fsync);
  v1::TellResponse told;
  EXPECT_EQ(call(absl::Milliseconds(300), &v1::Ogive::Stub::Tell, tell, &told).error_code(),
            grpc::StatusCode::DEADLINE_EXCEEDED);
  const grpc::Status told_again = call(absl::Seconds(10), &v1::Ogive::Stub::Tell, tell, &told);
  ASSERT_TRUE(told_again.ok()) << told_again.error_message();
  EXPECT_EQ(vfs.injected(), 1);
  ASSERT_EQ(told.results_size(), 1);
  EXPECT_EQ(told.results(0).code(), 0);
  EXPECT_TRUE(told.results(0).duplicate());
  vfs.Clear();

  // Applied once: two trials, one report, one "tell" event; the same after a reload from the file.
  server->Shutdown(std::chrono::system_clock::now() + std::chrono::seconds(5));
  absl::StatusOr<storage::StoredCampaign> stored = (*store)->LoadCampaign(1);
  ASSERT_TRUE(stored.ok()) << stored.status();
  EXPECT_EQ(stored->snapshot.trials_size(), 2);
  EXPECT_EQ(stored->snapshot.engine().report_sequence(), 1);
  EXPECT_EQ(stored->snapshot.trials(0).score(), 4.25);
  absl::StatusOr<std::vector<storage::Event>> events = (*store)->ListEvents(1, 1000);
  ASSERT_TRUE(events.ok());
  int asks = 0, tells = 0;
  for (const storage::Event& e : *events) {
    asks += e.kind == "ask";
    tells += e.kind == "tell";
  }
  EXPECT_EQ(asks, 2);
  EXPECT_EQ(tells, 1);
  server.reset();
  store->reset();
  std::error_code error;
  std::filesystem::remove_all(pattern, error);
}

}  // namespace
}  // namespace ogive::service
