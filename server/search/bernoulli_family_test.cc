// Tests of the flag block (Bernoulli IGO): the PBIL and compact-GA special cases, margins, sampling
// and refusals.
#include "server/search/bernoulli_family.h"

#include <cmath>
#include <limits>
#include <vector>

#include "Eigen/Core"
#include "absl/status/status.h"
#include "gtest/gtest.h"
#include "server/search/random_stream.h"
#include "server/search/ranking.h"

namespace ogive::search {
namespace {

constexpr OutcomeOrder kMinimize{false, Direction::kLowerIsBetter, 0};

BernoulliFamily Make(const Eigen::VectorXd& p, double learning_rate, double margin) {
  absl::StatusOr<BernoulliFamily> family = BernoulliFamily::Create(p, learning_rate, margin);
  EXPECT_TRUE(family.ok()) << family.status();
  return *std::move(family);
}

Eigen::VectorXd Bits(std::initializer_list<double> bits) {
  Eigen::VectorXd v(bits.size());
  int i = 0;
  for (double b : bits) v[i++] = b;
  return v;
}

// docs/references.md, "Ranking and IGO" (Ollivier et al., JMLR 2017; formulas from memory): Bernoulli
// IGO with truncation weights is PBIL with learning rate δt: p ← (1 − δt) p + δt · mean(bits of the
// best half). By hand: p = (0.5, 0.5, 0.5), N = 4, δt = 0.1, margin 0. Members with scores (lower
// is better):
//   x_a = (0, 1, 0) score 3      x_b = (1, 0, 0) score 1 (best)
//   x_c = (1, 0, 1) score 2      x_d = (0, 1, 1) score 4
// Truncation weights for N = 4: ŵ = (1/4)·2·1{(k + 1/2)/4 ≤ 1/2} = (0.5, 0.5, 0, 0) by rank, so the
// two best, x_b and x_c, have mean (1, 0, 0.5), and
//   p ← 0.9 · (0.5, 0.5, 0.5) + 0.1 · (1, 0, 0.5) = (0.55, 0.45, 0.50).
TEST(BernoulliFamilyTest, TruncationWeightsGivePbil) {
  BernoulliFamily family = Make(Eigen::Vector3d(0.5, 0.5, 0.5), 0.1, 0.0);
  const std::vector<Eigen::VectorXd> x = {Bits({0, 1, 0}), Bits({1, 0, 0}), Bits({1, 0, 1}),
                                          Bits({0, 1, 1})};
  const std::vector<Outcome> outcomes = {Outcome::Score(3), Outcome::Score(1), Outcome::Score(2),
                                         Outcome::Score(4)};
  const std::vector<TieSpan> spans = *RankCohort(outcomes, kMinimize);
  const std::vector<double> weights = TieAveragedWeights(spans, TruncationQuantileWeights(4));
  ASSERT_TRUE(family.Update(x, weights).ok());
  const Eigen::VectorXd& p = family.state().probabilities;
  EXPECT_NEAR(p[0], 0.55, 1e-15);
  EXPECT_NEAR(p[1], 0.45, 1e-15);
  EXPECT_NEAR(p[2], 0.50, 1e-15);
}

// The same with a start away from 1/2, where (1 − δt) p matters: p = (0.2, 0.7, 0.9), δt = 0.25,
// best half x_b = (1, 1, 0), x_c = (0, 1, 0): p ← 0.75 p + 0.25 (0.5, 1, 0) = (0.275, 0.775,
// 0.675).
TEST(BernoulliFamilyTest, PbilStepFromAnUnevenStart) {
  BernoulliFamily family = Make(Eigen::Vector3d(0.2, 0.7, 0.9), 0.25, 0.0);
  const std::vector<Eigen::VectorXd> x = {Bits({1, 0, 1}), Bits({1, 1, 0}), Bits({0, 1, 0}),
                                          Bits({0, 0, 1})};
  const std::vector<Outcome> outcomes = {Outcome::Score(9), Outcome::Score(1), Outcome::Score(2),
                                         Outcome::Score(7)};
  const std::vector<double> weights =
      TieAveragedWeights(*RankCohort(outcomes, kMinimize), TruncationQuantileWeights(4));
  ASSERT_TRUE(family.Update(x, weights).ok());
  const Eigen::VectorXd& p = family.state().probabilities;
  EXPECT_NEAR(p[0], 0.275, 1e-15);
  EXPECT_NEAR(p[1], 0.775, 1e-15);
  EXPECT_NEAR(p[2], 0.675, 1e-15);
}

// docs/references.md (IGO paper; from memory): with N = 2 and ŵ = (+1/2, −1/2) Bernoulli IGO is the
// compact genetic algorithm with δt = 2/K: p ← p + δt (½ (x_w − p) − ½ (x_l − p)) = p + (1/K)(x_w −
// x_l). By hand, K = 10 (δt = 0.2), p = (0.5, 0.5, 0.5, 0.3), winner (1, 0, 1, 0), loser (0, 1, 1,
// 1):
//   p ← p + 0.1 · (1, −1, 0, −1) = (0.6, 0.4, 0.5, 0.2).
TEST(BernoulliFamilyTest, PlusMinusHalfWeightsGiveTheCompactGa) {
  constexpr double kK = 10;
  BernoulliFamily family = Make(Eigen::Vector4d(0.5, 0.5, 0.5, 0.3), 2 / kK, 0.0);
  const std::vector<Eigen::VectorXd> x = {Bits({0, 1, 1, 1}), Bits({1, 0, 1, 0})};  // loser, winner
  const std::vector<double> weights = {-0.5, 0.5};
  ASSERT_TRUE(family.Update(x, weights).ok());
  const Eigen::VectorXd& p = family.state().probabilities;
  EXPECT_NEAR(p[0], 0.6, 1e-15);
  EXPECT_NEAR(p[1], 0.4, 1e-15);
  EXPECT_NEAR(p[2], 0.5, 1e-15);
  EXPECT_NEAR(p[3], 0.2, 1e-15);
}

// Probabilities stay in [margin, 1 − margin] however one-sided the selection.
TEST(BernoulliFamilyTest, MarginsHoldAfterManyOneSidedUpdates) {
  constexpr double kMargin = 0.05;
  BernoulliFamily family = Make(Eigen::Vector3d(0.5, 0.5, 0.5), 0.3, kMargin);
  const std::vector<Eigen::VectorXd> x = {Bits({1, 0, 1}), Bits({0, 1, 1}), Bits({1, 0, 1}),
                                          Bits({0, 1, 1})};
  // The members with bit 0 = 1 always win; bit 1 always loses; bit 2 is always on.
  const std::vector<double> weights = {0.5, 0.0, 0.5, 0.0};
  for (int t = 0; t < 1000; ++t) {
    ASSERT_TRUE(family.Update(x, weights).ok());
    for (int j = 0; j < 3; ++j) {
      ASSERT_GE(family.state().probabilities[j], kMargin) << "t=" << t;
      ASSERT_LE(family.state().probabilities[j], 1 - kMargin) << "t=" << t;
    }
  }
  // The bounds are reached, not just respected.
  EXPECT_NEAR(family.state().probabilities[0], 1 - kMargin, 1e-12);
  EXPECT_NEAR(family.state().probabilities[1], kMargin, 1e-12);
  EXPECT_NEAR(family.state().probabilities[2], 1 - kMargin, 1e-12);
}

// Bits are 0 or 1 and come out with frequency p_j. 10^5 draws: standard error √(p(1−p)/N) ≤ 0.0016;
// tolerance 5 standard errors of each p.
TEST(BernoulliFamilyTest, SamplesAreBitsWithFrequencyP) {
  const Eigen::VectorXd p = (Eigen::VectorXd(4) << 0.1, 0.5, 0.9, 0.02).finished();
  const BernoulliFamily family = Make(p, 0.1, 0.0);
  RandomStream random(404);
  constexpr int kDraws = 100000;
  Eigen::VectorXd ones = Eigen::VectorXd::Zero(4);
  for (int i = 0; i < kDraws; ++i) {
    const Eigen::VectorXd x = family.Sample(random);
    ASSERT_EQ(x.size(), 4);
    for (int j = 0; j < 4; ++j) {
      ASSERT_TRUE(x[j] == 0.0 || x[j] == 1.0) << x[j];
      ones[j] += x[j];
    }
  }
  for (int j = 0; j < 4; ++j) {
    EXPECT_NEAR(ones[j] / kDraws, p[j], 5 * std::sqrt(p[j] * (1 - p[j]) / kDraws)) << "j=" << j;
  }
}

TEST(BernoulliFamilyTest, CreateRefusesBadSettings) {
  const Eigen::Vector2d half(0.5, 0.5);
  for (double rate : {0.0, -0.1, 1.5, std::numeric_limits<double>::quiet_NaN()}) {
    EXPECT_EQ(BernoulliFamily::Create(half, rate, 0.1).status().code(),
              absl::StatusCode::kInvalidArgument)
        << rate;
  }
  for (double margin : {-0.01, 0.5, 0.7, std::numeric_limits<double>::quiet_NaN()}) {
    EXPECT_EQ(BernoulliFamily::Create(half, 0.1, margin).status().code(),
              absl::StatusCode::kInvalidArgument)
        << margin;
  }
  EXPECT_EQ(BernoulliFamily::Create(Eigen::Vector2d(0.05, 0.5), 0.1, 0.1).status().code(),
            absl::StatusCode::kInvalidArgument);
  EXPECT_EQ(BernoulliFamily::Create(Eigen::Vector2d(0.5, 0.95), 0.1, 0.1).status().code(),
            absl::StatusCode::kInvalidArgument);
  EXPECT_EQ(BernoulliFamily::Create(Eigen::VectorXd(), 0.1, 0.1).status().code(),
            absl::StatusCode::kInvalidArgument);
  EXPECT_TRUE(BernoulliFamily::Create(half, 1.0, 0.0).ok());
}

TEST(BernoulliFamilyTest, UpdateRefusesBadSizesAndNonBitsAndLeavesTheStateUnchanged) {
  BernoulliFamily family = Make(Eigen::Vector3d(0.3, 0.5, 0.7), 0.2, 0.05);
  const Eigen::VectorXd before = family.state().probabilities;
  const std::vector<Eigen::VectorXd> good = {Bits({1, 0, 1}), Bits({0, 0, 1})};
  auto expect_refused = [&](const std::vector<Eigen::VectorXd>& x, const std::vector<double>& w) {
    EXPECT_EQ(family.Update(x, w).code(), absl::StatusCode::kInvalidArgument);
    EXPECT_EQ(family.state().probabilities, before);
  };
  expect_refused(good, {0.5});                                  // one weight short
  expect_refused(good, {0.5, 0.25, 0.25});                      // one weight too many
  expect_refused({Bits({1, 0, 1}), Bits({0, 1})}, {0.5, 0.5});  // wrong number of bits
  for (double bad : {0.5, 2.0, -1.0, std::numeric_limits<double>::quiet_NaN()}) {
    expect_refused({Bits({1, 0, 1}), Bits({0, bad, 1})}, {0.5, 0.5});
  }
  EXPECT_TRUE(family.Update(good, {0.5, 0.5}).ok());
  EXPECT_NE(family.state().probabilities, before);
}

TEST(BernoulliFamilyTest, FromStateRoundTripsAndValidates) {
  BernoulliFamily family = Make(Eigen::Vector3d(0.3, 0.5, 0.7), 0.2, 0.05);
  ASSERT_TRUE(family.Update({Bits({1, 0, 1})}, {1.0}).ok());
  absl::StatusOr<BernoulliFamily> restored = BernoulliFamily::FromState(family.state());
  ASSERT_TRUE(restored.ok()) << restored.status();
  EXPECT_EQ(restored->state().probabilities, family.state().probabilities);
  EXPECT_EQ(restored->state().learning_rate, family.state().learning_rate);
  EXPECT_EQ(restored->state().margin, family.state().margin);
  BernoulliState bad = family.state();
  bad.probabilities[1] = 1.2;
  EXPECT_EQ(BernoulliFamily::FromState(bad).status().code(), absl::StatusCode::kInvalidArgument);
}

}  // namespace
}  // namespace ogive::search
