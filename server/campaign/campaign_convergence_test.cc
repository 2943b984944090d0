// Tests of the campaign engine as a search: campaigns whose workers all fail, a graded objective with
// heavy ties, convergence with many concurrent workers (stale cohorts), the clipping of stale
// members, stopping on convergence, target and budget, and the adaptation of the population to the
// observed concurrency.
#include <algorithm>
#include <cmath>
#include <cstdint>
#include <deque>
#include <functional>
#include <optional>
#include <random>
#include <string>
#include <utility>
#include <vector>

#include "Eigen/Core"
#include "absl/status/status.h"
#include "absl/time/time.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "server/search/gaussian_family.h"
#include "server/search/ranking.h"
#include "server/search/search_distribution.h"
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
using test_util::RunSequential;
using test_util::UserPoint;
using ::testing::AnyOf;
using ::testing::HasSubstr;

Report MakeReport(int64_t trial, search::Outcome outcome) {
  Report r;
  r.trial = trial;
  r.outcome = outcome;
  return r;
}

// ---------------------------------------------------------------------------------------------
// Every worker fails.

TEST(CampaignFailingWorkersTest, AllVoidOutcomesKeepTheCampaignOpenAndAsking) {
  Campaign campaign = MakeCampaign(RealSpace(4, -5, 5), kMinimize, {}, {});
  absl::Time now = Origin();
  int64_t asked = 0;
  for (int round = 0; round < 1000; ++round) {
    const int count = 1 + round % 7;
    absl::StatusOr<std::vector<Trial>> trials = campaign.Ask(count, "w", std::nullopt, now);
    ASSERT_TRUE(trials.ok()) << "round " << round << ": " << trials.status();
    ASSERT_EQ(static_cast<int>(trials->size()), count);
    std::vector<Report> reports;
    for (const Trial& t : *trials) reports.push_back(MakeReport(t.number, search::Outcome::Void()));
    asked += count;
    now += absl::Seconds(3);
    absl::StatusOr<std::vector<ReportResult>> results = campaign.Tell(reports, now);
    ASSERT_TRUE(results.ok()) << results.status();
    for (const ReportResult& r : *results) ASSERT_TRUE(r.status.ok()) << r.status;
  }
  EXPECT_EQ(campaign.counts().voided, asked);
  EXPECT_EQ(campaign.engine().generation, 0);
  EXPECT_EQ(campaign.engine().informative, 0);
  EXPECT_EQ(campaign.engine().phase, Phase::kOpen);
  EXPECT_EQ(campaign.best(), nullptr);
  // The distribution is the one it started with.
  EXPECT_EQ(campaign.distribution().state().gaussian->generation, 0);
}

TEST(CampaignFailingWorkersTest, EveryLeaseLapsingKeepsTheCampaignOpenAndAsking) {
  Campaign campaign = MakeCampaign(RealSpace(4, -5, 5), kMinimize, {}, {});
  absl::Time now = Origin();
  for (int round = 0; round < 3000; ++round) {
    absl::StatusOr<std::vector<Trial>> trials = campaign.Ask(2, "w", absl::Seconds(30), now);
    ASSERT_TRUE(trials.ok()) << "round " << round << ": " << trials.status();
    now += absl::Seconds(round % 5 == 0 ? 31 : 11);
    if (round % 10 == 0) campaign.Sweep(now);
  }
  campaign.Sweep(now + absl::Seconds(31));
  EXPECT_EQ(campaign.counts().lapsed, 6000);
  EXPECT_EQ(campaign.counts().leased, 0);
  EXPECT_EQ(campaign.engine().generation, 0);
  EXPECT_EQ(campaign.engine().phase, Phase::kOpen);
  // A lease of 30 s with asks every 11 s keeps at most 3 rounds (6 trials) out at once.
  EXPECT_LE(campaign.engine().peak_outstanding, 6);
}

// ---------------------------------------------------------------------------------------------
// Grades with heavy ties.
//
// A 3-level grade scale on a quantized sphere in n = 5 reals on [-5, 5]: grade 2 within r1 = 1.5
// of x*, grade 1 within r2 = 5, grade 0 elsewhere. The best grade is a small region: a 5-ball of
// radius 1.5 has volume 8π²/15 · 1.5⁵ ≈ 40, 4e-4 of the box, and (1.5/5)⁵ ≈ 2.4e-3 of the grade-1
// ball. Most cohorts are almost entirely tied.
//
// Ties share the average of the weights of the ranks they span (Ollivier et al., JMLR 2017, the IGO
// paper). A cohort with k members in a better class gives each of them the mean of the top k
// weights and the others the mean of the rest, so the better class as a whole carries more weight:
// the mean moves to the weighted centroid of the members that landed in the better level set, and
// the covariance stretches towards them, while within a class no direction is preferred. This is
// the IGO update of the quantile-rewritten objective, which increases the probability of the better
// level sets; a ball's indicator pulls the mean towards the ball's centre, and once the
// distribution sits inside, the next ball's indicator takes over.
//
// Reaching the best grade needs a step size that does not collapse while the cohorts tie: see
// TiedCohortsLeaveTheStepSizeUnbiased below.

TEST(CampaignGradesTest, ThreeGradeSphereReachesTheBestGrade) {
  constexpr int kN = 5;
  constexpr double kR1 = 1.5;
  constexpr double kR2 = 5.0;
  constexpr int64_t kBudget = 2000;
  for (uint64_t seed = 1; seed <= 8; ++seed) {
    SCOPED_TRACE(::testing::Message() << "seed " << seed);
    const Eigen::VectorXd x_star = ogive::testing::BbobFunction::Create(1, kN, seed).x_opt();
    search::OutcomeOrder order;
    order.graded = true;
    order.grade_count = 3;
    CampaignOptions options;
    options.seed = seed;
    Campaign campaign = MakeCampaign(RealSpace(kN, -5, 5), order, {}, options);
    auto grade = [&](const Trial& t) {
      const double d = (UserPoint(campaign.space(), t.x) - x_star).norm();
      return search::Outcome::Grade(d < kR1 ? 2 : d < kR2 ? 1 : 0);
    };
    const test_util::RunResult r = RunSequential(
        campaign, grade, kBudget, [](const search::Outcome& o) { return o.grade == 2; },
        /*stop_when_reached=*/true);
    EXPECT_GE(r.reached_at, 1) << "best grade not reached in " << r.evaluations
                               << " evaluations; the campaign is " << PhaseName(campaign.engine().phase)
                               << " (" << DoneReasonName(campaign.engine().reason)
                               << "): " << campaign.engine().phase_message;
    if (r.reached_at >= 1) {
      // The engine's best trial is one of the best grade.
      ASSERT_NE(campaign.best(), nullptr);
      EXPECT_EQ(campaign.best()->outcome->grade, 2);
    }
  }
}

// Five reals on [-5, 5] graded on three grades (λ = 8).
Campaign ThreeGradeCampaign(uint64_t seed) {
  search::OutcomeOrder order;
  order.graded = true;
  order.grade_count = 3;
  CampaignOptions options;
  options.seed = seed;
  return MakeCampaign(RealSpace(5, -5, 5), order, {}, options);
}

// Every outcome on the worst of three grades: each cohort is tied below the top, so after each
// update σ is widened by φ = exp(0.2 + c_σ/d_σ) (flat fitness), about 1.6 for n = 5, λ = 8
// (c_σ = 0.365, d_σ = 1.365, see below). Sixty such generations would take σ to about 10¹² times its
// start; the campaign holds the spread σ√λmax(C) at
// the width of the box instead (kMaxStepSpread, internal units), keeps sampling the whole box and
// stays open, since ties below the top grade do not count towards EqualValues.
TEST(CampaignGradesTest, CohortsTiedBelowTheTopWidenTheSpreadOnlyToTheBox) {
  constexpr int kN = 5;
  Campaign campaign = ThreeGradeCampaign(3);
  double widest = 0.0;
  for (int g = 0; g < 60; ++g) {
    RunSequential(
        campaign, [](const Trial&) { return search::Outcome::Grade(0); },
        campaign.distribution().population_size(), [](const search::Outcome&) { return false; }, false);
    const double spread = campaign.distribution().gaussian()->LargestSpread();
    EXPECT_LE(spread, Campaign::kMaxStepSpread * (1 + 1e-12)) << "generation " << campaign.engine().generation;
    widest = std::max(widest, spread);
  }
  EXPECT_EQ(campaign.engine().generation, 60);
  EXPECT_NEAR(widest, Campaign::kMaxStepSpread, 1e-9);  // the widening reached the bound
  EXPECT_EQ(campaign.engine().phase, Phase::kOpen) << campaign.engine().phase_message;
  // Samples cover the box: over the last 200 trials, every coordinate has samples in each third.
  for (int j = 0; j < kN; ++j) {
    int thirds[3] = {0, 0, 0};
    for (int64_t k = campaign.trial_count() - 199; k <= campaign.trial_count(); ++k) {
      const double u = campaign.trial(k)->x[j];
      ++thirds[std::min(2, static_cast<int>(u * 3))];
    }
    for (int third : thirds) EXPECT_GE(third, 20) << "coordinate " << j;
  }
}

// Ties and coarse grades (docs/math.md): a cohort tied on a level worse than the best the epoch has
// sampled narrows the step (the better region was within reach and the samples now miss it), where
// one tied on the best level with no mixed cohort nearby widens it (a plateau). Here trial 1 is the
// only one on the middle grade: the first cohort is mixed, every later one is tied on the worst
// grade, below the epoch's best. Each such update divides σ by φ = exp(0.2 + c_σ/d_σ) ≈ 1.6 (n = 5,
// λ = 8) besides its own adaptation, so ten of them shrink σ by more than 10; widening would grow it.
TEST(CampaignGradesTest, CohortsTiedBelowTheEpochsBestNarrowTheStep) {
  Campaign campaign = ThreeGradeCampaign(4);
  const int lambda = campaign.distribution().population_size();
  auto grade = [](const Trial& t) { return search::Outcome::Grade(t.number == 1 ? 1 : 0); };
  RunSequential(campaign, grade, lambda, [](const search::Outcome&) { return false; }, false);
  ASSERT_EQ(campaign.engine().generation, 1);
  EXPECT_EQ(campaign.engine().epoch_best_trial, 1);
  EXPECT_EQ(campaign.engine().last_mixed_generation, 1);
  const double sigma1 = campaign.distribution().gaussian()->state().sigma;
  RunSequential(campaign, grade, 10 * lambda, [](const search::Outcome&) { return false; }, false);
  ASSERT_EQ(campaign.engine().generation, 11);
  EXPECT_LT(campaign.distribution().gaussian()->state().sigma, sigma1 / 10);
  EXPECT_EQ(campaign.engine().phase, Phase::kOpen);
}

// A cohort whose outcomes all tie carries no information, like one ranked at random. Cumulative
// step-size adaptation is built so that under random selection p_σ ~ N(0, I) and ln σ is unbiased
// (Hansen, "The CMA Evolution Strategy: A Tutorial", arXiv:1604.00772, the design of CSA; from
// memory), and the IGO update with equal weights is zero in expectation (IGO paper). So on a
// plateau σ should drift neither way.
//
// Expected on the engine as written: the tie-averaged weights make ⟨y⟩_w the plain average of λ
// steps, N(0, C/λ), while p_σ is normalized with the untied μ_eff, so ‖p_σ‖ ≈ √(μ_eff/λ) E‖N(0,I)‖.
// For n = 5, λ = 8: μ_eff = 2.60, c_σ = 0.365, d_σ = 1.365 (tutorial, Table 1), √(2.60/8) = 0.57,
// so ln σ drops by about (c_σ/d_σ)(0.57 − 1) ≈ −0.115 per generation, −2.3 over 20.
//
// Checked over 20 seeds, 20 generations each (before the EqualValues rule, 10 + ⌈30·5/8⌉ = 29
// tied generations, ends the campaign), with σ0 = 0.02 so that samples seldom need repair at the
// bounds (repaired samples are clipped, which shortens p_σ too).
// Tolerance: the mean of ln(σ20/σ0) within ±0.5 of 0. Calibration: with distinct random scores
// (random selection, the control below) the per-seed values spread by about 0.7, so the standard
// error of the mean is ≈ 0.16 and ±0.5 is about 3 standard errors.
double MeanLogStepSizeChange(const std::function<search::Outcome(std::mt19937_64&)>& outcome) {
  constexpr int kSeeds = 20;
  constexpr int kGenerations = 20;
  double sum = 0.0;
  for (uint64_t seed = 1; seed <= kSeeds; ++seed) {
    CampaignOptions options;
    options.seed = seed;
    search::DistributionOptions d;
    d.initial_spread = 0.02;
    Campaign campaign = MakeCampaign(RealSpace(5, -5, 5), kMinimize, d, options);
    const double sigma0 = campaign.distribution().gaussian()->state().sigma;
    std::mt19937_64 rng(seed);
    RunSequential(
        campaign, [&](const Trial&) { return outcome(rng); },
        kGenerations * campaign.distribution().population_size(),
        [](const search::Outcome&) { return false; }, false);
    EXPECT_EQ(campaign.engine().generation, kGenerations);
    EXPECT_EQ(campaign.engine().phase, Phase::kOpen);
    sum += std::log(campaign.distribution().gaussian()->state().sigma / sigma0);
  }
  return sum / kSeeds;
}

TEST(CampaignGradesTest, RandomSelectionLeavesTheStepSizeUnbiased) {
  const double drift = MeanLogStepSizeChange([](std::mt19937_64& rng) {
    return search::Outcome::Score(std::uniform_real_distribution<double>(0.0, 1.0)(rng));
  });
  EXPECT_NEAR(drift, 0.0, 0.5);
}

TEST(CampaignGradesTest, TiedCohortsLeaveTheStepSizeUnbiased) {
  const double drift =
      MeanLogStepSizeChange([](std::mt19937_64&) { return search::Outcome::Score(1.0); });
  EXPECT_NEAR(drift, 0.0, 0.5) << "mean ln(σ20/σ0) = " << drift
                               << ": σ shrinks on a plateau of tied outcomes";
}

// ---------------------------------------------------------------------------------------------
// Many concurrent workers.

struct ConcurrentRun {
  int64_t evaluations = 0;
  int64_t reached_at = -1;
  int max_staleness = 0;
  double mean_staleness = 0.0;  // over all updates
  int64_t stale_members = 0;    // cohort members sampled before the generation they updated
  int64_t generations = 0;
};

// Keeps `workers` trials out at all times: each step reports one outstanding trial (the oldest
// asked, or one at random) and asks one to refill. Stops when f − f_opt ≤ gap or after
// `max_evaluations` reports.
ConcurrentRun RunConcurrent(Campaign& campaign, const ogive::testing::BbobFunction& f, int workers,
                            bool random_order, uint64_t order_seed, int64_t max_evaluations,
                            double gap) {
  ConcurrentRun run;
  std::mt19937_64 rng(order_seed);
  absl::Time now = Origin();
  std::deque<Trial> out;
  double staleness_sum = 0.0;
  while (run.evaluations < max_evaluations && campaign.engine().phase == Phase::kOpen) {
    while (static_cast<int>(out.size()) < workers) {
      absl::StatusOr<std::vector<Trial>> asked = campaign.Ask(1, "w", std::nullopt, now);
      if (!asked.ok()) {
        ADD_FAILURE() << asked.status();
        return run;
      }
      out.push_back(asked->front());
    }
    size_t pick = 0;
    if (random_order) pick = std::uniform_int_distribution<size_t>(0, out.size() - 1)(rng);
    const Trial t = out[pick];
    out.erase(out.begin() + static_cast<std::ptrdiff_t>(pick));
    const double fx = f(UserPoint(campaign.space(), t.x));
    ++run.evaluations;
    if (run.reached_at < 0 && fx - f.f_opt() <= gap) run.reached_at = run.evaluations;
    now += absl::Milliseconds(100);
    const Report report = MakeReport(t.number, search::Outcome::Score(fx));
    absl::StatusOr<TellPlan> plan = campaign.PlanTell({&report, 1}, now);
    if (!plan.ok()) {
      ADD_FAILURE() << plan.status();
      return run;
    }
    for (const GenerationRecord& g : plan->change.generations) {
      run.max_staleness = std::max(run.max_staleness, g.max_staleness);
      staleness_sum += g.mean_staleness;
      ++run.generations;
      for (int64_t number : g.cohort) {
        // The plan's trials hold the records as they will be; the cohort's generation is g - 1.
        for (const Trial& c : plan->change.trials) {
          if (c.number == number && c.generation < g.generation - 1) ++run.stale_members;
        }
      }
    }
    campaign.Apply(std::move(plan->change));
    if (run.reached_at >= 0) break;
  }
  run.mean_staleness = run.generations > 0 ? staleness_sum / run.generations : 0.0;
  return run;
}

struct ConcurrencyCase {
  int function_id;
  bool random_order;
  bool adapt_population;
  int64_t budget;
};

class CampaignConcurrencyTest : public ::testing::TestWithParam<ConcurrencyCase> {};

// With W = 3λ trials out at once (λ = 10 for n = 10), cohorts mix generations; the campaign still
// reaches f − f_opt ≤ 1e-8 on BBOB f1 and f10 (n = 10, [-5, 5]) for each of three seeds, within
// 20000 evaluations on f1 and 60000 on f10. Reports come back oldest first or in a random order;
// with population adaptation (the default) λ grows to W and most members are one generation old,
// without it λ stays 10 and members are about three generations old (up to the limit of 10 in
// random order). The budgets are several times what a sequential CMA-ES needs (about 1500 and 6000
// evaluations for n = 10, common practice), since every stale member is clipped and gets no
// negative weight.
TEST_P(CampaignConcurrencyTest, ConvergesWithThreeLambdaWorkersOutstanding) {
  const ConcurrencyCase& c = GetParam();
  constexpr int kN = 10;
  for (uint64_t seed = 1; seed <= 3; ++seed) {
    SCOPED_TRACE(::testing::Message() << "seed " << seed);
    const ogive::testing::BbobFunction f =
        ogive::testing::BbobFunction::Create(c.function_id, kN, 100 + seed);
    CampaignOptions options;
    options.seed = seed;
    options.adapt_population = c.adapt_population;
    Campaign campaign = MakeCampaign(RealSpace(kN, -5, 5), kMinimize, {}, options);
    const int lambda = campaign.distribution().population_size();
    ASSERT_EQ(lambda, 10);  // 4 + ⌊3 ln 10⌋ (tutorial, Table 1)
    const ConcurrentRun run =
        RunConcurrent(campaign, f, 3 * lambda, c.random_order, seed, c.budget, 1e-8);
    EXPECT_GE(run.reached_at, 1) << "f" << c.function_id << " not solved in " << run.evaluations
                                 << " evaluations; phase " << PhaseName(campaign.engine().phase)
                                 << ": " << campaign.engine().phase_message;
    // Cohorts did mix generations.
    EXPECT_GE(run.max_staleness, 1);
    EXPECT_GT(run.stale_members, 0);
  }
}

// f10 without adaptation is left out: with λ = 10 and members three generations old, C degenerates
// (condition number 1e14) before the target in every seed, which is why the engine raises λ to the
// concurrency (docs/math.md).
INSTANTIATE_TEST_SUITE_P(Functions, CampaignConcurrencyTest,
                         ::testing::Values(ConcurrencyCase{1, false, true, 20000},
                                           ConcurrencyCase{1, true, true, 20000},
                                           ConcurrencyCase{1, false, false, 20000},
                                           ConcurrencyCase{1, true, false, 20000},
                                           ConcurrencyCase{10, false, true, 60000},
                                           ConcurrencyCase{10, true, true, 60000}));

// ---------------------------------------------------------------------------------------------
// Clipping of stale members.
//
// A trial sampled at generation 0 and reported 25 updates later (within a staleness limit of 30),
// far from the current mean and with the best outcome of its cohort, enters the update as an
// external solution: its step y = (x − m)/σ is clipped to the Mahalanobis radius
// c_y = √n + 2n/(n + 2) (Hansen, "Injecting external solutions into CMA-ES", arXiv:1110.4181; rule
// from memory; c_y = 4.8289 for n = 10 in docs/references.md). Unclipped, the same member would move
// the mean further.
TEST(CampaignClippingTest, StaleFarOffMemberIsClippedBeforeItMovesTheMean) {
  constexpr int kN = 10;
  CampaignOptions options;
  options.seed = 3;
  options.adapt_population = false;  // keep λ = 10 although one extra trial is out
  options.staleness_limit = 30;
  Campaign campaign = MakeCampaign(RealSpace(kN, -5, 5), kMinimize, {}, options);
  const int lambda = campaign.distribution().population_size();
  ASSERT_EQ(lambda, 10);
  // A sphere around (3, ..., 3): the mean travels away from the centre, where the stale trial is.
  auto f = [&](const Trial& t) {
    return (UserPoint(campaign.space(), t.x).array() - 3.0).square().sum();
  };
  absl::Time now = Origin();
  absl::StatusOr<std::vector<Trial>> stale = campaign.Ask(1, "slow", absl::Hours(24), now);
  ASSERT_TRUE(stale.ok());
  const Trial old = stale->front();
  ASSERT_EQ(old.generation, 0);
  for (int g = 0; g < 25; ++g) {
    absl::StatusOr<std::vector<Trial>> asked = campaign.Ask(lambda, "fast", std::nullopt, now);
    ASSERT_TRUE(asked.ok());
    std::vector<Report> reports;
    for (const Trial& t : *asked) {
      reports.push_back(MakeReport(t.number, search::Outcome::Score(f(t))));
    }
    now += absl::Seconds(1);
    ASSERT_TRUE(campaign.Tell(reports, now).ok());
  }
  ASSERT_EQ(campaign.engine().generation, 25);

  const search::GaussianFamily before = *campaign.distribution().gaussian();
  // The precondition: the old trial lies far outside the clipping radius of the current
  // distribution.
  const double c_y = before.ClipRadius();
  EXPECT_NEAR(c_y, 4.8289, 1e-4);
  const double distance = before.MahalanobisNorm(before.StepOf(old.x, /*clip=*/false));
  ASSERT_GT(distance, 2.0 * c_y);
  EXPECT_NEAR(before.MahalanobisNorm(before.StepOf(old.x, /*clip=*/true)), c_y, 1e-9 * c_y);

  // One cohort: nine fresh trials and the stale one, which reports the best score of all.
  absl::StatusOr<std::vector<Trial>> fresh = campaign.Ask(lambda - 1, "fast", std::nullopt, now);
  ASSERT_TRUE(fresh.ok());
  std::vector<Report> reports;
  for (const Trial& t : *fresh) {
    reports.push_back(MakeReport(t.number, search::Outcome::Score(f(t))));
  }
  reports.push_back(MakeReport(old.number, search::Outcome::Score(-1.0)));
  absl::StatusOr<TellPlan> plan = campaign.PlanTell(reports, now + absl::Seconds(1));
  ASSERT_TRUE(plan.ok()) << plan.status();
  ASSERT_EQ(plan->change.generations.size(), 1u);
  const GenerationRecord record = plan->change.generations[0];
  campaign.Apply(std::move(plan->change));
  EXPECT_EQ(record.max_staleness, 25);
  ASSERT_EQ(static_cast<int>(record.cohort.size()), lambda);
  EXPECT_EQ(campaign.trial(old.number)->use, Use::kConsumed);
  EXPECT_EQ(campaign.trial(old.number)->consumed_by, 26);

  // The same update by hand at the family level, with the old member clipped (external) and not.
  std::vector<search::Outcome> outcomes;
  std::vector<search::GaussianSample> clipped, unclipped;
  for (int64_t number : record.cohort) {
    const Trial& t = *campaign.trial(number);
    outcomes.push_back(*t.outcome);
    const bool is_old = number == old.number;
    clipped.push_back({t.x, is_old || t.repaired});
    unclipped.push_back({t.x, !is_old && t.repaired});
  }
  absl::StatusOr<std::vector<search::TieSpan>> spans = search::RankCohort(outcomes, kMinimize);
  ASSERT_TRUE(spans.ok());
  search::GaussianFamily with_clip = before;
  search::GaussianFamily without_clip = before;
  ASSERT_TRUE(with_clip.Update(clipped, *spans).ok());
  ASSERT_TRUE(without_clip.Update(unclipped, *spans).ok());

  // The engine treated the stale member as external: its update is the clipped one, exactly.
  const Eigen::VectorXd& m0 = before.state().mean;
  const Eigen::VectorXd& m_engine = campaign.distribution().gaussian()->state().mean;
  EXPECT_TRUE(m_engine == with_clip.state().mean) << m_engine.transpose() << "\nvs\n"
                                                  << with_clip.state().mean.transpose();
  const double move_clipped =
      before.MahalanobisNorm((with_clip.state().mean - m0) / before.state().sigma);
  const double move_unclipped =
      before.MahalanobisNorm((without_clip.state().mean - m0) / before.state().sigma);
  EXPECT_GT(move_unclipped, 3.0 * move_clipped)
      << "clipped " << move_clipped << ", unclipped " << move_unclipped;
  // Clipped, the best member's pull is at most its weight times c_y, so the mean moves less than
  // w_1 c_y + (1 − w_1) · (the largest fresh step) in σ-units of the Mahalanobis norm.
  double largest_fresh = 0.0;
  for (const search::GaussianSample& s : clipped) {
    if (!s.external) {
      largest_fresh = std::max(largest_fresh, before.MahalanobisNorm(before.StepOf(s.x, false)));
    }
  }
  const double w1 = before.parameters().weights[0];
  EXPECT_LE(move_clipped, w1 * c_y + (1.0 - w1) * largest_fresh + 1e-9);
  EXPECT_GT(move_unclipped, w1 * distance * 0.5);
}

// ---------------------------------------------------------------------------------------------
// Stopping: convergence, target, budget.

TEST(CampaignStoppingTest, SphereWithoutRestartsEndsConvergedNamingARule) {
  constexpr int kN = 10;
  for (uint64_t seed = 1; seed <= 3; ++seed) {
    SCOPED_TRACE(::testing::Message() << "seed " << seed);
    const ogive::testing::BbobFunction f = ogive::testing::BbobFunction::Create(1, kN, seed);
    CampaignOptions options;
    options.seed = seed;
    Campaign campaign = MakeCampaign(RealSpace(kN, -5, 5), kMinimize, {}, options);
    const test_util::RunResult r = RunSequential(
        campaign,
        [&](const Trial& t) { return search::Outcome::Score(f(UserPoint(campaign.space(), t.x))); },
        50000, [](const search::Outcome&) { return false; }, false);
    ASSERT_TRUE(r.done) << "still " << PhaseName(campaign.engine().phase) << " after " << r.evaluations
                        << " evaluations";
    EXPECT_EQ(campaign.engine().reason, DoneReason::kConverged);
    EXPECT_THAT(campaign.engine().phase_message,
                AnyOf(HasSubstr("(TolX)"), HasSubstr("(NoEffectCoord)"),
                      HasSubstr("(NoEffectAxis)"), HasSubstr("(EqualValues)")))
        << "expected one of the rules of termination.h";
    // It converged where it should: at the optimum.
    ASSERT_NE(campaign.best(), nullptr);
    EXPECT_LE(campaign.best()->outcome->score - f.f_opt(), 1e-8);
    // Done: no more candidates.
    EXPECT_EQ(campaign.Ask(1, "w", std::nullopt, Origin() + absl::Hours(100)).status().code(),
              absl::StatusCode::kFailedPrecondition);
  }
}

TEST(CampaignStoppingTest, TargetEndsTheCampaignWhenReached) {
  constexpr int kN = 10;
  for (uint64_t seed = 1; seed <= 3; ++seed) {
    SCOPED_TRACE(::testing::Message() << "seed " << seed);
    const ogive::testing::BbobFunction f = ogive::testing::BbobFunction::Create(1, kN, seed);
    CampaignOptions options;
    options.seed = seed;
    options.target = search::Outcome::Score(f.f_opt() + 1e-3);
    Campaign campaign = MakeCampaign(RealSpace(kN, -5, 5), kMinimize, {}, options);
    const test_util::RunResult r = RunSequential(
        campaign,
        [&](const Trial& t) { return search::Outcome::Score(f(UserPoint(campaign.space(), t.x))); },
        50000, [&](const search::Outcome& o) { return o.score <= f.f_opt() + 1e-3; }, false);
    ASSERT_TRUE(r.done);
    EXPECT_EQ(campaign.engine().reason, DoneReason::kTarget);
    EXPECT_THAT(campaign.engine().phase_message, HasSubstr("target"));
    ASSERT_NE(campaign.best(), nullptr);
    EXPECT_LE(campaign.best()->outcome->score, f.f_opt() + 1e-3);
    // It stopped with the Tell that brought the first outcome at the target: that batch of λ was
    // the last one.
    const int lambda = campaign.distribution().population_size();
    EXPECT_GT(r.reached_at, r.evaluations - lambda);
    EXPECT_THAT(campaign.engine().phase_message,
                HasSubstr(absl::StrCat("trial ", campaign.best()->number)));
  }
}

TEST(CampaignStoppingTest, BudgetEndsTheCampaignAtExactlyTheBudget) {
  constexpr int kN = 10;
  constexpr int64_t kBudget = 305;  // not a multiple of λ = 10: the last ask is trimmed to 5
  const ogive::testing::BbobFunction f = ogive::testing::BbobFunction::Create(1, kN, 4);
  CampaignOptions options;
  options.seed = 4;
  options.trial_budget = kBudget;
  Campaign campaign = MakeCampaign(RealSpace(kN, -5, 5), kMinimize, {}, options);
  absl::Time now = Origin();
  int64_t voids = 0;
  std::vector<size_t> sizes;
  while (campaign.engine().phase == Phase::kOpen) {
    absl::StatusOr<std::vector<Trial>> asked = campaign.Ask(10, "w", std::nullopt, now);
    ASSERT_TRUE(asked.ok()) << asked.status();
    sizes.push_back(asked->size());
    std::vector<Report> reports;
    for (const Trial& t : *asked) {
      // Every seventh trial fails; voids do not count towards the budget.
      const bool fails = t.number % 7 == 0;
      voids += fails;
      reports.push_back(
          MakeReport(t.number, fails ? search::Outcome::Void()
                                     : search::Outcome::Score(f(UserPoint(campaign.space(), t.x)))));
    }
    now += absl::Seconds(1);
    ASSERT_TRUE(campaign.Tell(reports, now).ok());
    ASSERT_LT(sizes.size(), 100u);
  }
  EXPECT_EQ(campaign.engine().reason, DoneReason::kBudget);
  EXPECT_EQ(campaign.engine().informative, kBudget);
  EXPECT_EQ(campaign.counts().reported, kBudget);
  EXPECT_EQ(campaign.counts().voided, voids);
  EXPECT_EQ(campaign.trial_count(), kBudget + voids);
  EXPECT_LT(sizes.back(), 10u);
  EXPECT_THAT(campaign.engine().phase_message, HasSubstr("budget"));
}

// When the update that ends a campaign (converged, no restarts) leaves outcomes waiting, those that
// are now older than the staleness limit are too stale like any other (trial.h: kTooStale, "older
// than the staleness limit"), not pending.
TEST(CampaignStoppingTest, ConvergenceLeavesNoPendingOutcomeBeyondTheStalenessLimit) {
  CampaignOptions options;
  options.staleness_limit = 1;
  options.adapt_population = false;
  Campaign campaign = MakeCampaign(RealSpace(2, -1, 1), kMinimize, {}, options);
  const int lambda = campaign.distribution().population_size();
  ASSERT_EQ(lambda, 6);
  // All outcomes equal: the EqualValues rule (termination.h) ends the campaign after
  // 10 + ⌈30 n / λ⌉ = 10 + ⌈60 / 6⌉ = 20 tied cohorts.
  const int64_t flat_limit = 20;
  absl::Time now = Origin();
  auto round = [&](std::vector<Report> extra) {
    absl::StatusOr<std::vector<Trial>> asked = campaign.Ask(lambda, "w", std::nullopt, now);
    ASSERT_TRUE(asked.ok()) << asked.status();
    std::vector<Report> reports;
    for (const Trial& t : *asked) {
      reports.push_back(MakeReport(t.number, search::Outcome::Score(1.0)));
    }
    for (Report& r : extra) reports.push_back(std::move(r));
    now += absl::Seconds(1);
    ASSERT_TRUE(campaign.Tell(reports, now).ok());
  };
  for (int g = 0; g < flat_limit - 2; ++g) round({});
  ASSERT_EQ(campaign.engine().generation, flat_limit - 2);
  absl::StatusOr<std::vector<Trial>> late = campaign.Ask(1, "w", std::nullopt, now);
  ASSERT_TRUE(late.ok());
  const int64_t straggler = late->front().number;  // sampled at generation 18
  round({});
  ASSERT_EQ(campaign.engine().generation, flat_limit - 1);
  ASSERT_EQ(campaign.engine().phase, Phase::kOpen);
  // Its report arrives with the cohort that ends the campaign, after the cohort's λ reports: it is
  // within the limit when stored (19 − 18 = 1) and left waiting by the final update (20 − 18 = 2).
  round({MakeReport(straggler, search::Outcome::Score(1.0))});
  ASSERT_EQ(campaign.engine().generation, flat_limit);
  ASSERT_EQ(campaign.engine().reason, DoneReason::kConverged);
  const Trial& t = *campaign.trial(straggler);
  EXPECT_EQ(t.use, Use::kTooStale)
      << "sampled at generation " << t.generation << ", now " << campaign.engine().generation
      << ", limit 1, but " << UseName(t.use);
  EXPECT_EQ(campaign.counts().pending, 0);
}

// ---------------------------------------------------------------------------------------------
// Population adaptation.

// For `reports` reports: refills up to `workers` trials out, then reports the oldest one. With
// fewer workers than trials out, the surplus drains one report at a time. Returns the generation
// records of the updates made.
std::vector<GenerationRecord> KeepOut(Campaign& campaign, const ogive::testing::BbobFunction& f,
                                      int workers, int reports, absl::Time& now,
                                      std::deque<int64_t>& out) {
  std::vector<GenerationRecord> records;
  for (int k = 0; k < reports; ++k) {
    while (static_cast<int>(out.size()) < workers) {
      absl::StatusOr<std::vector<Trial>> asked = campaign.Ask(1, "w", std::nullopt, now);
      EXPECT_TRUE(asked.ok()) << asked.status();
      if (!asked.ok()) return records;
      out.push_back(asked->front().number);
    }
    const Trial& t = *campaign.trial(out.front());
    const Report r = MakeReport(t.number, search::Outcome::Score(f(UserPoint(campaign.space(), t.x))));
    out.pop_front();
    now += absl::Seconds(1);
    absl::StatusOr<TellPlan> plan = campaign.PlanTell({&r, 1}, now);
    EXPECT_TRUE(plan.ok()) << plan.status();
    if (!plan.ok()) return records;
    for (const GenerationRecord& g : plan->change.generations) records.push_back(g);
    campaign.Apply(std::move(plan->change));
  }
  return records;
}

TEST(CampaignPopulationTest, PopulationFollowsTheObservedConcurrency) {
  constexpr int kN = 10;
  const ogive::testing::BbobFunction f = ogive::testing::BbobFunction::Create(1, kN, 8);
  CampaignOptions options;
  options.seed = 8;
  Campaign campaign = MakeCampaign(RealSpace(kN, -5, 5), kMinimize, {}, options);
  ASSERT_TRUE(campaign.options().adapt_population);  // the default
  const int lambda0 = campaign.distribution().population_size();
  ASSERT_EQ(lambda0, 10);
  absl::Time now = Origin();
  std::deque<int64_t> out;

  // Four times λ out at once: from the first generation boundary on, λ is the observed 40.
  std::vector<GenerationRecord> busy = KeepOut(campaign, f, 4 * lambda0, 400, now, out);
  ASSERT_GE(busy.size(), 5u);
  EXPECT_EQ(busy.front().population_size, lambda0);
  for (size_t g = 1; g < busy.size(); ++g) EXPECT_EQ(busy[g].population_size, 4 * lambda0) << g;
  EXPECT_EQ(campaign.distribution().population_size(), 4 * lambda0);
  EXPECT_EQ(campaign.distribution().gaussian()->parameters().lambda, 4 * lambda0);

  // Concurrency falls to 5: λ comes back down, but not below the design's 10.
  std::vector<GenerationRecord> quiet = KeepOut(campaign, f, 5, 200, now, out);
  ASSERT_GE(quiet.size(), 3u);
  EXPECT_EQ(campaign.distribution().population_size(), lambda0);
  EXPECT_EQ(quiet.back().population_size, lambda0);
}

// `workers` workers, each evaluation taking `seconds`, with leases of an hour. Every
// `vanish_every`-th trial is abandoned (its worker vanished and a fresh one asked at once), so it
// stays out until its lease lapses. Returns the generation records of `reports` reports.
std::vector<GenerationRecord> FarmWithVanishing(Campaign& campaign, const ogive::testing::BbobFunction& f,
                                                int workers, double seconds, int vanish_every, int reports,
                                                absl::Time& now) {
  std::vector<GenerationRecord> records;
  std::deque<std::pair<absl::Time, int64_t>> running;  // (finish, trial), in finish order
  int asked_count = 0;
  auto ask = [&]() -> bool {
    for (;;) {
      absl::StatusOr<std::vector<Trial>> asked = campaign.Ask(1, "w", absl::Hours(1), now);
      EXPECT_TRUE(asked.ok()) << asked.status();
      if (!asked.ok()) return false;
      if (++asked_count % vanish_every != 0) {
        running.emplace_back(now + absl::Seconds(seconds), asked->front().number);
        return true;
      }
    }
  };
  for (int w = 0; w < workers; ++w) {
    if (!ask()) return records;
    now += absl::Seconds(seconds / workers);  // staggered starts
  }
  for (int k = 0; k < reports; ++k) {
    const auto [finish, number] = running.front();
    running.pop_front();
    now = std::max(now, finish);
    const Trial& t = *campaign.trial(number);
    const Report r = MakeReport(number, search::Outcome::Score(f(UserPoint(campaign.space(), t.x))));
    absl::StatusOr<TellPlan> plan = campaign.PlanTell({&r, 1}, now);
    EXPECT_TRUE(plan.ok()) << plan.status();
    if (!plan.ok()) return records;
    for (const GenerationRecord& g : plan->change.generations) records.push_back(g);
    campaign.Apply(std::move(plan->change));
    if (!ask()) return records;
  }
  return records;
}

TEST(CampaignPopulationTest, TrialsOfVanishedWorkersStopCountingAfterAFewEvaluationTimes) {
  constexpr int kN = 10;
  constexpr int kWorkers = 8;
  const ogive::testing::BbobFunction f = ogive::testing::BbobFunction::Create(1, kN, 8);
  for (int vanish_every : {20, 5}) {  // 5% and 20% of trials abandoned
    SCOPED_TRACE(vanish_every);
    CampaignOptions options;
    options.seed = 9;
    Campaign campaign = MakeCampaign(RealSpace(kN, -5, 5), kMinimize, {}, options);
    ASSERT_EQ(campaign.distribution().population_size(), 10);
    absl::Time now = Origin();
    std::vector<GenerationRecord> records = FarmWithVanishing(campaign, f, kWorkers, 60.0, vanish_every, 600, now);
    ASSERT_GE(records.size(), 30u);
    // Abandoned trials pile up for an hour (60 evaluation times): counting them, λ would pass
    // 8 + 60·8/20 = 32 at 5% and 8 + 60·8/5 = 104 at 20%. Counted for 3 evaluation times, at most
    // 8 + 3·8/5 ≈ 13 are out at once on average at 20%; the peak of a generation adds a few.
    EXPECT_GT(campaign.counts().leased, 30);  // the abandoned trials are still out
    int largest = 0;
    for (size_t g = records.size() / 2; g < records.size(); ++g) largest = std::max(largest, records[g].population_size);
    EXPECT_LE(largest, 2 * kWorkers);
    EXPECT_GE(largest, 10);
    // The typical evaluation time is measured: every evaluation took 60 s.
    EXPECT_DOUBLE_EQ(campaign.engine().evaluation_seconds, 60.0);
  }
}

TEST(CampaignPopulationTest, NoAdaptationWhenTurnedOffAndNeverAboveTheCap) {
  constexpr int kN = 10;
  const ogive::testing::BbobFunction f = ogive::testing::BbobFunction::Create(1, kN, 8);
  {
    CampaignOptions options;
    options.adapt_population = false;
    Campaign campaign = MakeCampaign(RealSpace(kN, -5, 5), kMinimize, {}, options);
    absl::Time now = Origin();
    std::deque<int64_t> out;
    std::vector<GenerationRecord> records = KeepOut(campaign, f, 40, 200, now, out);
    ASSERT_GE(records.size(), 5u);
    for (const GenerationRecord& g : records) EXPECT_EQ(g.population_size, 10);
  }
  {
    CampaignOptions options;
    options.max_population_size = 25;
    Campaign campaign = MakeCampaign(RealSpace(kN, -5, 5), kMinimize, {}, options);
    absl::Time now = Origin();
    std::deque<int64_t> out;
    std::vector<GenerationRecord> records = KeepOut(campaign, f, 40, 200, now, out);
    ASSERT_GE(records.size(), 5u);
    EXPECT_EQ(campaign.distribution().population_size(), 25);
  }
}

}  // namespace
}  // namespace ogive::campaign
