// Tests of IPOP restarts in the campaign engine: the bookkeeping of a restart (epoch, doubled base
// population, a fresh distribution, outcomes from before it marked too stale) and the restarted
// search solving BBOB f15, the rotated Rastrigin function.
#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "Eigen/Core"
#include "absl/status/status.h"
#include "absl/strings/str_cat.h"
#include "absl/time/time.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "server/search/ranking.h"
#include "server/campaign/campaign.h"
#include "server/campaign/campaign_options.h"
#include "server/campaign/campaign_test_util.h"
#include "server/campaign/trial.h"
#include "tests/support/bbob.h"

namespace ogive::campaign {
namespace {

using test_util::kMinimize;
using test_util::MakeCampaign;
using test_util::Origin;
using test_util::RealSpace;
using test_util::UserPoint;
using ::testing::HasSubstr;

Report MakeReport(int64_t trial, search::Outcome outcome) {
  Report r;
  r.trial = trial;
  r.outcome = outcome;
  return r;
}

// One sequential generation with every outcome equal: ask λ, report them all, then `extra`.
void FlatRound(Campaign& campaign, absl::Time& now, std::vector<Report> extra = {}) {
  const int lambda = campaign.distribution().population_size();
  absl::StatusOr<std::vector<Trial>> asked = campaign.Ask(lambda, "w", std::nullopt, now);
  ASSERT_TRUE(asked.ok()) << asked.status();
  std::vector<Report> reports;
  for (const Trial& t : *asked) {
    reports.push_back(MakeReport(t.number, search::Outcome::Score(1.0)));
  }
  for (Report& r : extra) reports.push_back(std::move(r));
  now += absl::Seconds(1);
  ASSERT_TRUE(campaign.Tell(reports, now).ok());
}

// With every outcome equal the EqualValues rule (termination.h) converges a campaign after
// 10 + ⌈30 n / λ⌉ tied cohorts: 20 for n = 2, λ = 6; then 15 with λ = 12. With restarts on, each
// convergence is a restart.
TEST(CampaignRestartTest, RestartStartsANewEpochWithDoubledPopulation) {
  CampaignOptions options;
  options.seed = 11;
  options.restarts = true;
  options.adapt_population = false;
  Campaign campaign = MakeCampaign(RealSpace(2, -1, 1), kMinimize, {}, options);
  ASSERT_EQ(campaign.engine().base_population, 6);
  const double sigma0 = campaign.distribution().gaussian()->state().sigma;
  absl::Time now = Origin();

  for (int g = 0; g < 18; ++g) FlatRound(campaign, now);
  absl::StatusOr<std::vector<Trial>> a = campaign.Ask(1, "slow", std::nullopt, now);  // generation 18
  ASSERT_TRUE(a.ok());
  FlatRound(campaign, now);
  absl::StatusOr<std::vector<Trial>> b = campaign.Ask(1, "slow", std::nullopt, now);  // generation 19
  ASSERT_TRUE(b.ok());
  ASSERT_EQ(campaign.engine().epoch, 0);
  ASSERT_EQ(campaign.engine().generation, 19);
  // Trial a reports with the cohort that converges, after its λ reports: left waiting for a
  // distribution that the restart replaces.
  const int64_t waiting = a->front().number;
  FlatRound(campaign, now, {MakeReport(waiting, search::Outcome::Score(1.0))});

  // The restart.
  const EngineState& e = campaign.engine();
  EXPECT_EQ(e.epoch, 1);
  EXPECT_EQ(e.generation, 20);  // generations count over all restarts
  EXPECT_EQ(e.phase, Phase::kOpen);
  EXPECT_EQ(e.base_population, 12);
  EXPECT_EQ(campaign.distribution().population_size(), 12);
  EXPECT_THAT(e.phase_message, HasSubstr("restart 1"));
  EXPECT_THAT(e.phase_message, HasSubstr("EqualValues"));
  const search::GaussianState& g = campaign.distribution().gaussian()->state();
  EXPECT_EQ(g.generation, 0);
  EXPECT_EQ(g.sigma, sigma0);
  EXPECT_TRUE(g.covariance == Eigen::MatrixXd::Identity(2, 2));
  EXPECT_TRUE(g.p_sigma.isZero(0.0));
  EXPECT_TRUE((g.mean.array() > 0.0).all() && (g.mean.array() < 1.0).all());
  EXPECT_FALSE(g.mean == Eigen::VectorXd::Constant(2, 0.5));  // a random start, not the centre

  // The outcome that was waiting for the old distribution is kept but not used.
  EXPECT_EQ(campaign.trial(waiting)->state, TrialState::kReported);
  EXPECT_EQ(campaign.trial(waiting)->use, Use::kTooStale);
  EXPECT_EQ(campaign.counts().pending, 0);
  // Trial b, sampled one generation before the restart, reports after it: within the staleness
  // limit in generations (20 − 19 = 1 ≤ 10), but from the old epoch, so it is stored, too stale.
  const Report late = MakeReport(b->front().number, search::Outcome::Score(0.5));
  absl::StatusOr<std::vector<ReportResult>> results = campaign.Tell({&late, 1}, now);
  ASSERT_TRUE(results.ok());
  EXPECT_TRUE((*results)[0].status.ok());
  const Trial& t = *campaign.trial(late.trial);
  EXPECT_EQ(t.state, TrialState::kReported);
  EXPECT_EQ(t.epoch, 0);
  EXPECT_EQ(t.use, Use::kTooStale);
  EXPECT_EQ(t.consumed_by, -1);

  // New trials belong to epoch 1; the next restart doubles the base population again.
  absl::StatusOr<std::vector<Trial>> next = campaign.Ask(1, "w", std::nullopt, now);
  ASSERT_TRUE(next.ok());
  EXPECT_EQ(next->front().epoch, 1);
  EXPECT_EQ(next->front().generation, 20);
  const Report void_report = MakeReport(next->front().number, search::Outcome::Void());
  ASSERT_TRUE(campaign.Tell({&void_report, 1}, now).ok());
  for (int k = 0; k < 15 && campaign.engine().epoch == 1; ++k) FlatRound(campaign, now);
  EXPECT_EQ(campaign.engine().epoch, 2);
  EXPECT_EQ(campaign.engine().generation, 35);
  EXPECT_EQ(campaign.engine().base_population, 24);
  EXPECT_EQ(campaign.distribution().population_size(), 24);
  EXPECT_EQ(campaign.engine().phase, Phase::kOpen);
}

// campaign.h: "Repeating the current phase is accepted and changes nothing." Resuming an open campaign
// that has restarted keeps what its phase message says about the restart.
TEST(CampaignRestartTest, ResumingAnOpenCampaignChangesNothing) {
  CampaignOptions options;
  options.restarts = true;
  options.adapt_population = false;
  Campaign campaign = MakeCampaign(RealSpace(2, -1, 1), kMinimize, {}, options);
  absl::Time now = Origin();
  for (int g = 0; g < 20; ++g) FlatRound(campaign, now);
  ASSERT_EQ(campaign.engine().epoch, 1);
  ASSERT_EQ(campaign.engine().phase, Phase::kOpen);
  const EngineState before = campaign.engine();
  ASSERT_FALSE(before.phase_message.empty());
  EXPECT_TRUE(campaign.SetPhase(PhaseCommand::kResume, now).ok());
  test_util::ExpectSameEngine(campaign.engine(), before);
}

// A restart needs budget left: a campaign whose budget is spent when it converges ends converged.
TEST(CampaignRestartTest, NoRestartWithoutBudgetLeft) {
  CampaignOptions options;
  options.restarts = true;
  options.adapt_population = false;
  options.trial_budget = 120;  // exactly 20 cohorts of 6
  Campaign campaign = MakeCampaign(RealSpace(2, -1, 1), kMinimize, {}, options);
  absl::Time now = Origin();
  for (int g = 0; g < 20; ++g) FlatRound(campaign, now);
  EXPECT_EQ(campaign.engine().epoch, 0);
  EXPECT_EQ(campaign.engine().phase, Phase::kDone);
  EXPECT_EQ(campaign.engine().reason, DoneReason::kConverged);
}

// IPOP-CMA-ES (Auger and Hansen, "A restart CMA evolution strategy with increasing population
// size", CEC 2005; from memory): restarting with a doubled population solves the rotated Rastrigin
// function. Check: BBOB f15 (n = 10, [-5, 5]) reaches f − f_opt ≤ 1e-8 within 10⁶ evaluations in
// at least 7 of 10 seeds.
TEST(CampaignRestartTest, IpopSolvesRotatedRastrigin) {
  constexpr int kN = 10;
  constexpr int kSeeds = 10;
  constexpr int64_t kBudget = 1'000'000;
  int solved = 0;
  std::string summary;
  for (uint64_t seed = 1; seed <= kSeeds; ++seed) {
    const ogive::testing::BbobFunction f = ogive::testing::BbobFunction::Create(15, kN, 200 + seed);
    CampaignOptions options;
    options.seed = seed;
    options.restarts = true;
    options.trial_budget = kBudget;
    options.target = search::Outcome::Score(f.f_opt() + 1e-8);
    Campaign campaign = MakeCampaign(RealSpace(kN, -5, 5), kMinimize, {}, options);
    const test_util::RunResult r = test_util::RunSequential(
        campaign,
        [&](const Trial& t) { return search::Outcome::Score(f(UserPoint(campaign.space(), t.x))); },
        kBudget, [&](const search::Outcome& o) { return o.score - f.f_opt() <= 1e-8; }, false);
    EXPECT_TRUE(r.done) << "seed " << seed;
    const bool hit = campaign.engine().reason == DoneReason::kTarget;
    solved += hit;
    absl::StrAppend(&summary, "\n  seed ", seed, ": ", DoneReasonName(campaign.engine().reason),
                    " after ", r.evaluations, " evaluations, ", campaign.engine().epoch, " restarts");
  }
  EXPECT_GE(solved, 7) << "solved " << solved << " of " << kSeeds << ":" << summary;
}

}  // namespace
}  // namespace ogive::campaign
