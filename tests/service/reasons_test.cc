// Refusals a client must act on carry a machine-readable reason (google.rpc.ErrorInfo in the
// grpc-status-details-bin trailer, domain "ogive.v1"), read here as a client reads it, from a real
// ogived over loopback: CAMPAIGN_NOT_FOUND, INVALID_FIELD, CAMPAIGN_PAUSED, CAMPAIGN_DONE,
// BUDGET_COMMITTED, LEASE_HELD_BY_OTHER, TRIAL_NOT_FOUND and OUTCOME_CONFLICT (the last two also per
// report in Tell's results); and page tokens, which are bound to their listing, campaign and filter
// (a foreign token is INVALID_ARGUMENT naming page_token, never a silent skip), with ListCampaigns
// paging like the other listings. RATE_LIMITED is checked in auth_test, which has tokens.
#include <unistd.h>

#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "absl/time/clock.h"
#include "absl/time/time.h"
#include "client/error_reason.h"
#include "client/ogive_client.h"
#include "gmock/gmock.h"
#include "grpcpp/grpcpp.h"
#include "gtest/gtest.h"
#include "ogive/v1/service.grpc.pb.h"
#include "tests/support/ogived_process.h"
#include "tests/support/ogived_test_main.h"

namespace ogive {
namespace {

v1::CampaignDesign Design(const std::string& name, int64_t budget = 0) {
  v1::CampaignDesign design;
  design.set_name(name);
  v1::Parameter* p = design.add_parameters();
  p->set_name("peak_temp");
  p->set_unit("degC");
  p->mutable_real()->set_low(1100);
  p->mutable_real()->set_high(1300);
  design.mutable_objective()->set_direction(v1::DIRECTION_LOWER_IS_BETTER);
  design.set_trial_budget(budget);
  design.set_seed(17);
  return design;
}

// The reason `status` carries ("" if none), after checking its code.
std::string ReasonOf(const absl::Status& status, absl::StatusCode code) {
  EXPECT_EQ(status.code(), code) << status;
  std::optional<client::ErrorReason> why = client::ErrorReasonOf(status);
  if (!why.has_value()) return "";
  EXPECT_EQ(why->domain, "ogive.v1");
  return why->reason;
}

class ReasonsTest : public ::testing::Test {
 protected:
  void SetUp() override {
    testing::OgivedOptions options;
    options.binary = testing::OgivedBinary();
    options.db = absl::StrCat(::testing::TempDir(), "reasons_test_", getpid(), ".db");
    options.log_path = options.db + ".log";
    server_ = std::make_unique<testing::OgivedProcess>(options);
    ASSERT_TRUE(server_->Start().ok()) << server_->LogTail();
    client::ClientOptions client_options = server_->ClientOptions();
    client_options.max_attempts = 1;
    client_ = server_->NewClient(client_options);
    stub_ = v1::Ogive::NewStub(grpc::CreateChannel(server_->target(), grpc::InsecureChannelCredentials()));
  }
  void TearDown() override {
    server_->Kill(15);
    for (const char* suffix : {"", "-wal", "-shm", ".lock", ".log", ".admin.sock"}) {
      unlink((server_->options().db + suffix).c_str());
    }
  }

  std::unique_ptr<testing::OgivedProcess> server_;
  std::unique_ptr<client::Client> client_;
  std::unique_ptr<v1::Ogive::Stub> stub_;
};

TEST_F(ReasonsTest, EachRefusalCarriesItsReason) {
  ASSERT_TRUE(client_->CreateCampaign(Design("kiln")).ok());
  // Unknown campaign, malformed field.
  EXPECT_EQ(ReasonOf(client_->GetCampaign("no-such").status(), absl::StatusCode::kNotFound), "CAMPAIGN_NOT_FOUND");
  absl::Status bad = client_->Ask("kiln", 0, "bench-1").status();
  EXPECT_EQ(ReasonOf(bad, absl::StatusCode::kInvalidArgument), "INVALID_FIELD");
  EXPECT_EQ(client::ErrorReasonOf(bad)->metadata["field"], "count");

  // A lease held by another worker; unknown trials, on Renew and per report on Tell.
  absl::StatusOr<v1::AskResponse> asked = client_->Ask("kiln", 2, "bench-1");
  ASSERT_TRUE(asked.ok()) << asked.status();
  const int64_t first = asked->trials(0).number();
  EXPECT_EQ(ReasonOf(client_->Renew("kiln", {first}, "bench-2").status(), absl::StatusCode::kFailedPrecondition),
            "LEASE_HELD_BY_OTHER");
  EXPECT_EQ(ReasonOf(client_->Renew("kiln", {999}, "bench-1").status(), absl::StatusCode::kNotFound),
            "TRIAL_NOT_FOUND");
  v1::Report score;
  score.set_trial(first);
  score.mutable_outcome()->set_score(3.5);
  v1::Report other = score;
  other.mutable_outcome()->set_score(4.5);
  v1::Report unknown = score;
  unknown.set_trial(999);
  ASSERT_TRUE(client_->Tell("kiln", {score}, "bench-1").ok());
  EXPECT_EQ(ReasonOf(client_->Renew("kiln", {first}, "bench-1").status(), absl::StatusCode::kFailedPrecondition),
            "TRIAL_ALREADY_REPORTED");
  EXPECT_EQ(ReasonOf(client_->CreateCampaign(Design("kiln")).status(), absl::StatusCode::kAlreadyExists),
            "CAMPAIGN_EXISTS");
  v1::Report graded = score;  // a grade on a scored campaign: the whole call is refused, naming the report
  graded.set_trial(asked->trials(1).number());
  graded.mutable_outcome()->set_grade("good");
  absl::Status malformed = client_->Tell("kiln", {graded}, "bench-1").status();
  EXPECT_EQ(ReasonOf(malformed, absl::StatusCode::kInvalidArgument), "INVALID_FIELD");
  EXPECT_EQ(client::ErrorReasonOf(malformed)->metadata["field"], "reports[0].outcome");
  absl::StatusOr<v1::TellResponse> told = client_->Tell("kiln", {other, unknown, score}, "bench-1");
  ASSERT_TRUE(told.ok()) << told.status();
  ASSERT_EQ(told->results_size(), 3);
  EXPECT_EQ(told->results(0).code(), static_cast<int>(grpc::StatusCode::ALREADY_EXISTS));
  EXPECT_EQ(told->results(0).reason(), "OUTCOME_CONFLICT");
  EXPECT_EQ(told->results(1).code(), static_cast<int>(grpc::StatusCode::NOT_FOUND));
  EXPECT_EQ(told->results(1).reason(), "TRIAL_NOT_FOUND");
  EXPECT_EQ(told->results(2).code(), 0);
  EXPECT_TRUE(told->results(2).duplicate());
  EXPECT_EQ(told->results(2).reason(), "");

  // Paused: wait. Done: stop for good, with the done reason in the metadata.
  ASSERT_TRUE(client_->SetPhase("kiln", v1::PHASE_COMMAND_PAUSE).ok());
  EXPECT_EQ(ReasonOf(client_->Ask("kiln", 1, "bench-1").status(), absl::StatusCode::kFailedPrecondition),
            "CAMPAIGN_PAUSED");
  ASSERT_TRUE(client_->SetPhase("kiln", v1::PHASE_COMMAND_FINISH).ok());
  absl::Status done = client_->Ask("kiln", 1, "bench-1").status();
  EXPECT_EQ(ReasonOf(done, absl::StatusCode::kFailedPrecondition), "CAMPAIGN_DONE");
  EXPECT_EQ(client::ErrorReasonOf(done)->metadata["done_reason"], "stopped");
  EXPECT_EQ(ReasonOf(client_->SetPhase("kiln", v1::PHASE_COMMAND_RESUME).status(),
                     absl::StatusCode::kFailedPrecondition),
            "CAMPAIGN_DONE");
}

// A LeaseRenewer stops for good once the server says its lease can never be renewed again.
TEST_F(ReasonsTest, ALeaseRenewerGivesUpOnATrialThatIsNoLongerLeased) {
  ASSERT_TRUE(client_->CreateCampaign(Design("anneal")).ok());
  absl::StatusOr<v1::AskResponse> asked = client_->Ask("anneal", 1, "node-1");
  ASSERT_TRUE(asked.ok()) << asked.status();
  const int64_t trial = asked->trials(0).number();
  v1::Report done;
  done.set_trial(trial);
  done.mutable_outcome()->set_score(1.25);
  ASSERT_TRUE(client_->Tell("anneal", {done}, "node-1").ok());
  client::LeaseRenewer renewer(client_.get(), "anneal", {trial}, "node-1", 60, absl::Milliseconds(20));
  const absl::Time deadline = absl::Now() + absl::Seconds(10);
  while (!renewer.gave_up() && absl::Now() < deadline) absl::SleepFor(absl::Milliseconds(10));
  EXPECT_TRUE(renewer.gave_up());
  const int failures = renewer.failures();
  absl::SleepFor(absl::Milliseconds(100));  // five more intervals: no more attempts
  EXPECT_EQ(renewer.failures(), failures);
  EXPECT_EQ(renewer.renewals(), 0);
}

// A conflicting grade is refused naming both grades by their labels, as the technician wrote them.
TEST_F(ReasonsTest, AConflictingGradeIsRefusedNamingBothLabels) {
  v1::CampaignDesign design = Design("glaze");
  design.mutable_objective()->clear_direction();
  for (const char* label : {"cracked", "poor", "fair", "good"}) {
    design.mutable_objective()->mutable_grade_scale()->add_labels(label);
  }
  ASSERT_TRUE(client_->CreateCampaign(design).ok());
  absl::StatusOr<v1::AskResponse> asked = client_->Ask("glaze", 1, "bench");
  ASSERT_TRUE(asked.ok()) << asked.status();
  v1::Report good;
  good.set_trial(asked->trials(0).number());
  good.mutable_outcome()->set_grade("good");
  ASSERT_TRUE(client_->Tell("glaze", {good}, "bench").ok());
  v1::Report fair = good;
  fair.mutable_outcome()->set_grade("fair");
  absl::StatusOr<v1::TellResponse> told = client_->Tell("glaze", {fair}, "bench");
  ASSERT_TRUE(told.ok()) << told.status();
  EXPECT_EQ(told->results(0).reason(), "OUTCOME_CONFLICT");
  EXPECT_THAT(told->results(0).message(),
              ::testing::HasSubstr("already reported as grade 'good'; a different outcome (grade 'fair') is refused"));
}

TEST_F(ReasonsTest, ABudgetTakenByOutstandingTrialsSaysWaitAndFreesWhenOneIsVoided) {
  ASSERT_TRUE(client_->CreateCampaign(Design("farm", /*budget=*/2)).ok());
  absl::StatusOr<v1::AskResponse> asked = client_->Ask("farm", 5, "node-1");
  ASSERT_TRUE(asked.ok()) << asked.status();
  ASSERT_EQ(asked->trials_size(), 2);
  absl::Status full = client_->Ask("farm", 1, "node-2").status();
  EXPECT_EQ(ReasonOf(full, absl::StatusCode::kFailedPrecondition), "BUDGET_COMMITTED");
  v1::Report nothing;
  nothing.set_trial(asked->trials(0).number());
  nothing.mutable_outcome()->mutable_void_();
  ASSERT_TRUE(client_->Tell("farm", {nothing}, "node-1").ok());
  EXPECT_TRUE(client_->Ask("farm", 1, "node-2").ok());  // the voided trial's slot is free again
}

// Calls the stub with a deadline; the status as a client sees it.
template <typename Request, typename Response>
absl::Status Call(grpc::Status (v1::Ogive::Stub::*method)(grpc::ClientContext*, const Request&, Response*),
                  v1::Ogive::Stub& stub, const Request& request, Response* response) {
  grpc::ClientContext context;
  context.set_deadline(std::chrono::system_clock::now() + std::chrono::seconds(10));
  return client::StatusFromGrpc((stub.*method)(&context, request, response));
}

TEST_F(ReasonsTest, PageTokensAreBoundToTheirListingCampaignAndFilter) {
  for (const char* name : {"a-kiln", "b-kiln", "c-kiln", "d-kiln", "e-kiln"}) {
    ASSERT_TRUE(client_->CreateCampaign(Design(name)).ok());
  }
  for (const char* name : {"a-kiln", "b-kiln"}) {
    absl::StatusOr<v1::AskResponse> asked = client_->Ask(name, 6, "bench");
    ASSERT_TRUE(asked.ok()) << asked.status();
  }
  // ListCampaigns pages in name order.
  std::vector<std::string> names;
  v1::ListCampaignsRequest list;
  list.set_page_size(2);
  int pages = 0;
  do {
    v1::ListCampaignsResponse page;
    ASSERT_TRUE(Call(&v1::Ogive::Stub::ListCampaigns, *stub_, list, &page).ok());
    ASSERT_LE(page.campaigns_size(), 2);
    for (const v1::CampaignView& v : page.campaigns()) names.push_back(v.name());
    list.set_page_token(page.next_page_token());
    ++pages;
  } while (!list.page_token().empty() && pages < 10);
  EXPECT_THAT(names, ::testing::ElementsAre("a-kiln", "b-kiln", "c-kiln", "d-kiln", "e-kiln"));
  EXPECT_EQ(pages, 3);

  v1::ListTrialsRequest trials;
  trials.set_campaign("a-kiln");
  trials.set_page_size(2);
  v1::ListTrialsResponse first;
  ASSERT_TRUE(Call(&v1::Ogive::Stub::ListTrials, *stub_, trials, &first).ok());
  ASSERT_FALSE(first.next_page_token().empty());
  const std::string token = first.next_page_token();

  auto refused = [](const absl::Status& status) {
    std::optional<client::ErrorReason> why = client::ErrorReasonOf(status);
    return status.code() == absl::StatusCode::kInvalidArgument && why.has_value() &&
           why->reason == "INVALID_FIELD" && why->metadata["field"] == "page_token";
  };
  v1::ListTrialsResponse page;
  trials.set_page_token(token);
  EXPECT_TRUE(Call(&v1::Ogive::Stub::ListTrials, *stub_, trials, &page).ok());
  EXPECT_EQ(page.trials(0).number(), 3);
  // Another campaign, another filter, another listing, a forged or damaged token.
  v1::ListTrialsRequest elsewhere = trials;
  elsewhere.set_campaign("b-kiln");
  EXPECT_TRUE(refused(Call(&v1::Ogive::Stub::ListTrials, *stub_, elsewhere, &page)));
  v1::ListTrialsRequest filtered = trials;
  filtered.set_state(v1::TRIAL_STATE_LEASED);
  EXPECT_TRUE(refused(Call(&v1::Ogive::Stub::ListTrials, *stub_, filtered, &page)));
  v1::ListGenerationsRequest generations;
  generations.set_campaign("a-kiln");
  generations.set_page_token(token);
  v1::ListGenerationsResponse generation_page;
  EXPECT_TRUE(refused(Call(&v1::Ogive::Stub::ListGenerations, *stub_, generations, &generation_page)));
  v1::ListCampaignsRequest campaigns;
  campaigns.set_page_token(token);
  v1::ListCampaignsResponse campaign_page;
  EXPECT_TRUE(refused(Call(&v1::Ogive::Stub::ListCampaigns, *stub_, campaigns, &campaign_page)));
  // A token of this listing whose position is not a trial number: well formed, still refused.
  std::string not_a_number = token.substr(0, 9) + "LTE";  // base64 of "-1"
  for (const std::string& forged : {std::string("t2"), token.substr(0, token.size() - 1) + "!", std::string(300, 't'),
                                    "g" + token.substr(1), not_a_number}) {
    v1::ListTrialsRequest bad = trials;
    bad.set_page_token(forged);
    EXPECT_TRUE(refused(Call(&v1::Ogive::Stub::ListTrials, *stub_, bad, &page))) << forged;
  }
}

}  // namespace
}  // namespace ogive
