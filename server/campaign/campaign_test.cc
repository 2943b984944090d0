// Tests of the campaign engine's request rules (asks, reports, renewals, sweeps, phases and the trial
// budget), of plans that are not applied, of its determinism, and of Snapshot()/Restore().
#include "server/campaign/campaign.h"

#include <cmath>
#include <cstdint>
#include <deque>
#include <memory>
#include <optional>
#include <string>
#include <tuple>
#include <utility>
#include <vector>

#include "Eigen/Core"
#include "absl/status/status.h"
#include "absl/time/time.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "server/search/ranking.h"
#include "server/search/search_distribution.h"
#include "server/campaign/campaign_options.h"
#include "server/campaign/campaign_test_util.h"
#include "server/campaign/trial.h"

namespace ogive::campaign {
namespace {

using test_util::EventDriver;
using test_util::ExpectSameCampaign;
using test_util::ExpectSameTrial;
using test_util::kMinimize;
using test_util::MakeCampaign;
using test_util::MixedSpace;
using test_util::Origin;
using test_util::RealSpace;
using ::testing::HasSubstr;

Report MakeReport(int64_t trial, search::Outcome outcome) {
  Report r;
  r.trial = trial;
  r.outcome = outcome;
  return r;
}

// Two reals on [-1, 1]: λ = 4 + ⌊3 ln 2⌋ = 6 (Hansen's tutorial, arXiv:1604.00772, Table 1).
Campaign SmallCampaign(const CampaignOptions& options = {}) {
  return MakeCampaign(RealSpace(2, -1, 1), kMinimize, {}, options);
}

std::vector<int64_t> Numbers(const std::vector<Trial>& trials) {
  std::vector<int64_t> numbers;
  for (const Trial& t : trials) numbers.push_back(t.number);
  return numbers;
}

// Reports a score for each trial in [first, last], one Tell per trial.
void ReportScores(Campaign& campaign, int64_t first, int64_t last, absl::Time now) {
  for (int64_t k = first; k <= last; ++k) {
    const Report r = MakeReport(k, search::Outcome::Score(static_cast<double>(k)));
    absl::StatusOr<std::vector<ReportResult>> results = campaign.Tell({&r, 1}, now);
    ASSERT_TRUE(results.ok()) << results.status();
    ASSERT_TRUE((*results)[0].status.ok()) << (*results)[0].status;
  }
}

// ---------------------------------------------------------------------------------------------
// Asks.

TEST(CampaignAskTest, CountOutsideOneToTheMaximumIsInvalidArgumentNamingCount) {
  Campaign campaign = SmallCampaign();
  for (int count : {0, -3, Campaign::kMaxAskCount + 1}) {
    absl::StatusOr<std::vector<Trial>> asked = campaign.Ask(count, "w", std::nullopt, Origin());
    EXPECT_EQ(asked.status().code(), absl::StatusCode::kInvalidArgument) << count;
    EXPECT_THAT(std::string(asked.status().message()), HasSubstr("count")) << count;
  }
  EXPECT_EQ(campaign.trial_count(), 0);
  absl::StatusOr<std::vector<Trial>> most =
      campaign.Ask(Campaign::kMaxAskCount, "w", std::nullopt, Origin());
  ASSERT_TRUE(most.ok()) << most.status();
  EXPECT_EQ(static_cast<int>(most->size()), Campaign::kMaxAskCount);
  EXPECT_EQ(campaign.trial_count(), Campaign::kMaxAskCount);
}

TEST(CampaignAskTest, NonPositiveLeaseIsInvalidArgument) {
  Campaign campaign = SmallCampaign();
  for (absl::Duration lease : {absl::ZeroDuration(), absl::Seconds(-5)}) {
    absl::StatusOr<std::vector<Trial>> asked = campaign.Ask(1, "w", lease, Origin());
    EXPECT_EQ(asked.status().code(), absl::StatusCode::kInvalidArgument);
    EXPECT_THAT(std::string(asked.status().message()), HasSubstr("lease"));
  }
  EXPECT_EQ(campaign.trial_count(), 0);
}

TEST(CampaignAskTest, TrialsAreNumberedAndLeasedFromNow) {
  CampaignOptions options;
  options.default_lease = absl::Minutes(7);
  Campaign campaign = SmallCampaign(options);
  const absl::Time t = Origin() + absl::Seconds(42);
  absl::StatusOr<std::vector<Trial>> a = campaign.Ask(3, "alice", absl::Seconds(30), t);
  ASSERT_TRUE(a.ok()) << a.status();
  absl::StatusOr<std::vector<Trial>> b = campaign.Ask(2, "bob", std::nullopt, t);
  ASSERT_TRUE(b.ok()) << b.status();
  EXPECT_EQ(Numbers(*a), (std::vector<int64_t>{1, 2, 3}));
  EXPECT_EQ(Numbers(*b), (std::vector<int64_t>{4, 5}));
  for (const Trial& trial : campaign.trials()) {
    const bool alice = trial.number <= 3;
    EXPECT_EQ(trial.worker, alice ? "alice" : "bob");
    EXPECT_EQ(trial.state, TrialState::kLeased);
    EXPECT_EQ(trial.leased_at, t);
    EXPECT_EQ(trial.lease_deadline, t + (alice ? absl::Seconds(30) : absl::Minutes(7)));
    EXPECT_EQ(trial.generation, 0);
    EXPECT_EQ(trial.epoch, 0);
    EXPECT_EQ(trial.use, Use::kNone);
    ASSERT_EQ(trial.x.size(), 2);
    EXPECT_TRUE((trial.x.array() >= 0.0).all() && (trial.x.array() <= 1.0).all()) << trial.x;
  }
  EXPECT_EQ(campaign.counts().leased, 5);
  EXPECT_EQ(campaign.counts().total(), 5);
  EXPECT_EQ(campaign.engine().next_trial, 6);
}

// A campaign only appends trials, and the host applies each ask under the campaign's lock: growth must not
// move the trials already there (a vector's reallocation copies them all, a stall of every request
// that grows with the campaign). Checked by address: the first trial stays where it was.
TEST(CampaignAskTest, TrialsStayInPlaceAsTheCampaignGrows) {
  Campaign campaign = SmallCampaign();
  const absl::Time t = Origin();
  ASSERT_TRUE(campaign.Ask(1, "w", std::nullopt, t).ok());
  const Trial* first = campaign.trial(1);
  for (int k = 0; k < 20; ++k) ASSERT_TRUE(campaign.Ask(1000, "w", std::nullopt, t).ok());
  ASSERT_EQ(campaign.trial_count(), 20001);
  EXPECT_EQ(campaign.trial(1), first);
  EXPECT_EQ(campaign.trial(1)->number, 1);
}

// ---------------------------------------------------------------------------------------------
// Phases.

TEST(CampaignPhaseTest, PausedCampaignRefusesAsksButStoresReportsAndUpdates) {
  Campaign campaign = SmallCampaign();
  ASSERT_TRUE(campaign.Ask(6, "w", std::nullopt, Origin()).ok());
  ASSERT_TRUE(campaign.SetPhase(PhaseCommand::kPause, Origin()).ok());
  EXPECT_EQ(campaign.engine().phase, Phase::kPaused);

  absl::StatusOr<std::vector<Trial>> refused = campaign.Ask(1, "w", std::nullopt, Origin());
  EXPECT_EQ(refused.status().code(), absl::StatusCode::kFailedPrecondition);
  EXPECT_THAT(std::string(refused.status().message()), HasSubstr("paused"));

  // Reports keep coming in while paused; a full cohort of λ = 6 still updates (campaign.h: "updates
  // happen while open or paused").
  ReportScores(campaign, 1, 6, Origin() + absl::Seconds(1));
  EXPECT_EQ(campaign.counts().reported, 6);
  for (const Trial& t : campaign.trials()) EXPECT_EQ(t.state, TrialState::kReported);
  EXPECT_EQ(campaign.engine().generation, 1);
  EXPECT_EQ(campaign.engine().phase, Phase::kPaused);

  ASSERT_TRUE(campaign.SetPhase(PhaseCommand::kResume, Origin()).ok());
  EXPECT_EQ(campaign.engine().phase, Phase::kOpen);
  EXPECT_TRUE(campaign.Ask(1, "w", std::nullopt, Origin()).ok());
}

TEST(CampaignPhaseTest, DoneCampaignRefusesAsksAndPhaseChangesButStoresReports) {
  Campaign campaign = SmallCampaign();
  ASSERT_TRUE(campaign.Ask(8, "w", std::nullopt, Origin()).ok());
  ASSERT_TRUE(campaign.SetPhase(PhaseCommand::kFinish, Origin()).ok());
  EXPECT_EQ(campaign.engine().phase, Phase::kDone);
  EXPECT_EQ(campaign.engine().reason, DoneReason::kStopped);

  absl::StatusOr<std::vector<Trial>> refused = campaign.Ask(1, "w", std::nullopt, Origin());
  EXPECT_EQ(refused.status().code(), absl::StatusCode::kFailedPrecondition);
  EXPECT_THAT(std::string(refused.status().message()), HasSubstr("done"));
  EXPECT_EQ(campaign.SetPhase(PhaseCommand::kResume, Origin()).code(),
            absl::StatusCode::kFailedPrecondition);
  EXPECT_EQ(campaign.SetPhase(PhaseCommand::kPause, Origin()).code(),
            absl::StatusCode::kFailedPrecondition);

  // Finishing again is accepted and changes nothing.
  const EngineState before = campaign.engine();
  EXPECT_TRUE(campaign.SetPhase(PhaseCommand::kFinish, Origin()).ok());
  test_util::ExpectSameEngine(campaign.engine(), before);

  // All eight reports are stored (more than λ = 6), but a done campaign does not update.
  ReportScores(campaign, 1, 7, Origin() + absl::Seconds(1));
  const Report v = MakeReport(8, search::Outcome::Void());
  ASSERT_TRUE(campaign.Tell({&v, 1}, Origin() + absl::Seconds(2)).ok());
  EXPECT_EQ(campaign.counts().reported, 7);
  EXPECT_EQ(campaign.counts().voided, 1);
  EXPECT_EQ(campaign.trial(3)->state, TrialState::kReported);
  EXPECT_EQ(campaign.trial(8)->state, TrialState::kVoided);
  EXPECT_EQ(campaign.engine().generation, 0);
  EXPECT_EQ(campaign.engine().reason, DoneReason::kStopped);
}

TEST(CampaignPhaseTest, PausingTwiceIsAcceptedAndChangesNothing) {
  Campaign campaign = SmallCampaign();
  ASSERT_TRUE(campaign.SetPhase(PhaseCommand::kPause, Origin()).ok());
  const EngineState before = campaign.engine();
  EXPECT_TRUE(campaign.SetPhase(PhaseCommand::kPause, Origin() + absl::Seconds(5)).ok());
  test_util::ExpectSameEngine(campaign.engine(), before);
}

// ---------------------------------------------------------------------------------------------
// The trial budget: asks may not take more than budget − informative − outstanding.

TEST(CampaignBudgetTest, AsksBeyondTheBudgetAreTrimmedThenRefused) {
  CampaignOptions options;
  options.trial_budget = 10;
  Campaign campaign = SmallCampaign(options);
  const absl::Time t = Origin();
  const absl::Duration lease = absl::Minutes(10);

  absl::StatusOr<std::vector<Trial>> a = campaign.Ask(4, "w", lease, t);
  absl::StatusOr<std::vector<Trial>> b = campaign.Ask(4, "w", lease, t);
  absl::StatusOr<std::vector<Trial>> c = campaign.Ask(4, "w", lease, t);  // room for 2
  ASSERT_TRUE(a.ok() && b.ok() && c.ok());
  EXPECT_EQ(a->size(), 4u);
  EXPECT_EQ(b->size(), 4u);
  EXPECT_EQ(Numbers(*c), (std::vector<int64_t>{9, 10}));
  absl::StatusOr<std::vector<Trial>> full = campaign.Ask(1, "w", lease, t);
  EXPECT_EQ(full.status().code(), absl::StatusCode::kFailedPrecondition);
  EXPECT_THAT(std::string(full.status().message()), HasSubstr("budget"));

  // Voids are not informative: two voids free two places.
  const Report voids[] = {MakeReport(1, search::Outcome::Void()),
                          MakeReport(2, search::Outcome::Void())};
  ASSERT_TRUE(campaign.Tell(voids, t).ok());
  absl::StatusOr<std::vector<Trial>> d = campaign.Ask(5, "w", lease, t);
  ASSERT_TRUE(d.ok()) << d.status();
  EXPECT_EQ(Numbers(*d), (std::vector<int64_t>{11, 12}));
  EXPECT_EQ(campaign.Ask(1, "w", lease, t).status().code(), absl::StatusCode::kFailedPrecondition);

  // Five informative outcomes (3..7): 5 informative + 5 outstanding (8..12) = 10, no room.
  ReportScores(campaign, 3, 7, t);
  EXPECT_EQ(campaign.engine().informative, 5);
  EXPECT_EQ(campaign.Ask(1, "w", lease, t).status().code(), absl::StatusCode::kFailedPrecondition);

  // Lapsed trials are not outstanding: once 8..12 lapse there is room for 5 more.
  const absl::Time later = t + lease + absl::Seconds(1);
  absl::StatusOr<std::vector<Trial>> e = campaign.Ask(10, "w", lease, later);
  ASSERT_TRUE(e.ok()) << e.status();
  EXPECT_EQ(Numbers(*e), (std::vector<int64_t>{13, 14, 15, 16, 17}));
  EXPECT_EQ(campaign.counts().lapsed, 5);

  // The tenth informative outcome ends the campaign on its budget.
  ReportScores(campaign, 13, 16, later);
  EXPECT_EQ(campaign.engine().phase, Phase::kOpen);
  ReportScores(campaign, 17, 17, later);
  EXPECT_EQ(campaign.engine().informative, 10);
  EXPECT_EQ(campaign.engine().phase, Phase::kDone);
  EXPECT_EQ(campaign.engine().reason, DoneReason::kBudget);
  EXPECT_THAT(campaign.engine().phase_message, HasSubstr("budget"));
}

TEST(CampaignBudgetTest, VoidsNeverUseUpTheBudget) {
  CampaignOptions options;
  options.trial_budget = 3;
  Campaign campaign = SmallCampaign(options);
  absl::Time t = Origin();
  for (int k = 0; k < 200; ++k) {
    absl::StatusOr<std::vector<Trial>> asked = campaign.Ask(3, "w", std::nullopt, t);
    ASSERT_TRUE(asked.ok()) << k << ": " << asked.status();
    ASSERT_EQ(asked->size(), 3u);
    std::vector<Report> reports;
    for (const Trial& trial : *asked) {
      reports.push_back(MakeReport(trial.number, search::Outcome::Void()));
    }
    ASSERT_TRUE(campaign.Tell(reports, t).ok());
    t += absl::Seconds(1);
  }
  EXPECT_EQ(campaign.engine().phase, Phase::kOpen);
  EXPECT_EQ(campaign.counts().voided, 600);
}

// ---------------------------------------------------------------------------------------------
// Renewals and sweeps.

TEST(CampaignRenewTest, RenewExtendsOwnLeasesOnly) {
  Campaign campaign = SmallCampaign();
  const absl::Time t = Origin();
  ASSERT_TRUE(campaign.Ask(2, "alice", absl::Seconds(60), t).ok());

  const int64_t one[] = {1};
  absl::Status other = campaign.Renew(one, "bob", absl::Seconds(60), t + absl::Seconds(10));
  EXPECT_EQ(other.code(), absl::StatusCode::kFailedPrecondition);
  EXPECT_THAT(std::string(other.message()), HasSubstr("alice"));

  const int64_t unknown[] = {99};
  EXPECT_EQ(campaign.Renew(unknown, "alice", absl::Seconds(60), t).code(),
            absl::StatusCode::kNotFound);

  // All or nothing: trial 1 keeps its deadline when the same request names an unknown trial.
  const int64_t mixed[] = {1, 99};
  EXPECT_EQ(campaign.Renew(mixed, "alice", absl::Seconds(600), t).code(), absl::StatusCode::kNotFound);
  EXPECT_EQ(campaign.trial(1)->lease_deadline, t + absl::Seconds(60));

  EXPECT_EQ(campaign.Renew(one, "alice", absl::ZeroDuration(), t).code(),
            absl::StatusCode::kInvalidArgument);
  EXPECT_EQ(campaign.Renew({}, "alice", absl::Seconds(5), t).code(),
            absl::StatusCode::kInvalidArgument);

  ASSERT_TRUE(campaign.Renew(one, "alice", absl::Seconds(60), t + absl::Seconds(30)).ok());
  EXPECT_EQ(campaign.trial(1)->lease_deadline, t + absl::Seconds(90));
  // At t + 80 s trial 2 (deadline t + 60 s) has lapsed, trial 1 has not.
  EXPECT_EQ(campaign.Sweep(t + absl::Seconds(80)), 1);
  EXPECT_EQ(campaign.trial(1)->state, TrialState::kLeased);
  EXPECT_EQ(campaign.trial(2)->state, TrialState::kLapsed);

  // A reported trial cannot be renewed.
  const Report r = MakeReport(1, search::Outcome::Score(1.0));
  ASSERT_TRUE(campaign.Tell({&r, 1}, t + absl::Seconds(81)).ok());
  absl::Status reported = campaign.Renew(one, "alice", absl::Seconds(60), t + absl::Seconds(82));
  EXPECT_EQ(reported.code(), absl::StatusCode::kFailedPrecondition);
  EXPECT_THAT(std::string(reported.message()), HasSubstr("reported"));
}

TEST(CampaignRenewTest, RenewingALapsedUnreportedTrialLeasesItAgain) {
  Campaign campaign = SmallCampaign();
  const absl::Time t = Origin();
  ASSERT_TRUE(campaign.Ask(1, "alice", absl::Seconds(60), t).ok());
  EXPECT_EQ(campaign.Sweep(t + absl::Seconds(61)), 1);
  ASSERT_EQ(campaign.trial(1)->state, TrialState::kLapsed);
  EXPECT_EQ(campaign.counts().lapsed, 1);

  const int64_t one[] = {1};
  ASSERT_TRUE(campaign.Renew(one, "alice", absl::Seconds(60), t + absl::Seconds(70)).ok());
  EXPECT_EQ(campaign.trial(1)->state, TrialState::kLeased);
  EXPECT_EQ(campaign.trial(1)->lease_deadline, t + absl::Seconds(130));
  EXPECT_EQ(campaign.counts().lapsed, 0);
  EXPECT_EQ(campaign.counts().leased, 1);

  // Reported within the new lease, it is not late.
  const Report r = MakeReport(1, search::Outcome::Score(2.0));
  absl::StatusOr<std::vector<ReportResult>> results = campaign.Tell({&r, 1}, t + absl::Seconds(100));
  ASSERT_TRUE(results.ok());
  EXPECT_FALSE((*results)[0].late);
  EXPECT_FALSE(campaign.trial(1)->late);
  EXPECT_EQ(campaign.counts().late, 0);
}

TEST(CampaignSweepTest, LapsesOnlyExpiredLeases) {
  Campaign campaign = SmallCampaign();
  const absl::Time t = Origin();
  ASSERT_TRUE(campaign.Ask(1, "w", absl::Seconds(10), t).ok());
  ASSERT_TRUE(campaign.Ask(1, "w", absl::Seconds(20), t).ok());
  ASSERT_TRUE(campaign.Ask(1, "w", absl::Seconds(30), t).ok());

  EXPECT_EQ(campaign.Sweep(t + absl::Seconds(9)), 0);
  EXPECT_EQ(campaign.Sweep(t + absl::Seconds(15)), 1);
  EXPECT_EQ(campaign.trial(1)->state, TrialState::kLapsed);
  EXPECT_EQ(campaign.trial(2)->state, TrialState::kLeased);
  EXPECT_EQ(campaign.trial(3)->state, TrialState::kLeased);
  EXPECT_EQ(campaign.Sweep(t + absl::Seconds(15)), 0);
  EXPECT_EQ(campaign.Sweep(t + absl::Seconds(29)), 1);
  EXPECT_EQ(campaign.trial(3)->state, TrialState::kLeased);
  EXPECT_EQ(campaign.Sweep(t + absl::Seconds(31)), 1);
  EXPECT_EQ(campaign.counts().lapsed, 3);
  EXPECT_EQ(campaign.counts().leased, 0);
  // A lapse is not a report: nothing was learned, nothing changed in the search.
  EXPECT_EQ(campaign.engine().report_sequence, 0);
  EXPECT_EQ(campaign.engine().generation, 0);
}

// Leases run out in deadline order, not trial order; a renewed lease is judged by its new deadline
// and a reported trial no longer holds one.
TEST(CampaignSweepTest, LapsesByDeadlineWhateverTheTrialOrder) {
  Campaign campaign = SmallCampaign();
  const absl::Time t = Origin();
  ASSERT_TRUE(campaign.Ask(1, "w", absl::Seconds(30), t).ok());  // trial 1: t + 30 s
  ASSERT_TRUE(campaign.Ask(1, "w", absl::Seconds(10), t).ok());  // trial 2: t + 10 s
  ASSERT_TRUE(campaign.Ask(1, "w", absl::Seconds(20), t).ok());  // trial 3: t + 20 s
  ASSERT_TRUE(campaign.Ask(1, "w", absl::Seconds(5), t).ok());   // trial 4: t + 5 s, reported in time
  const Report r = MakeReport(4, search::Outcome::Score(4.0));
  ASSERT_TRUE(campaign.Tell({&r, 1}, t + absl::Seconds(1)).ok());
  const int64_t two[] = {2};
  ASSERT_TRUE(campaign.Renew(two, "w", absl::Seconds(40), t + absl::Seconds(5)).ok());  // trial 2: t + 45 s

  EXPECT_EQ(campaign.Sweep(t + absl::Seconds(25)), 1);
  EXPECT_EQ(campaign.trial(3)->state, TrialState::kLapsed);
  EXPECT_EQ(campaign.trial(1)->state, TrialState::kLeased);
  EXPECT_EQ(campaign.trial(2)->state, TrialState::kLeased);
  EXPECT_EQ(campaign.Sweep(t + absl::Seconds(35)), 1);
  EXPECT_EQ(campaign.trial(1)->state, TrialState::kLapsed);
  EXPECT_EQ(campaign.trial(2)->state, TrialState::kLeased);
  EXPECT_EQ(campaign.counts().leased, 1);
  EXPECT_EQ(campaign.Sweep(t + absl::Seconds(45)), 1);
  EXPECT_EQ(campaign.counts().leased, 0);
  EXPECT_EQ(campaign.counts().lapsed, 3);
  EXPECT_EQ(campaign.counts().reported, 1);
}

TEST(CampaignSweepTest, AskLapsesExpiredLeasesFirst) {
  Campaign campaign = SmallCampaign();
  ASSERT_TRUE(campaign.Ask(2, "w", absl::Seconds(10), Origin()).ok());
  ASSERT_TRUE(campaign.Ask(1, "w", absl::Seconds(10), Origin() + absl::Seconds(11)).ok());
  EXPECT_EQ(campaign.trial(1)->state, TrialState::kLapsed);
  EXPECT_EQ(campaign.trial(2)->state, TrialState::kLapsed);
  EXPECT_EQ(campaign.trial(3)->state, TrialState::kLeased);
}

// ---------------------------------------------------------------------------------------------
// Reports.

TEST(CampaignTellTest, LateReportIsStoredAndMarkedLate) {
  Campaign campaign = SmallCampaign();
  const absl::Time t = Origin();
  ASSERT_TRUE(campaign.Ask(2, "w", absl::Seconds(10), t).ok());
  ASSERT_EQ(campaign.Sweep(t + absl::Seconds(20)), 2);

  const Report reports[] = {MakeReport(1, search::Outcome::Score(3.0)),
                            MakeReport(2, search::Outcome::Void())};
  absl::StatusOr<std::vector<ReportResult>> results = campaign.Tell(reports, t + absl::Seconds(30));
  ASSERT_TRUE(results.ok()) << results.status();
  for (const ReportResult& r : *results) {
    EXPECT_TRUE(r.status.ok()) << r.status;
    EXPECT_TRUE(r.late);
    EXPECT_FALSE(r.duplicate);
  }
  const Trial& scored = *campaign.trial(1);
  EXPECT_EQ(scored.state, TrialState::kReported);
  EXPECT_TRUE(scored.late);
  EXPECT_EQ(scored.use, Use::kPending);
  EXPECT_EQ(scored.reported_at, t + absl::Seconds(30));
  EXPECT_EQ(scored.report_sequence, 1);
  const Trial& voided = *campaign.trial(2);
  EXPECT_EQ(voided.state, TrialState::kVoided);
  EXPECT_TRUE(voided.late);
  EXPECT_EQ(voided.use, Use::kNone);
  EXPECT_EQ(campaign.counts().late, 2);
  EXPECT_EQ(campaign.counts().lapsed, 0);
  EXPECT_EQ(campaign.counts().pending, 1);
  EXPECT_EQ(campaign.engine().informative, 1);

  // Reported again, a late report is a duplicate that is still marked late.
  absl::StatusOr<std::vector<ReportResult>> again =
      campaign.Tell({&reports[0], 1}, t + absl::Seconds(40));
  ASSERT_TRUE(again.ok());
  EXPECT_TRUE((*again)[0].duplicate);
  EXPECT_TRUE((*again)[0].late);
}

TEST(CampaignTellTest, ReportTimeAtOrAfterTheDeadlineIsLate) {
  // A lease runs out at its deadline: a report at exactly that instant comes too late, one just
  // before it does not (campaign.h: leases "ran out by now" lapse).
  Campaign campaign = SmallCampaign();
  const absl::Time t = Origin();
  ASSERT_TRUE(campaign.Ask(2, "w", absl::Seconds(10), t).ok());
  const Report early = MakeReport(1, search::Outcome::Score(1.0));
  absl::StatusOr<std::vector<ReportResult>> a =
      campaign.Tell({&early, 1}, t + absl::Seconds(10) - absl::Nanoseconds(1));
  ASSERT_TRUE(a.ok());
  EXPECT_FALSE((*a)[0].late);
  const Report edge = MakeReport(2, search::Outcome::Score(1.0));
  absl::StatusOr<std::vector<ReportResult>> b = campaign.Tell({&edge, 1}, t + absl::Seconds(10));
  ASSERT_TRUE(b.ok());
  EXPECT_TRUE((*b)[0].late);
}

TEST(CampaignTellTest, DuplicatesDifferentOutcomesAndUnknownTrials) {
  Campaign campaign = SmallCampaign();
  const absl::Time t = Origin();
  ASSERT_TRUE(campaign.Ask(3, "w", std::nullopt, t).ok());
  const Report first[] = {MakeReport(1, search::Outcome::Score(0.5)),
                          MakeReport(2, search::Outcome::Void())};
  ASSERT_TRUE(campaign.Tell(first, t + absl::Seconds(1)).ok());
  const std::deque<Trial> before = campaign.trials();
  const EngineState engine_before = campaign.engine();

  Report dup_with_other_note = MakeReport(1, search::Outcome::Score(0.5));
  dup_with_other_note.note = "second try";
  const Report batch[] = {
      dup_with_other_note,                           // duplicate
      MakeReport(2, search::Outcome::Void()),        // duplicate void
      MakeReport(1, search::Outcome::Score(0.25)),   // different score
      MakeReport(1, search::Outcome::Infeasible()),  // different kind
      MakeReport(2, search::Outcome::Score(1.0)),    // void, then a score
      MakeReport(0, search::Outcome::Score(1.0)),    // unknown
      MakeReport(4, search::Outcome::Score(1.0)),    // unknown (not asked yet)
      MakeReport(-7, search::Outcome::Score(1.0)),   // unknown
  };
  absl::StatusOr<std::vector<ReportResult>> results = campaign.Tell(batch, t + absl::Seconds(2));
  ASSERT_TRUE(results.ok()) << results.status();
  ASSERT_EQ(results->size(), 8u);
  for (int k = 0; k < 8; ++k) EXPECT_EQ((*results)[k].trial, batch[k].trial);
  EXPECT_TRUE((*results)[0].status.ok());
  EXPECT_TRUE((*results)[0].duplicate);
  EXPECT_TRUE((*results)[1].status.ok());
  EXPECT_TRUE((*results)[1].duplicate);
  for (int k : {2, 3, 4}) {
    EXPECT_EQ((*results)[k].status.code(), absl::StatusCode::kAlreadyExists) << k;
    EXPECT_FALSE((*results)[k].duplicate) << k;
  }
  for (int k : {5, 6, 7}) {
    EXPECT_EQ((*results)[k].status.code(), absl::StatusCode::kNotFound) << k;
    EXPECT_THAT(std::string((*results)[k].status.message()), HasSubstr("trial")) << k;
  }
  // Nothing changed: every record, and every counter.
  ASSERT_EQ(campaign.trial_count(), static_cast<int64_t>(before.size()));
  for (const Trial& old : before) ExpectSameTrial(*campaign.trial(old.number), old);
  test_util::ExpectSameEngine(campaign.engine(), engine_before);
  // Trial 3, still leased, can be reported normally.
  const Report third = MakeReport(3, search::Outcome::Score(2.0));
  absl::StatusOr<std::vector<ReportResult>> ok = campaign.Tell({&third, 1}, t + absl::Seconds(3));
  ASSERT_TRUE(ok.ok());
  EXPECT_TRUE((*ok)[0].status.ok());
  EXPECT_FALSE((*ok)[0].duplicate);
  EXPECT_EQ(campaign.trial(3)->report_sequence, 3);
}

TEST(CampaignTellTest, TheReporterIsStoredAndADuplicateKeepsTheFirst) {
  Campaign campaign = SmallCampaign();
  const absl::Time t = Origin();
  ASSERT_TRUE(campaign.Ask(2, "w", std::nullopt, t).ok());
  Report first = MakeReport(1, search::Outcome::Score(0.5));
  first.reported_by = "farm-a";
  ASSERT_TRUE(campaign.Tell({&first, 1}, t + absl::Seconds(1)).ok());
  EXPECT_EQ(campaign.trial(1)->reported_by, "farm-a");
  EXPECT_EQ(campaign.trial(2)->reported_by, "");
  Report again = first;
  again.reported_by = "farm-b";
  absl::StatusOr<std::vector<ReportResult>> results = campaign.Tell({&again, 1}, t + absl::Seconds(2));
  ASSERT_TRUE(results.ok());
  EXPECT_TRUE((*results)[0].duplicate);
  EXPECT_EQ(campaign.trial(1)->reported_by, "farm-a");
  // It is part of the snapshot.
  EXPECT_EQ(campaign.Snapshot().trials[0].reported_by, "farm-a");
}

TEST(CampaignTellTest, EmptyTellIsInvalidArgument) {
  Campaign campaign = SmallCampaign();
  absl::StatusOr<std::vector<ReportResult>> results = campaign.Tell({}, Origin());
  EXPECT_EQ(results.status().code(), absl::StatusCode::kInvalidArgument);
}

TEST(CampaignTellTest, OutcomeThatDoesNotFitTheOrderIsRefusedAndNotStored) {
  Campaign campaign = SmallCampaign();
  ASSERT_TRUE(campaign.Ask(2, "w", std::nullopt, Origin()).ok());
  const Report bad[] = {MakeReport(1, search::Outcome::Grade(1)),
                        MakeReport(2, search::Outcome::Score(std::nan("")))};
  absl::StatusOr<std::vector<ReportResult>> results = campaign.Tell(bad, Origin());
  ASSERT_TRUE(results.ok());
  for (const ReportResult& r : *results) {
    EXPECT_EQ(r.status.code(), absl::StatusCode::kInvalidArgument);
  }
  EXPECT_FALSE(campaign.trial(1)->outcome.has_value());
  EXPECT_FALSE(campaign.trial(2)->outcome.has_value());
  EXPECT_EQ(campaign.counts().leased, 2);
  EXPECT_EQ(campaign.engine().report_sequence, 0);
}

TEST(CampaignTellTest, LambdaPendingOutcomesFormOneCohortOldestReportFirst) {
  Campaign campaign = SmallCampaign();
  const int lambda = campaign.distribution().population_size();
  ASSERT_EQ(lambda, 6);  // 4 + ⌊3 ln 2⌋ (tutorial, Table 1)
  ASSERT_TRUE(campaign.Ask(8, "w", std::nullopt, Origin()).ok());
  // Reports arrive in reverse order, 8, 7, ..., 1: the sixth report completes the cohort.
  std::vector<GenerationRecord> records;
  for (int64_t k = 8; k >= 1; --k) {
    const Report r = MakeReport(k, search::Outcome::Score(static_cast<double>(k)));
    absl::StatusOr<TellPlan> plan = campaign.PlanTell({&r, 1}, Origin() + absl::Seconds(9 - k));
    ASSERT_TRUE(plan.ok()) << plan.status();
    for (const GenerationRecord& g : plan->change.generations) records.push_back(g);
    campaign.Apply(std::move(plan->change));
    EXPECT_EQ(campaign.engine().generation, k > 3 ? 0 : 1) << "after the report of trial " << k;
  }
  ASSERT_EQ(records.size(), 1u);
  EXPECT_EQ(records[0].generation, 1);
  EXPECT_EQ(records[0].population_size, 6);
  EXPECT_EQ(records[0].cohort, (std::vector<int64_t>{8, 7, 6, 5, 4, 3}));
  EXPECT_EQ(records[0].max_staleness, 0);
  for (int64_t k = 3; k <= 8; ++k) {
    EXPECT_EQ(campaign.trial(k)->use, Use::kConsumed);
    EXPECT_EQ(campaign.trial(k)->consumed_by, 1);
  }
  EXPECT_EQ(campaign.trial(2)->use, Use::kPending);
  EXPECT_EQ(campaign.trial(1)->use, Use::kPending);
  EXPECT_EQ(campaign.counts().consumed, 6);
  EXPECT_EQ(campaign.counts().pending, 2);
  // The best outcome is trial 1's score 1.
  ASSERT_NE(campaign.best(), nullptr);
  EXPECT_EQ(campaign.best()->number, 1);
}

// ---------------------------------------------------------------------------------------------
// Plans.

TEST(CampaignPlanTest, PlansThatAreNotAppliedChangeNothing) {
  Campaign campaign = SmallCampaign();
  ASSERT_TRUE(campaign.Ask(6, "w", absl::Seconds(10), Origin()).ok());
  const CampaignSnapshot before = campaign.Snapshot();

  absl::StatusOr<AskPlan> ask1 = campaign.PlanAsk(3, "w", std::nullopt, Origin() + absl::Seconds(20));
  absl::StatusOr<AskPlan> ask2 = campaign.PlanAsk(3, "w", std::nullopt, Origin() + absl::Seconds(20));
  ASSERT_TRUE(ask1.ok() && ask2.ok());
  // The random stream did not advance: the same plan twice.
  ASSERT_EQ(ask1->change.trials.size(), ask2->change.trials.size());
  for (size_t k = 0; k < ask1->change.trials.size(); ++k) {
    EXPECT_TRUE(ask1->change.trials[k].x == ask2->change.trials[k].x);
  }
  std::vector<Report> reports;
  for (int64_t k = 1; k <= 6; ++k) reports.push_back(MakeReport(k, search::Outcome::Score(k)));
  absl::StatusOr<TellPlan> tell = campaign.PlanTell(reports, Origin() + absl::Seconds(1));
  ASSERT_TRUE(tell.ok());
  EXPECT_EQ(tell->change.generations.size(), 1u);
  EXPECT_TRUE(tell->change.distribution_changed);
  ASSERT_TRUE(campaign.PlanRenew(std::vector<int64_t>{1}, "w", std::nullopt, Origin()).ok());
  campaign.PlanSweep(Origin() + absl::Hours(1));
  ASSERT_TRUE(campaign.PlanSetPhase(PhaseCommand::kFinish, Origin()).ok());

  ExpectSameCampaign(campaign, *Campaign::Restore(RealSpace(2, -1, 1), kMinimize, {}, {}, before));
  EXPECT_EQ(campaign.counts().leased, 6);
  EXPECT_EQ(campaign.engine().generation, 0);
}

// ---------------------------------------------------------------------------------------------
// Determinism.

// Compares what two drivers' events returned.
void ExpectSameStep(const EventDriver::Step& a, const EventDriver::Step& b, int step) {
  EXPECT_EQ(a.kind, b.kind) << "step " << step;
  EXPECT_EQ(a.code, b.code) << "step " << step;
  EXPECT_EQ(a.trials, b.trials) << "step " << step;
  ASSERT_EQ(a.results.size(), b.results.size()) << "step " << step;
  for (size_t k = 0; k < a.results.size(); ++k) {
    EXPECT_EQ(a.results[k].trial, b.results[k].trial) << "step " << step;
    EXPECT_EQ(a.results[k].status, b.results[k].status) << "step " << step;
    EXPECT_EQ(a.results[k].duplicate, b.results[k].duplicate) << "step " << step;
    EXPECT_EQ(a.results[k].late, b.results[k].late) << "step " << step;
  }
}

CampaignOptions SeededOptions(uint64_t seed) {
  CampaignOptions options;
  options.seed = seed;
  options.default_lease = absl::Seconds(90);
  options.staleness_limit = 3;
  return options;
}

TEST(CampaignDeterminismTest, SameSeedAndEventsGiveIdenticalCandidatesAndStates) {
  constexpr int kSteps = 1500;
  Campaign a = MakeCampaign(MixedSpace(), kMinimize, {}, SeededOptions(77));
  Campaign b = MakeCampaign(MixedSpace(), kMinimize, {}, SeededOptions(77));
  // One run plans and applies, the other uses the one-step calls: the same events either way.
  EventDriver da(5, {.workers = 3, .use_plan_api = true, .phase_changes = true});
  EventDriver db(5, {.workers = 3, .use_plan_api = false, .phase_changes = true});
  for (int step = 0; step < kSteps; ++step) {
    ExpectSameStep(da.Next(a), db.Next(b), step);
    if (step % 100 == 0) ExpectSameCampaign(a, b);
    if (::testing::Test::HasFailure()) return;
  }
  ExpectSameCampaign(a, b);
  // The run did something worth comparing.
  EXPECT_GE(a.engine().generation, 10);
  EXPECT_GT(a.counts().lapsed + a.counts().late, 0);
}

TEST(CampaignDeterminismTest, DifferentSeedGivesDifferentCandidates) {
  Campaign a = MakeCampaign(MixedSpace(), kMinimize, {}, SeededOptions(1));
  Campaign b = MakeCampaign(MixedSpace(), kMinimize, {}, SeededOptions(2));
  absl::StatusOr<std::vector<Trial>> ta = a.Ask(20, "w", std::nullopt, Origin());
  absl::StatusOr<std::vector<Trial>> tb = b.Ask(20, "w", std::nullopt, Origin());
  ASSERT_TRUE(ta.ok() && tb.ok());
  int same = 0;
  for (int k = 0; k < 20; ++k) same += (*ta)[k].x == (*tb)[k].x;
  EXPECT_EQ(same, 0);
  EXPECT_NE(a.engine().random, b.engine().random);
}

// Restores `snapshot` into a new campaign with the same constructor arguments. With `rebuild`, the
// distribution is first rebuilt from its state, as a store that serialized it would.
Campaign RestoreInto(CampaignSnapshot snapshot, bool rebuild) {
  if (rebuild) {
    absl::StatusOr<search::SearchDistribution> copy =
        search::SearchDistribution::FromState(MixedSpace(), snapshot.engine.distribution->state());
    EXPECT_TRUE(copy.ok()) << copy.status();
    snapshot.engine.distribution =
        std::make_shared<const search::SearchDistribution>(*std::move(copy));
  }
  absl::StatusOr<Campaign> restored =
      Campaign::Restore(MixedSpace(), kMinimize, {}, SeededOptions(77), std::move(snapshot));
  EXPECT_TRUE(restored.ok()) << restored.status();
  return *std::move(restored);
}

class CampaignSnapshotTest : public ::testing::TestWithParam<std::tuple<int, bool>> {};

TEST_P(CampaignSnapshotTest, RestoreMidRunChangesNothingThatFollows) {
  const auto [k, rebuild] = GetParam();
  constexpr int kSteps = 1200;
  Campaign a = MakeCampaign(MixedSpace(), kMinimize, {}, SeededOptions(77));
  Campaign b = MakeCampaign(MixedSpace(), kMinimize, {}, SeededOptions(77));
  EventDriver da(9, {.workers = 4, .use_plan_api = true, .phase_changes = false});
  EventDriver db(9, {.workers = 4, .use_plan_api = true, .phase_changes = false});
  for (int step = 0; step < kSteps; ++step) {
    if (step == k) {
      Campaign restored = RestoreInto(b.Snapshot(), rebuild);
      ExpectSameCampaign(restored, b);
      EXPECT_EQ(restored.counts().total(), b.counts().total());
      EXPECT_EQ(restored.counts().pending, b.counts().pending);
      EXPECT_EQ(restored.counts().late, b.counts().late);
      b = std::move(restored);
    }
    ExpectSameStep(da.Next(a), db.Next(b), step);
    if (step > k && step % 50 == 0) ExpectSameCampaign(a, b);
    if (::testing::Test::HasFailure()) return;
  }
  ExpectSameCampaign(a, b);
  EXPECT_GE(a.engine().generation, 10);
}

INSTANTIATE_TEST_SUITE_P(Steps, CampaignSnapshotTest,
                         ::testing::Combine(::testing::Values(0, 1, 137, 600), ::testing::Bool()));

TEST(CampaignRestoreTest, RefusesSnapshotsThatDoNotFit) {
  Campaign campaign = MakeCampaign(MixedSpace(), kMinimize, {}, SeededOptions(77));
  ASSERT_TRUE(campaign.Ask(4, "w", std::nullopt, Origin()).ok());

  CampaignSnapshot no_distribution = campaign.Snapshot();
  no_distribution.engine.distribution = nullptr;
  EXPECT_EQ(Campaign::Restore(MixedSpace(), kMinimize, {}, SeededOptions(77), no_distribution)
                .status()
                .code(),
            absl::StatusCode::kInvalidArgument);

  CampaignSnapshot missing_trial = campaign.Snapshot();
  missing_trial.trials.pop_back();
  EXPECT_EQ(
      Campaign::Restore(MixedSpace(), kMinimize, {}, SeededOptions(77), missing_trial).status().code(),
      absl::StatusCode::kDataLoss);

  CampaignSnapshot renumbered = campaign.Snapshot();
  renumbered.trials[2].number = 7;
  EXPECT_EQ(
      Campaign::Restore(MixedSpace(), kMinimize, {}, SeededOptions(77), renumbered).status().code(),
      absl::StatusCode::kDataLoss);

  CampaignSnapshot short_sample = campaign.Snapshot();
  short_sample.trials[1].x = Eigen::VectorXd::Zero(2);
  EXPECT_EQ(
      Campaign::Restore(MixedSpace(), kMinimize, {}, SeededOptions(77), short_sample).status().code(),
      absl::StatusCode::kDataLoss);

  CampaignOptions bad = SeededOptions(77);
  bad.staleness_limit = -1;
  absl::StatusOr<Campaign> invalid =
      Campaign::Restore(MixedSpace(), kMinimize, {}, bad, campaign.Snapshot());
  EXPECT_EQ(invalid.status().code(), absl::StatusCode::kInvalidArgument);
  EXPECT_THAT(std::string(invalid.status().message()), HasSubstr("staleness_limit"));
}

TEST(CampaignCreateTest, InvalidOptionsNameTheField) {
  CampaignOptions options;
  options.trial_budget = -1;
  absl::StatusOr<Campaign> s = Campaign::Create(RealSpace(2, 0, 1), kMinimize, {}, options);
  EXPECT_EQ(s.status().code(), absl::StatusCode::kInvalidArgument);
  EXPECT_THAT(std::string(s.status().message()), HasSubstr("trial_budget"));

  CampaignOptions target;
  target.target = search::Outcome::Grade(2);  // a grade for a scored campaign
  absl::StatusOr<Campaign> t = Campaign::Create(RealSpace(2, 0, 1), kMinimize, {}, target);
  EXPECT_EQ(t.status().code(), absl::StatusCode::kInvalidArgument);
  EXPECT_THAT(std::string(t.status().message()), HasSubstr("target"));
}

}  // namespace
}  // namespace ogive::campaign
