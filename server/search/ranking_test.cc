// Tests of ranking: outcome order, ties and the IGO quantile weights.
#include "server/search/ranking.h"

#include <cmath>
#include <limits>
#include <ostream>
#include <vector>

#include "absl/status/status.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "server/search/random_stream.h"

namespace ogive::search {

// Found by argument-dependent lookup, so they live in TieSpan's namespace (this test binary only).
bool operator==(const TieSpan& a, const TieSpan& b) {
  return a.better == b.better && a.better_or_equal == b.better_or_equal;
}
void PrintTo(const TieSpan& s, std::ostream* os) {
  *os << "{" << s.better << ", " << s.better_or_equal << "}";
}

namespace {

using ::testing::ElementsAre;
using ::testing::HasSubstr;

constexpr OutcomeOrder kMinimize{false, Direction::kLowerIsBetter, 0};
constexpr OutcomeOrder kMaximize{false, Direction::kHigherIsBetter, 0};

std::vector<Outcome> Scores(const std::vector<double>& values) {
  std::vector<Outcome> out;
  for (double v : values) out.push_back(Outcome::Score(v));
  return out;
}

TieSpan Span(int better, int better_or_equal) { return TieSpan{better, better_or_equal}; }

std::vector<double> WeightsOf(const std::vector<Outcome>& cohort, const OutcomeOrder& order) {
  absl::StatusOr<std::vector<TieSpan>> spans = RankCohort(cohort, order);
  EXPECT_TRUE(spans.ok()) << spans.status();
  if (!spans.ok()) return {};
  return TieAveragedWeights(*spans, TruncationQuantileWeights(static_cast<int>(cohort.size())));
}

// IGO quantile weights (Ollivier, Arnold, Auger, Hansen, JMLR 18, 2017; formulas from memory,
// values computed in docs/references.md, "Ranking and IGO"): N = 10, w(q) = 2·1{q ≤ 1/2}.
TEST(TruncationQuantileWeightsTest, TenDistinctValuesGiveOneFifthToTheFiveBest) {
  const std::vector<double> w = TruncationQuantileWeights(10);
  ASSERT_EQ(w.size(), 10u);
  for (int k = 0; k < 10; ++k) EXPECT_NEAR(w[k], k < 5 ? 0.2 : 0.0, 1e-15) << "k=" << k;
  // Same through the ranking, with the cohort listed in scrambled order.
  const std::vector<double> by_member =
      WeightsOf(Scores({7, 2, 9, 0, 4, 8, 1, 6, 3, 5}), kMinimize);
  const std::vector<double> expected = {0, 0.2, 0, 0.2, 0.2, 0, 0.2, 0, 0.2, 0};
  ASSERT_EQ(by_member.size(), expected.size());
  for (size_t i = 0; i < expected.size(); ++i) {
    EXPECT_NEAR(by_member[i], expected[i], 1e-15) << "i=" << i;
  }
}

// docs/references.md (computed): the 5th and 6th tied get 0.1 each.
TEST(TruncationQuantileWeightsTest, FifthAndSixthTiedShareTheirWeights) {
  const std::vector<double> w = WeightsOf(Scores({0, 1, 2, 3, 4, 4, 6, 7, 8, 9}), kMinimize);
  const std::vector<double> expected = {0.2, 0.2, 0.2, 0.2, 0.1, 0.1, 0, 0, 0, 0};
  ASSERT_EQ(w.size(), expected.size());
  for (size_t i = 0; i < expected.size(); ++i) EXPECT_NEAR(w[i], expected[i], 1e-15) << "i=" << i;
}

// docs/references.md (computed): N = 4 all tied give 0.25 each.
TEST(TruncationQuantileWeightsTest, FourTiedGiveAQuarterEach) {
  const std::vector<double> w = WeightsOf(Scores({3, 3, 3, 3}), kMinimize);
  ASSERT_EQ(w.size(), 4u);
  for (double x : w) EXPECT_NEAR(x, 0.25, 1e-15);
}

// The logarithmic quantile weights ŵ_k = (1/N) w((k + 1/2)/N), w(q) = max(0, −2 ln(2q)) (ranking.h,
// after the IGO paper's quantile-weight definition): zero for the worse half, decreasing, and their
// sum tends to ∫_0^1 w = ∫_0^1 −ln t dt = 1. For N = 4 by hand: q = 1/8, 3/8 give (1/4)(−2 ln(1/4))
// = ln 2 and (1/4)(−2 ln(3/4)) = (1/2) ln(4/3).
TEST(LogQuantileWeightsTest, ShapeAndHandValues) {
  const std::vector<double> w4 = LogQuantileWeights(4);
  ASSERT_EQ(w4.size(), 4u);
  EXPECT_NEAR(w4[0], std::log(2.0), 1e-15);
  EXPECT_NEAR(w4[1], 0.5 * std::log(4.0 / 3.0), 1e-15);
  EXPECT_EQ(w4[2], 0.0);
  EXPECT_EQ(w4[3], 0.0);
  for (int n : {2, 3, 9, 10, 101}) {
    const std::vector<double> w = LogQuantileWeights(n);
    double sum = 0;
    for (int k = 0; k < n; ++k) {
      sum += w[k];
      if (2 * k + 1 >= n) {
        EXPECT_EQ(w[k], 0.0) << "n=" << n << " k=" << k;  // q ≥ 1/2
      }
      if (k > 0) {
        EXPECT_LE(w[k], w[k - 1]) << "n=" << n << " k=" << k;
      }
    }
    // The midpoint rule underestimates the integral of w, which is convex on (0, 1/2) and 0 beyond;
    // at N = 2 the sum is ln 2.
    EXPECT_GE(sum, std::log(2.0) - 1e-15) << "n=" << n;
    EXPECT_LE(sum, 1.0) << "n=" << n;
  }
  double sum = 0;
  for (double x : LogQuantileWeights(100000)) sum += x;
  EXPECT_NEAR(sum, 1.0, 1e-3);
}

// Tie averaging keeps the total weight (the average over a span spreads the span's sum evenly).
TEST(TieAveragedWeightsTest, AveragesOverTheSpan) {
  const std::vector<double> rank_weights = {0.5, 0.3, 0.2, -0.4};
  const std::vector<TieSpan> spans = {Span(1, 3), Span(0, 1), Span(1, 3), Span(3, 4)};
  const std::vector<double> w = TieAveragedWeights(spans, rank_weights);
  ASSERT_EQ(w.size(), 4u);
  EXPECT_NEAR(w[0], 0.25, 1e-15);
  EXPECT_NEAR(w[1], 0.5, 1e-15);
  EXPECT_NEAR(w[2], 0.25, 1e-15);
  EXPECT_NEAR(w[3], -0.4, 1e-15);
}

TEST(RankCohortTest, LowerIsBetter) {
  absl::StatusOr<std::vector<TieSpan>> spans = RankCohort(Scores({3.0, -1.0, 2.0}), kMinimize);
  ASSERT_TRUE(spans.ok()) << spans.status();
  EXPECT_THAT(*spans, ElementsAre(Span(2, 3), Span(0, 1), Span(1, 2)));
}

TEST(RankCohortTest, HigherIsBetter) {
  absl::StatusOr<std::vector<TieSpan>> spans = RankCohort(Scores({3.0, -1.0, 2.0}), kMaximize);
  ASSERT_TRUE(spans.ok()) << spans.status();
  EXPECT_THAT(*spans, ElementsAre(Span(0, 1), Span(2, 3), Span(1, 2)));
}

TEST(RankCohortTest, TiesOccupyTheirWholeSpan) {
  // k⁻ strictly better, k⁺ better or equal (itself included): IGO paper, the tie rule (from
  // memory).
  absl::StatusOr<std::vector<TieSpan>> spans = RankCohort(Scores({5, 1, 5, 0, 5}), kMinimize);
  ASSERT_TRUE(spans.ok()) << spans.status();
  EXPECT_THAT(*spans, ElementsAre(Span(2, 5), Span(1, 2), Span(2, 5), Span(0, 1), Span(2, 5)));
}

TEST(RankCohortTest, GradesRankByScaleIndexWithTheHighestBest) {
  const OutcomeOrder graded{true, Direction::kLowerIsBetter, 4};
  const std::vector<Outcome> cohort = {Outcome::Grade(0), Outcome::Grade(3), Outcome::Grade(1),
                                       Outcome::Grade(3)};
  absl::StatusOr<std::vector<TieSpan>> spans = RankCohort(cohort, graded);
  ASSERT_TRUE(spans.ok()) << spans.status();
  EXPECT_THAT(*spans, ElementsAre(Span(3, 4), Span(0, 2), Span(2, 3), Span(0, 2)));
}

TEST(RankCohortTest, InfeasibleRanksBelowEveryScoreAndTiesWithInfeasible) {
  // Even a score that is terrible in either direction beats infeasible.
  for (const OutcomeOrder& order : {kMinimize, kMaximize}) {
    const std::vector<Outcome> cohort = {Outcome::Infeasible(), Outcome::Score(1e300),
                                         Outcome::Infeasible(), Outcome::Score(-1e300)};
    absl::StatusOr<std::vector<TieSpan>> spans = RankCohort(cohort, order);
    ASSERT_TRUE(spans.ok()) << spans.status();
    EXPECT_EQ((*spans)[0], Span(2, 4));
    EXPECT_EQ((*spans)[2], Span(2, 4));
    EXPECT_EQ((*spans)[1].better_or_equal - (*spans)[1].better, 1);
    EXPECT_LT((*spans)[1].better, 2);
    EXPECT_LT((*spans)[3].better, 2);
  }
}

TEST(RankCohortTest, InfeasibleRanksBelowEveryGrade) {
  const OutcomeOrder graded{true, Direction::kLowerIsBetter, 3};
  const std::vector<Outcome> cohort = {Outcome::Infeasible(), Outcome::Grade(0),
                                       Outcome::Infeasible()};
  absl::StatusOr<std::vector<TieSpan>> spans = RankCohort(cohort, graded);
  ASSERT_TRUE(spans.ok()) << spans.status();
  EXPECT_THAT(*spans, ElementsAre(Span(1, 3), Span(0, 1), Span(1, 3)));
}

TEST(RankCohortTest, CompareOutcomesIsConsistent) {
  EXPECT_EQ(CompareOutcomes(Outcome::Score(1), Outcome::Score(2), kMinimize), -1);
  EXPECT_EQ(CompareOutcomes(Outcome::Score(1), Outcome::Score(2), kMaximize), 1);
  EXPECT_EQ(CompareOutcomes(Outcome::Score(2), Outcome::Score(2), kMinimize), 0);
  EXPECT_EQ(CompareOutcomes(Outcome::Infeasible(), Outcome::Infeasible(), kMinimize), 0);
  EXPECT_EQ(CompareOutcomes(Outcome::Infeasible(), Outcome::Score(-5), kMaximize), 1);
}

TEST(RankCohortTest, VoidIsRefused) {
  absl::StatusOr<std::vector<TieSpan>> spans =
      RankCohort({Outcome::Score(1), Outcome::Void()}, kMinimize);
  ASSERT_FALSE(spans.ok());
  EXPECT_EQ(spans.status().code(), absl::StatusCode::kInvalidArgument);
  EXPECT_THAT(spans.status().message(), HasSubstr("void"));
}

TEST(RankCohortTest, NonFiniteScoresAreRefusedNamingTheField) {
  for (double bad :
       {std::numeric_limits<double>::quiet_NaN(), std::numeric_limits<double>::infinity(),
        -std::numeric_limits<double>::infinity()}) {
    absl::StatusOr<std::vector<TieSpan>> spans =
        RankCohort({Outcome::Score(1), Outcome::Score(bad)}, kMinimize);
    ASSERT_FALSE(spans.ok()) << bad;
    EXPECT_EQ(spans.status().code(), absl::StatusCode::kInvalidArgument);
    EXPECT_THAT(spans.status().message(), HasSubstr("outcome.score"));
  }
}

TEST(RankCohortTest, GradesOutsideTheScaleAreRefused) {
  const OutcomeOrder graded{true, Direction::kLowerIsBetter, 3};
  for (int bad : {-1, 3, 100}) {
    absl::StatusOr<std::vector<TieSpan>> spans =
        RankCohort({Outcome::Grade(0), Outcome::Grade(bad)}, graded);
    ASSERT_FALSE(spans.ok()) << bad;
    EXPECT_EQ(spans.status().code(), absl::StatusCode::kInvalidArgument);
    EXPECT_THAT(spans.status().message(), HasSubstr("outcome.grade"));
  }
}

TEST(RankCohortTest, ScoreForAGradedCampaignAndGradeForAScoredCampaignAreRefused) {
  const OutcomeOrder graded{true, Direction::kLowerIsBetter, 3};
  absl::StatusOr<std::vector<TieSpan>> a =
      RankCohort({Outcome::Grade(1), Outcome::Score(0.5)}, graded);
  ASSERT_FALSE(a.ok());
  EXPECT_EQ(a.status().code(), absl::StatusCode::kInvalidArgument);
  EXPECT_THAT(a.status().message(), HasSubstr("grade"));
  absl::StatusOr<std::vector<TieSpan>> b =
      RankCohort({Outcome::Score(0.5), Outcome::Grade(1)}, kMinimize);
  ASSERT_FALSE(b.ok());
  EXPECT_EQ(b.status().code(), absl::StatusCode::kInvalidArgument);
  EXPECT_THAT(b.status().message(), HasSubstr("score"));
  EXPECT_EQ(CheckOutcome(Outcome::Score(0.5), graded).code(), absl::StatusCode::kInvalidArgument);
  EXPECT_EQ(CheckOutcome(Outcome::Grade(1), kMinimize).code(), absl::StatusCode::kInvalidArgument);
  EXPECT_TRUE(CheckOutcome(Outcome::Infeasible(), graded).ok());
  EXPECT_TRUE(CheckOutcome(Outcome::Infeasible(), kMinimize).ok());
}

// IGO algorithms depend on f only through ranks (Ollivier et al., JMLR 2017, abstract): the spans
// of f, exp(f) and f³ (strictly increasing transforms) are identical, ties included.
TEST(RankCohortTest, StrictlyIncreasingTransformsLeaveTheRanksUnchanged) {
  RandomStream random(20240611);
  for (int trial = 0; trial < 200; ++trial) {
    std::vector<double> f(12);
    for (double& v : f) v = 4.0 * random.Normal();
    // A few exact ties, which every transform must keep.
    f[3] = f[7];
    f[10] = f[1];
    std::vector<double> exp_f, cube_f;
    for (double v : f) {
      exp_f.push_back(std::exp(v));
      cube_f.push_back(v * v * v);
    }
    for (const OutcomeOrder& order : {kMinimize, kMaximize}) {
      absl::StatusOr<std::vector<TieSpan>> a = RankCohort(Scores(f), order);
      absl::StatusOr<std::vector<TieSpan>> b = RankCohort(Scores(exp_f), order);
      absl::StatusOr<std::vector<TieSpan>> c = RankCohort(Scores(cube_f), order);
      ASSERT_TRUE(a.ok() && b.ok() && c.ok());
      EXPECT_EQ(*a, *b) << "trial " << trial;
      EXPECT_EQ(*a, *c) << "trial " << trial;
    }
  }
}

}  // namespace
}  // namespace ogive::search
