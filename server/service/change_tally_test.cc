// TallyChange on plans of a real campaign engine: each kind of report counted once (duplicates not),
// lapses only on the way from leased to lapsed, updates and restarts from the change.
#include "server/service/change_tally.h"

#include <vector>

#include "gtest/gtest.h"
#include "server/campaign/campaign_test_util.h"

namespace ogive::service {
namespace {

using search::Outcome;
using campaign::Report;
using campaign::Campaign;
using namespace campaign::test_util;

// Applies a planned change and returns its tally.
template <typename Plan>
ChangeTally ApplyTallied(Campaign& s, Plan plan) {
  ChangeTally tally = TallyChange(s, plan.change);
  s.Apply(std::move(plan.change));
  return tally;
}

TEST(ChangeTallyTest, ReportsByKindLapsesAndUpdates) {
  campaign::CampaignOptions options;
  options.seed = 5;
  search::DistributionOptions distribution;
  distribution.population_size = 4;
  Campaign s = MakeCampaign(RealSpace(2, 0, 1), kMinimize, distribution, options);
  absl::Time now = Origin();

  absl::StatusOr<campaign::AskPlan> ask = s.PlanAsk(6, "w", absl::Seconds(10), now);
  ASSERT_TRUE(ask.ok());
  EXPECT_TRUE(ApplyTallied(s, *std::move(ask)).empty());  // asking counts nothing

  // Three scores, one infeasible, one void: one update from the four informative outcomes.
  std::vector<Report> reports = {{1, Outcome::Score(1), ""}, {2, Outcome::Score(2), ""}, {3, Outcome::Score(3), ""},
                                 {4, Outcome::Infeasible(), ""}, {5, Outcome::Void(), ""}};
  absl::StatusOr<campaign::TellPlan> tell = s.PlanTell(reports, now);
  ASSERT_TRUE(tell.ok());
  ChangeTally t = ApplyTallied(s, *std::move(tell));
  EXPECT_EQ(t.tells_of(Outcome::Kind::kScore), 3);
  EXPECT_EQ(t.tells_of(Outcome::Kind::kInfeasible), 1);
  EXPECT_EQ(t.tells_of(Outcome::Kind::kVoid), 1);
  EXPECT_EQ(t.tells_of(Outcome::Kind::kGrade), 0);
  EXPECT_EQ(t.generations, 1);
  EXPECT_EQ(t.restarts, 0);
  EXPECT_EQ(t.lapses, 0);

  // The same report again is a duplicate: nothing new.
  tell = s.PlanTell({{1, Outcome::Score(1), ""}}, now);
  ASSERT_TRUE(tell.ok());
  EXPECT_EQ(ApplyTallied(s, *std::move(tell)).tells_of(Outcome::Kind::kScore), 0);

  // Trial 6 lapses once; a later sweep does not count it again; its late report is a tell.
  now += absl::Seconds(11);
  ChangeTally swept = TallyChange(s, s.PlanSweep(now));
  EXPECT_EQ(swept.lapses, 1);
  s.Apply(s.PlanSweep(now));
  EXPECT_EQ(TallyChange(s, s.PlanSweep(now + absl::Seconds(5))).lapses, 0);
  tell = s.PlanTell({{6, Outcome::Score(0.5), ""}}, now);
  ASSERT_TRUE(tell.ok());
  ChangeTally late = ApplyTallied(s, *std::move(tell));
  EXPECT_EQ(late.tells_of(Outcome::Kind::kScore), 1);
  EXPECT_EQ(late.lapses, 0);
}

TEST(ChangeTallyTest, RestartIsCounted) {
  campaign::CampaignOptions options;
  options.seed = 11;
  options.restarts = true;
  options.adapt_population = false;
  Campaign s = MakeCampaign(RealSpace(2, -1, 1), kMinimize, {}, options);
  absl::Time now = Origin();
  ChangeTally total;
  // Tied cohorts converge the campaign after 20 updates (campaign_restart_test.cc); with restarts on that is
  // a restart. Stop at the first one.
  for (int round = 0; round < 40 && total.restarts == 0; ++round) {
    const int lambda = s.distribution().population_size();
    absl::StatusOr<campaign::AskPlan> ask = s.PlanAsk(lambda, "w", std::nullopt, now);
    ASSERT_TRUE(ask.ok());
    const std::vector<int64_t> numbers = ask->trials;
    ApplyTallied(s, *std::move(ask));
    std::vector<Report> reports;
    for (int64_t n : numbers) reports.push_back({n, Outcome::Score(1.0), ""});
    absl::StatusOr<campaign::TellPlan> tell = s.PlanTell(reports, now);
    ASSERT_TRUE(tell.ok());
    const ChangeTally t = ApplyTallied(s, *std::move(tell));
    total.generations += t.generations;
    total.restarts += t.restarts;
  }
  EXPECT_EQ(total.restarts, 1);
  EXPECT_EQ(s.engine().epoch, 1);
  EXPECT_EQ(total.generations, s.engine().generation);
}

}  // namespace
}  // namespace ogive::service
