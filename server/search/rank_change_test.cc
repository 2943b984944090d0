// Tests of the rank-change noise measure (server/search/rank_change.h) against the properties the
// measure is defined by in UH (Hansen et al., IEEE TEC 2009): repeats that reproduce the first
// measurements give a negative measure, repeats that are independent of them (pure noise) a positive
// one on average, and only the order of the outcomes matters.
#include "server/search/rank_change.h"

#include <cmath>
#include <vector>

#include "gtest/gtest.h"
#include "server/search/random_stream.h"

namespace ogive::search {
namespace {

const OutcomeOrder kMinimize{false, Direction::kLowerIsBetter, 0};

TEST(JointRanksTest, TiesShareTheAverageRankAsScipyRankdataDoes) {
  // Reference: scipy.stats.rankdata([3, 1, 3, 2, 5, 1]) (method "average", Debian's python3-scipy)
  // printed [4.5 1.5 4.5 3. 6. 1.5].
  const std::vector<Outcome> v = {Outcome::Score(3), Outcome::Score(1), Outcome::Score(3),
                                  Outcome::Score(2), Outcome::Score(5), Outcome::Score(1)};
  EXPECT_EQ(JointRanks(v, kMinimize), (std::vector<double>{4.5, 1.5, 4.5, 3, 6, 1.5}));
}

TEST(JointRanksTest, InfeasibleRanksBelowEveryScoreAndGradesFollowTheScale) {
  const std::vector<Outcome> v = {Outcome::Infeasible(), Outcome::Score(100), Outcome::Score(-4)};
  EXPECT_EQ(JointRanks(v, kMinimize), (std::vector<double>{3, 2, 1}));
  const OutcomeOrder graded{true, Direction::kLowerIsBetter, 3};
  const std::vector<Outcome> g = {Outcome::Grade(0), Outcome::Grade(2), Outcome::Grade(2)};
  EXPECT_EQ(JointRanks(g, graded), (std::vector<double>{3, 1.5, 1.5}));
}

std::vector<Outcome> Scores(const std::vector<double>& v) {
  std::vector<Outcome> out;
  for (double x : v) out.push_back(Outcome::Score(x));
  return out;
}

TEST(RankChangeMeasureTest, ExactRepeatsGiveANegativeMeasure) {
  for (int lambda : {4, 10, 40}) {
    std::vector<double> f;
    for (int k = 0; k < lambda; ++k) f.push_back(k * 1.5 + 2);
    std::vector<Remeasurement> repeats;
    for (int k = 0; k < std::max(1, lambda / 5); ++k) repeats.push_back({k * 3 % lambda, Outcome::Score(f[k * 3 % lambda])});
    EXPECT_LT(RankChangeMeasure(Scores(f), repeats, kMinimize), 0) << "λ = " << lambda;
  }
}

TEST(RankChangeMeasureTest, ARepeatAtTheOtherEndOfTheCohortGivesAPositiveMeasure) {
  std::vector<double> f;
  for (int k = 0; k < 10; ++k) f.push_back(k);
  const std::vector<Remeasurement> repeats = {{0, Outcome::Score(100)}};  // the best, measured again, is worst
  EXPECT_GT(RankChangeMeasure(Scores(f), repeats, kMinimize), 0);
}

// Pure noise: every measurement independent of the candidate. The measure averages above zero, and
// clearly so: over 4000 cohorts (seeded) its mean is more than 5 standard errors above zero.
TEST(RankChangeMeasureTest, IndependentRepeatsGiveAPositiveMeasureOnAverage) {
  for (int lambda : {6, 12, 30}) {
    RandomStream random(20261204 + lambda);
    double sum = 0, sum2 = 0;
    const int runs = 4000;
    for (int run = 0; run < runs; ++run) {
      std::vector<double> f;
      for (int k = 0; k < lambda; ++k) f.push_back(random.Normal());
      std::vector<Remeasurement> repeats;
      const int reev = std::max(2, lambda / 5);
      for (int k = 0; k < reev; ++k) repeats.push_back({k, Outcome::Score(random.Normal())});
      const double s = RankChangeMeasure(Scores(f), repeats, kMinimize);
      sum += s;
      sum2 += s * s;
    }
    const double mean = sum / runs;
    const double stderr_ = std::sqrt((sum2 / runs - mean * mean) / runs);
    EXPECT_GT(mean, 5 * stderr_) << "λ = " << lambda;
  }
}

// Only the order counts: an increasing transformation of every score leaves the measure unchanged.
TEST(RankChangeMeasureTest, IsInvariantUnderIncreasingTransformationsOfTheScores) {
  RandomStream random(7);
  for (int run = 0; run < 50; ++run) {
    std::vector<double> f;
    for (int k = 0; k < 12; ++k) f.push_back(random.Normal());
    std::vector<double> repeat = {random.Normal(), random.Normal(), random.Normal()};
    std::vector<Remeasurement> a, b;
    std::vector<double> g;
    for (double x : f) g.push_back(std::exp(3 * x) - 7);
    for (int k = 0; k < 3; ++k) {
      a.push_back({2 * k, Outcome::Score(repeat[k])});
      b.push_back({2 * k, Outcome::Score(std::exp(3 * repeat[k]) - 7)});
    }
    EXPECT_DOUBLE_EQ(RankChangeMeasure(Scores(f), a, kMinimize), RankChangeMeasure(Scores(g), b, kMinimize));
  }
}

}  // namespace
}  // namespace ogive::search
