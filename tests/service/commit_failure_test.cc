// A study whose commit fails: the request gets UNAVAILABLE, nothing of it is stored, the study goes
// back to what the database holds, and the next request succeeds. The store is wrapped to inject a
// failure into one chosen commit (STYLE: fake the environment, not the logic).
#include <cmath>
#include <filesystem>
#include <memory>
#include <string>
#include <vector>

#include "gmock/gmock.h"
#include "google/protobuf/util/message_differencer.h"
#include "gtest/gtest.h"
#include "server/service/handlers.h"
#include "server/service/registry.h"
#include "storage/sqlite_store.h"

namespace ogive::service {
namespace {

// Delegates to a real store; when armed, the next write fails as a disk error would. The failed
// write is passed on poisoned (a NaN the store refuses in its place), so that the store's chain rule
// fails the writes queued behind it exactly as a real failure does.
class FaultyStore final : public storage::Store {
 public:
  explicit FaultyStore(storage::Store* real) : real_(real) {}
  void FailNextCommit() { fail_next_ = true; }

  absl::StatusOr<std::vector<storage::StoredStudy>> LoadAll() override { return real_->LoadAll(); }
  absl::StatusOr<int64_t> CreateStudy(const std::string& name, const v1::StudyDesign& design,
                                      const v1::EngineState& engine, const std::string& request_id) override {
    return real_->CreateStudy(name, design, engine, request_id);
  }
  std::unique_ptr<storage::PendingCommit> CommitAsync(storage::StudyWrite write) override {
    if (!fail_next_) return real_->CommitAsync(std::move(write));
    fail_next_ = false;
    write.trials.emplace_back().set_number(1);
    write.trials.back().set_score(std::nan(""));
    return std::make_unique<Injected>(real_->CommitAsync(std::move(write)));
  }
  absl::StatusOr<storage::TrialPage> ListTrials(int64_t study_id, std::optional<v1::TrialState> state,
                                                int64_t after_number, int limit) override {
    return real_->ListTrials(study_id, state, after_number, limit);
  }
  absl::StatusOr<std::vector<v1::GenerationSummary>> ListGenerations(int64_t study_id) override {
    return real_->ListGenerations(study_id);
  }
  absl::StatusOr<std::vector<storage::Event>> ListEvents(int64_t study_id, int limit) override {
    return real_->ListEvents(study_id, limit);
  }
  absl::StatusOr<int64_t> SizeBytes() override { return real_->SizeBytes(); }

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

  storage::Store* real_;
  bool fail_next_ = false;
};

v1::StudyDesign Design() {
  v1::StudyDesign d;
  d.set_name("kiln-fault");
  for (const char* name : {"peak_temp", "soak"}) {
    v1::Parameter* p = d.add_parameters();
    p->set_name(name);
    p->mutable_real()->set_low(0);
    p->mutable_real()->set_high(10);
  }
  d.mutable_objective()->set_direction(v1::LOWER_IS_BETTER);
  d.set_seed(5);
  return d;
}

TEST(CommitFailureTest, AFailedCommitStoresNothingAndTheStudyKeepsServing) {
  const std::string dir = ::testing::TempDir() + "/commit_failure_" + std::to_string(::getpid());
  std::filesystem::create_directories(dir);
  const std::string path = dir + "/fault.db";
  std::filesystem::remove(path);
  absl::StatusOr<std::unique_ptr<storage::SqliteStore>> real = storage::SqliteStore::Open(path);
  ASSERT_TRUE(real.ok()) << real.status();
  FaultyStore store(real->get());
  Registry registry(&store, ServiceLimits());
  const absl::Time now = absl::FromUnixSeconds(1800000000);

  v1::CreateStudyRequest create;
  *create.mutable_design() = Design();
  ASSERT_TRUE(CreateStudy(registry, create).ok());
  v1::AskRequest ask;
  ask.set_study("kiln-fault");
  ask.set_count(3);
  ask.set_worker("kiln-1");
  absl::StatusOr<v1::AskResponse> asked = Ask(registry, ask, now);
  ASSERT_TRUE(asked.ok()) << asked.status();

  v1::TellRequest tell;
  tell.set_study("kiln-fault");
  v1::Report* report = tell.add_reports();
  report->set_trial(asked->trials(0).number());
  report->mutable_outcome()->set_score(2.5);

  store.FailNextCommit();
  absl::StatusOr<v1::TellResponse> failed = Tell(registry, tell, now);
  EXPECT_EQ(failed.status().code(), absl::StatusCode::kUnavailable) << failed.status();

  // Memory went back to the database: the trial is still leased, nothing counts as reported.
  v1::GetStudyRequest get;
  get.set_study("kiln-fault");
  absl::StatusOr<v1::StudyView> view = GetStudy(registry, get);
  ASSERT_TRUE(view.ok());
  EXPECT_EQ(view->status().reported(), 0);
  EXPECT_EQ(view->status().leased(), 3);
  absl::StatusOr<storage::TrialPage> stored = store.ListTrials(1, v1::TRIAL_STATE_REPORTED, 0, 10);
  ASSERT_TRUE(stored.ok());
  EXPECT_TRUE(stored->trials.empty());

  // The retry succeeds and is stored; a restarted registry sees exactly the same study.
  absl::StatusOr<v1::TellResponse> retried = Tell(registry, tell, now + absl::Seconds(1));
  ASSERT_TRUE(retried.ok()) << retried.status();
  EXPECT_EQ(retried->results(0).code(), 0);
  EXPECT_FALSE(retried->results(0).duplicate());
  absl::StatusOr<v1::AskResponse> more = Ask(registry, ask, now + absl::Seconds(2));
  ASSERT_TRUE(more.ok()) << more.status();
  EXPECT_EQ(more->trials(0).number(), 4);  // numbering continued from what is on disk

  Registry restarted(&store, ServiceLimits());
  ASSERT_TRUE(restarted.LoadAll().ok());
  absl::StatusOr<v1::StudyView> before = GetStudy(registry, get);
  absl::StatusOr<v1::StudyView> after = GetStudy(restarted, get);
  ASSERT_TRUE(before.ok() && after.ok());
  // Recent activity is dated by the clock and asks are kept in memory only: not compared.
  for (v1::StudyView* compared : {&*before, &*after}) {
    compared->mutable_status()->clear_workers();
    compared->mutable_status()->clear_as_of_unix_ms();
    compared->mutable_status()->clear_reports_last_hour();
  }
  // Compared as data: map fields (candidate values) serialize in no fixed order.
  EXPECT_TRUE(google::protobuf::util::MessageDifferencer::Equals(*before, *after))
      << before->DebugString() << "\nvs\n" << after->DebugString();
  EXPECT_EQ(after->status().reported(), 1);
}

}  // namespace
}  // namespace ogive::service
