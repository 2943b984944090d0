// Tests of the campaign engine with the ordinal surrogate (surrogate_step.h, CampaignOptions::surrogate).
// The functions are benchmark definitions (the sphere of the BBOB suite, Hansen et al., INRIA
// RR-6829); the checks are the properties the design promises: only the order of outcomes matters, a
// restored campaign continues bit for bit, campaigns the model does not cover are unchanged, the
// model-ranked updates never leave the last cohort's region, and on the sphere the model saves
// evaluations.
#include <algorithm>
#include <cmath>
#include <optional>
#include <vector>

#include "Eigen/Cholesky"
#include "gtest/gtest.h"
#include "server/campaign/campaign_test_util.h"
#include "server/campaign/surrogate_step.h"
#include "server/search/random_stream.h"

namespace ogive::campaign {
namespace {

using test_util::kMinimize;
using test_util::Origin;

CampaignOptions WithModel(uint64_t seed) {
  CampaignOptions options;
  options.seed = seed;
  options.restarts = true;
  options.surrogate = true;
  return options;
}

double Sphere(const Eigen::VectorXd& x) { return (x.array() - 0.3).square().sum(); }

// Asks one trial at a time and tells `transform(sphere)`; returns the samples in order.
std::vector<Eigen::VectorXd> Drive(Campaign& c, int trials, double (*transform)(double), int64_t first_second = 0) {
  std::vector<Eigen::VectorXd> xs;
  for (int k = 0; k < trials; ++k) {
    const absl::Time now = Origin() + absl::Seconds(first_second + k);
    absl::StatusOr<std::vector<Trial>> asked = c.Ask(1, "w", std::nullopt, now);
    EXPECT_TRUE(asked.ok()) << asked.status();
    if (!asked.ok()) break;
    const Trial& t = asked->front();
    xs.push_back(t.x);
    const Report report{t.number, search::Outcome::Score(transform(Sphere(test_util::UserPoint(c.space(), t.x)))), ""};
    EXPECT_TRUE(c.Tell({&report, 1}, now).ok());
  }
  return xs;
}

double Identity(double f) { return f; }
double Warp(double f) { return std::log(f + 1e-300) * 3 - 7; }  // strictly increasing

// Only the order of outcomes enters the model and the updates: a strictly increasing transform of
// every outcome gives the same candidates, bit for bit.
TEST(CampaignSurrogateTest, CandidatesDependOnlyOnTheOrderOfOutcomes) {
  const search::Space space = test_util::RealSpace(4, -1, 1);
  Campaign a = test_util::MakeCampaign(space, kMinimize, {}, WithModel(5));
  Campaign b = test_util::MakeCampaign(space, kMinimize, {}, WithModel(5));
  const std::vector<Eigen::VectorXd> xa = Drive(a, 300, Identity);
  const std::vector<Eigen::VectorXd> xb = Drive(b, 300, Warp);
  ASSERT_EQ(xa.size(), xb.size());
  for (size_t k = 0; k < xa.size(); ++k) ASSERT_EQ(xa[k], xb[k]) << "trial " << k + 1;
  ASSERT_NE(a.engine().model, nullptr);  // the model was in use
  int picks = 0;
  for (int64_t k = 1; k <= a.trial_count(); ++k) picks += a.trial(k)->screened_from > 1;
  EXPECT_GT(picks, 0) << "the model never earned the trust to pick: the test would not see it";
}

// The model is not stored: Restore rebuilds it from the records, and the restored campaign goes on
// exactly as the original does.
TEST(CampaignSurrogateTest, ARestoredCampaignContinuesBitForBit) {
  const search::Space space = test_util::RealSpace(5, -2, 2);
  Campaign original = test_util::MakeCampaign(space, kMinimize, {}, WithModel(9));
  Drive(original, 137, Identity);
  ASSERT_NE(original.engine().model, nullptr);
  absl::StatusOr<Campaign> restored =
      Campaign::Restore(space, kMinimize, {}, WithModel(9), original.Snapshot());
  ASSERT_TRUE(restored.ok()) << restored.status();
  ASSERT_NE(restored->engine().model, nullptr);
  for (int probe = 0; probe < 5; ++probe) {
    const Eigen::VectorXd x = Eigen::VectorXd::Constant(5, 0.1 * probe);
    EXPECT_EQ(original.engine().model->Predict(x), restored->engine().model->Predict(x));
  }
  const std::vector<Eigen::VectorXd> xa = Drive(original, 120, Identity, 1000);
  const std::vector<Eigen::VectorXd> xb = Drive(*restored, 120, Identity, 1000);
  ASSERT_EQ(xa.size(), xb.size());
  for (size_t k = 0; k < xa.size(); ++k) ASSERT_EQ(xa[k], xb[k]) << "trial " << 137 + k + 1;
  test_util::ExpectSameCampaign(original, *restored);
}

// Restored from its snapshot after every report, a campaign asks exactly what the original asks
// next, in the conditions that change the model's window: 8 workers with trials out, replicates
// (noise: replicates:2), restarts (epochs) and a confirming re-measurement of an older epoch's
// outcome handed out in a newer epoch (a replicate carries its original's epoch). The run checks that
// it met them all. With the window's scan stopping at that replicate (before replicates were passed
// over first), the restored model differed from the original's.
TEST(CampaignSurrogateTest, ARestoreAfterAnyReportContinuesBitForBit) {
  const search::Space space = test_util::RealSpace(2, -2, 2);
  CampaignOptions options = WithModel(21);
  options.noise.mode = NoiseMode::kReplicates;
  options.noise.replicates = 2;
  options.target = search::Outcome::Score(1e-7);
  search::DistributionOptions start;
  start.expected_workers = 8;
  Campaign c = test_util::MakeCampaign(space, kMinimize, start, options);
  std::vector<Trial> out;
  int replicates = 0, picks = 0, late_confirmations = 0;
  bool lucky_given = false;
  std::optional<Trial> straggler;
  int straggler_reports_at = -1;
  for (int k = 0; k < 3000 && c.engine().phase == Phase::kOpen; ++k) {
    const absl::Time now = Origin() + absl::Seconds(k);
    const bool straggler_due = straggler.has_value() && k == straggler_reports_at;
    if (out.size() >= 8 || straggler_due) {  // 8 workers, and the straggler's
      Trial t;
      if (straggler_due) {
        t = *straggler;
        straggler.reset();
      } else {
        t = out.front();
        out.erase(out.begin());
        if (!lucky_given && !straggler.has_value() && t.replicate_of == 0 && t.epoch < c.engine().epoch) {
          // The first trial of an old epoch out at a restart reports long after the new epoch began.
          straggler = t;
          straggler_reports_at = k + 60;
          continue;
        }
      }
      // The outcomes never meet the target (at least 10⁻³) but for the straggler's, a lucky
      // measurement: its confirming re-measurement is handed out in the new epoch, after the new
      // epoch's candidates and updates.
      double f = Sphere(test_util::UserPoint(space, t.x)) + 1e-3;
      if (straggler_due) {
        f = 0;
        lucky_given = true;
      }
      const Report r{t.number, search::Outcome::Score(f), ""};
      ASSERT_TRUE(c.Tell({&r, 1}, now).ok());
      absl::StatusOr<Campaign> restored = Campaign::Restore(space, kMinimize, start, options, c.Snapshot());
      ASSERT_TRUE(restored.ok()) << restored.status();
      ASSERT_EQ(c.engine().model == nullptr, restored->engine().model == nullptr) << "after trial " << t.number;
      if (c.engine().model != nullptr) {
        const Eigen::VectorXd probe = Eigen::VectorXd::Constant(2, 0.37);
        ASSERT_EQ(c.engine().model->Predict(probe), restored->engine().model->Predict(probe))
            << "after trial " << t.number;
      }
      if (c.engine().phase != Phase::kOpen) break;
      absl::StatusOr<std::vector<Trial>> a = c.Ask(1, "w", std::nullopt, now);
      absl::StatusOr<std::vector<Trial>> b = restored->Ask(1, "w", std::nullopt, now);
      ASSERT_TRUE(a.ok() && b.ok());
      ASSERT_EQ(a->front().x, b->front().x) << "trial " << a->front().number;
      ASSERT_EQ(a->front().screened_from, b->front().screened_from);
      out.push_back(a->front());
    } else {
      out.push_back(c.Ask(1, "w", std::nullopt, now)->front());
    }
    replicates += out.back().replicate_of != 0;
    late_confirmations += out.back().replicate_of != 0 && out.back().epoch < c.engine().epoch;
    picks += out.back().screened_from > 1;
  }
  EXPECT_EQ(c.engine().phase, Phase::kOpen) << c.engine().phase_message;
  EXPECT_GT(c.engine().epoch, 0) << "no restart happened";
  EXPECT_GT(replicates, 0) << "no replicate was handed out";
  EXPECT_GT(late_confirmations, 0) << "no re-measurement of an older epoch was handed out in a newer one";
  EXPECT_GT(picks, 0) << "the model never picked";
}

// A space with flags or options is outside the model: the campaign runs as without it.
TEST(CampaignSurrogateTest, MixedSpacesRunAsWithoutTheModel) {
  const search::Space space = test_util::MixedSpace();
  CampaignOptions plain = WithModel(3);
  plain.surrogate = false;
  Campaign a = test_util::MakeCampaign(space, kMinimize, {}, WithModel(3));
  Campaign b = test_util::MakeCampaign(space, kMinimize, {}, plain);
  for (int k = 0; k < 200; ++k) {
    const absl::Time now = Origin() + absl::Seconds(k);
    const Trial ta = a.Ask(1, "w", std::nullopt, now)->front();
    const Trial tb = b.Ask(1, "w", std::nullopt, now)->front();
    ASSERT_EQ(ta.x, tb.x);
    const double f = ta.x.squaredNorm();
    const Report ra{ta.number, search::Outcome::Score(f), ""}, rb{tb.number, search::Outcome::Score(f), ""};
    ASSERT_TRUE(a.Tell({&ra, 1}, now).ok());
    ASSERT_TRUE(b.Tell({&rb, 1}, now).ok());
  }
  EXPECT_EQ(a.engine().model, nullptr);
}

TEST(ModelRankedUpdatesTest, FollowTheAgreement) {
  EXPECT_EQ(ModelRankedUpdates(std::nan(""), 10), 0);
  EXPECT_EQ(ModelRankedUpdates(0.49, 10), 0);
  EXPECT_EQ(ModelRankedUpdates(kModelTrustFull, 10), 9);
  EXPECT_EQ(ModelRankedUpdates(1.0, 10), 9);
  EXPECT_EQ(ModelRankedUpdates(1.0, 1000), kMaxModelRankedUpdates);  // a grown population: capped
  EXPECT_EQ(ModelRankedUpdates(0.5 * (kModelTrustFloor + kModelTrustFull), 10), 4);
}

// A model that says "further along x0 is always better" (a linear one) would carry the mean away
// without end; the updates stop once the mean would leave the Mahalanobis ball of radius c_y around
// where they started.
TEST(AdvanceByModelTest, NeverLeavesTheRegionTheUpdatesStartedFrom) {
  const search::Space space = test_util::RealSpace(3, -100, 100);
  search::DistributionOptions options;
  options.initial_spread = 0.01;
  absl::StatusOr<search::SearchDistribution> d = search::SearchDistribution::Create(space, options);
  ASSERT_TRUE(d.ok());
  search::RandomStream random(4);
  std::vector<Eigen::VectorXd> x;
  std::vector<double> rank;
  for (int i = 0; i < 20; ++i) {
    x.push_back(d->Sample(random).x);
    rank.push_back(-x.back()[0]);  // larger x0 is better
  }
  absl::StatusOr<search::OrdinalModel> model = search::OrdinalModel::Fit(*d->gaussian(), x, rank);
  ASSERT_TRUE(model.ok()) << model.status();
  const search::GaussianFamily start = *d->gaussian();
  const int made = AdvanceByModel(*d, *model, 1000, random);
  EXPECT_GT(made, 0);
  EXPECT_LT(made, 1000);
  const Eigen::VectorXd shift = d->gaussian()->state().mean - start.state().mean;
  EXPECT_GT(shift[0], 0);
  // The bound, computed here from its definition: ‖C^{-1/2} A⁻¹ shift / σ‖ ≤ c_y = √n + 2n/(n + 2),
  // with C from the starting state's covariance (not its eigendecomposition).
  const search::GaussianState& s0 = start.state();
  const Eigen::VectorXd y = shift.cwiseQuotient(s0.margin_scale) / s0.sigma;
  const double distance = std::sqrt(y.dot(s0.covariance.llt().solve(y)));
  const double n = 3;
  EXPECT_LE(distance, std::sqrt(n) + 2 * n / (n + 2) + 1e-9);
  EXPECT_GT(distance, 0.5 * (std::sqrt(n) + 2 * n / (n + 2)))  // the model carried it to near the edge
      << "the updates stopped well short of the region's edge";
}

// On the sphere in n = 5 (BBOB f1's shape, x* = 0.3) the model saves evaluations: after 100 outcomes
// the median best over 7 seeds is at least 30 times lower with it (ogive-bench-budget measures about
// 500 times on its protocol; the tolerance leaves room for seeds).
TEST(CampaignSurrogateTest, TheSphereNeedsFewerEvaluations) {
  const search::Space space = test_util::RealSpace(5, -5, 5);
  std::vector<double> with, without;
  for (uint64_t seed = 1; seed <= 7; ++seed) {
    for (bool model : {true, false}) {
      CampaignOptions options = WithModel(seed);
      options.surrogate = model;
      search::DistributionOptions start;
      start.initial_spread = 0.2;
      search::RandomStream where(100 + seed);
      for (int i = 0; i < 5; ++i) start.start.push_back(where.Uniform() * 0.8 + 0.1);
      Campaign c = test_util::MakeCampaign(space, kMinimize, start, options);
      double best = INFINITY;
      for (int k = 0; k < 100; ++k) {
        const absl::Time now = Origin() + absl::Seconds(k);
        const Trial t = c.Ask(1, "w", std::nullopt, now)->front();
        const double f = Sphere(test_util::UserPoint(space, t.x));
        best = std::min(best, f);
        const Report r{t.number, search::Outcome::Score(f), ""};
        ASSERT_TRUE(c.Tell({&r, 1}, now).ok());
      }
      (model ? with : without).push_back(best);
    }
  }
  std::sort(with.begin(), with.end());
  std::sort(without.begin(), without.end());
  EXPECT_LT(with[3] * 30, without[3]) << "median with the model " << with[3] << ", without " << without[3];
}

// Trials still out count in the pick: with 8 workers each holding a trial on the sphere (n = 2, 3, 5,
// four seeds each), no pick lands within kPickSeparation σ-units of a trial out when it is made, over
// 600 trials per case. The model's best of the draws alone does: with kPickSeparation = 0, 7 of the
// 12 cases had such picks (1 to 3 of 24-33 picks each), next to the previous generation's pick, still
// out.
TEST(CampaignSurrogateTest, APickKeepsAwayFromTrialsStillOut) {
  for (const int n : {2, 3, 5}) {
    for (uint64_t seed = 1; seed <= 4; ++seed) {
      const search::Space space = test_util::RealSpace(n, -5, 5);
      search::DistributionOptions start;
      start.expected_workers = 8;
      Campaign c = test_util::MakeCampaign(space, kMinimize, start, WithModel(seed));
      std::vector<Trial> out;
      int picks = 0, close = 0;
      for (int k = 0; k < 600; ++k) {
        const absl::Time now = Origin() + absl::Seconds(k);
        if (out.size() == 8) {  // the oldest reports first
          const Report r{out.front().number, search::Outcome::Score(Sphere(test_util::UserPoint(space, out.front().x))), ""};
          ASSERT_TRUE(c.Tell({&r, 1}, now).ok());
          out.erase(out.begin());
        }
        const std::optional<search::GaussianFamily> metric = c.engine().distribution->gaussian();
        const Trial t = c.Ask(1, "w", std::nullopt, now)->front();
        if (t.screened_from > 1) {
          ++picks;
          for (const Trial& o : out) {
            const Eigen::VectorXd apart = metric->StepOf(t.x, false) - metric->StepOf(o.x, false);
            if (metric->MahalanobisNorm(apart) < kPickSeparation) ++close;
          }
        }
        out.push_back(t);
      }
      EXPECT_GT(picks, 10) << "n = " << n << ", seed " << seed;
      EXPECT_EQ(close, 0) << "n = " << n << ", seed " << seed << ": " << close << " of " << picks << " picks";
    }
  }
}

}  // namespace
}  // namespace ogive::campaign
