// Tests of the categorical block (categorical IGO): the natural-gradient step against the inverse
// Fisher matrix, the margin projection, sampling and refusals.
#include "server/search/categorical_family.h"

#include <cmath>
#include <limits>
#include <vector>

#include "Eigen/Core"
#include "absl/status/status.h"
#include "gtest/gtest.h"
#include "server/search/random_stream.h"

namespace ogive::search {
namespace {

CategoricalFamily Make(std::vector<Eigen::VectorXd> start, double learning_rate, double margin) {
  absl::StatusOr<CategoricalFamily> family =
      CategoricalFamily::Create(std::move(start), learning_rate, margin);
  EXPECT_TRUE(family.ok()) << family.status();
  return *std::move(family);
}

Eigen::VectorXd Index(double k) { return Eigen::VectorXd::Constant(1, k); }

// docs/references.md, "Ranking and IGO" (IGO paper; from memory): θ = (0.2, 0.3, 0.5), one member x =
// category 0 with weight 1, margin 0: Δθ/δt = e_0 − θ = (0.8, −0.3, −0.5) (the computed value (0.8,
// −0.3) for the first K − 1 coordinates, the last from Σ Δθ = 0).
TEST(CategoricalFamilyTest, NaturalGradientStepForOneMember) {
  constexpr double kRate = 1e-3;
  CategoricalFamily family = Make({Eigen::Vector3d(0.2, 0.3, 0.5)}, kRate, 0.0);
  ASSERT_TRUE(family.Update({Index(0)}, {1.0}).ok());
  const Eigen::VectorXd delta =
      (family.state().probabilities[0] - Eigen::Vector3d(0.2, 0.3, 0.5)) / kRate;
  EXPECT_NEAR(delta[0], 0.8, 1e-9);
  EXPECT_NEAR(delta[1], -0.3, 1e-9);
  EXPECT_NEAR(delta[2], -0.5, 1e-9);
}

// The same step derived from the definition of the natural gradient (IGO paper; from memory): in
// expectation parameters θ' = (θ_1 .. θ_{K−1}), θ_K = 1 − Σ θ', the inverse Fisher matrix is
// diag(θ') − θ'θ'ᵀ (docs/references.md), and the natural gradient of ln P(x) is F⁻¹ ∇_θ' ln P(x) with
//   ∇_θ' ln θ_x = e_x / θ_x              for x < K,
//   ∇_θ' ln θ_K = −(1, .., 1) / θ_K       for x = K.
// The family's step over several members with weights must equal δt Σ_i ŵ_i F⁻¹ ∇ ln P(x_i),
// extended to θ_K by Δθ_K = −Σ Δθ'.
TEST(CategoricalFamilyTest, StepEqualsInverseFisherTimesGradient) {
  const Eigen::Vector4d theta(0.1, 0.2, 0.3, 0.4);
  constexpr int kK = 4;
  const Eigen::Vector3d theta_prime = theta.head(kK - 1);
  const Eigen::Matrix3d inverse_fisher =
      Eigen::Matrix3d(theta_prime.asDiagonal()) - theta_prime * theta_prime.transpose();
  auto natural_gradient = [&](int x) {
    Eigen::Vector3d gradient = Eigen::Vector3d::Zero();
    if (x < kK - 1) {
      gradient[x] = 1.0 / theta[x];
    } else {
      gradient.setConstant(-1.0 / theta[kK - 1]);
    }
    const Eigen::Vector3d head = inverse_fisher * gradient;
    Eigen::Vector4d full;
    full << head, -head.sum();
    return full;
  };
  // Each category alone, then a weighted cohort with a negative weight.
  for (int x = 0; x < kK; ++x) {
    constexpr double kRate = 0.01;
    CategoricalFamily family = Make({theta}, kRate, 0.0);
    ASSERT_TRUE(family.Update({Index(x)}, {1.0}).ok());
    const Eigen::VectorXd delta = (family.state().probabilities[0] - theta) / kRate;
    for (int k = 0; k < kK; ++k) {
      EXPECT_NEAR(delta[k], natural_gradient(x)[k], 1e-9) << "x=" << x << " k=" << k;
    }
  }
  {
    constexpr double kRate = 0.05;
    const std::vector<int> members = {3, 1, 1, 0};
    const std::vector<double> weights = {0.5, 0.3, 0.3, -0.1};
    CategoricalFamily family = Make({theta}, kRate, 0.0);
    std::vector<Eigen::VectorXd> x;
    Eigen::Vector4d expected = Eigen::Vector4d::Zero();
    for (size_t i = 0; i < members.size(); ++i) {
      x.push_back(Index(members[i]));
      expected += weights[i] * natural_gradient(members[i]);
    }
    ASSERT_TRUE(family.Update(x, weights).ok());
    const Eigen::VectorXd delta = (family.state().probabilities[0] - theta) / kRate;
    for (int k = 0; k < kK; ++k) EXPECT_NEAR(delta[k], expected[k], 1e-9) << "k=" << k;
  }
}

// Several categorical parameters are updated independently, each by its own member coordinates.
TEST(CategoricalFamilyTest, ParametersAreUpdatedIndependently) {
  constexpr double kRate = 0.1;
  CategoricalFamily family = Make(CategoricalFamily::Uniform({2, 3}), kRate, 0.0);
  Eigen::VectorXd x(2);
  x << 1, 2;
  ASSERT_TRUE(family.Update({x}, {1.0}).ok());
  // θ ← θ + δt (e_x − θ): (1/2, 1/2) → (0.45, 0.55); (1/3, 1/3, 1/3) → (0.3, 0.3, 0.4).
  EXPECT_NEAR(family.state().probabilities[0][0], 0.45, 1e-14);
  EXPECT_NEAR(family.state().probabilities[0][1], 0.55, 1e-14);
  EXPECT_NEAR(family.state().probabilities[1][0], 0.3, 1e-14);
  EXPECT_NEAR(family.state().probabilities[1][1], 0.3, 1e-14);
  EXPECT_NEAR(family.state().probabilities[1][2], 0.4, 1e-14);
}

// After many one-sided updates every probability is still at least the margin and the sum is 1.
TEST(CategoricalFamilyTest, MarginProjectionKeepsProbabilitiesAndSum) {
  constexpr double kMargin = 0.05;
  CategoricalFamily family = Make(CategoricalFamily::Uniform({4, 2, 5}), 0.5, kMargin);
  Eigen::VectorXd x(3);
  x << 0, 1, 3;
  for (int t = 0; t < 1000; ++t) {
    ASSERT_TRUE(family.Update({x, x}, {0.7, 0.3}).ok());
    for (const Eigen::VectorXd& theta : family.state().probabilities) {
      ASSERT_GE(theta.minCoeff(), kMargin - 1e-15) << "t=" << t;
      ASSERT_NEAR(theta.sum(), 1.0, 1e-12) << "t=" << t;
    }
  }
  // The favoured option takes everything the margin leaves: 1 − (K − 1)·margin.
  EXPECT_NEAR(family.state().probabilities[0][0], 1 - 3 * kMargin, 1e-9);
  EXPECT_NEAR(family.state().probabilities[1][1], 1 - 1 * kMargin, 1e-9);
  EXPECT_NEAR(family.state().probabilities[2][3], 1 - 4 * kMargin, 1e-9);
  // Negative weights push an option down to the margin and no further.
  for (int t = 0; t < 1000; ++t) ASSERT_TRUE(family.Update({x}, {-1.0}).ok());
  for (const Eigen::VectorXd& theta : family.state().probabilities) {
    EXPECT_GE(theta.minCoeff(), kMargin - 1e-15);
    EXPECT_NEAR(theta.sum(), 1.0, 1e-12);
  }
}

// Chi-square of the option counts against θ. 10^5 draws, K = 4: 3 degrees of freedom, critical
// value 16.27 at the 0.1% level (standard chi-square table); K = 2: 1 degree of freedom, 10.83 at
// 0.1%.
TEST(CategoricalFamilyTest, SamplingFrequenciesMatchTheProbabilities) {
  const Eigen::Vector4d theta(0.1, 0.2, 0.3, 0.4);
  const Eigen::Vector2d theta2(0.95, 0.05);
  const CategoricalFamily family = Make({theta, theta2}, 0.1, 0.0);
  RandomStream random(606);
  constexpr int kDraws = 100000;
  std::vector<int> counts(4, 0), counts2(2, 0);
  for (int i = 0; i < kDraws; ++i) {
    const Eigen::VectorXd x = family.Sample(random);
    ASSERT_EQ(x.size(), 2);
    ASSERT_TRUE(x[0] == 0 || x[0] == 1 || x[0] == 2 || x[0] == 3) << x[0];
    ASSERT_TRUE(x[1] == 0 || x[1] == 1) << x[1];
    ++counts[static_cast<int>(x[0])];
    ++counts2[static_cast<int>(x[1])];
  }
  double chi2 = 0, chi2_b = 0;
  for (int k = 0; k < 4; ++k) {
    chi2 += std::pow(counts[k] - kDraws * theta[k], 2) / (kDraws * theta[k]);
  }
  for (int k = 0; k < 2; ++k) {
    chi2_b += std::pow(counts2[k] - kDraws * theta2[k], 2) / (kDraws * theta2[k]);
  }
  EXPECT_LT(chi2, 16.27);
  EXPECT_LT(chi2_b, 10.83);
}

TEST(CategoricalFamilyTest, UpdateRefusesBadIndicesAndLeavesTheStateUnchanged) {
  CategoricalFamily family =
      Make({Eigen::Vector3d(0.2, 0.3, 0.5), Eigen::Vector2d(0.5, 0.5)}, 0.1, 0.01);
  const std::vector<Eigen::VectorXd> before = family.state().probabilities;
  auto member = [](double a, double b) {
    Eigen::VectorXd x(2);
    x << a, b;
    return x;
  };
  auto expect_refused = [&](const std::vector<Eigen::VectorXd>& x, const std::vector<double>& w) {
    EXPECT_EQ(family.Update(x, w).code(), absl::StatusCode::kInvalidArgument);
    ASSERT_EQ(family.state().probabilities.size(), before.size());
    for (size_t j = 0; j < before.size(); ++j) {
      EXPECT_EQ(family.state().probabilities[j], before[j]);
    }
  };
  // The bad member comes last so the good ones before it were already looked at.
  for (double bad : {-1.0, 3.0, 0.5, 1e9, std::numeric_limits<double>::quiet_NaN(),
                     std::numeric_limits<double>::infinity()}) {
    expect_refused({member(0, 1), member(bad, 0)}, {0.5, 0.5});
  }
  expect_refused({member(0, 1), member(2, 2)}, {0.5, 0.5});  // option 2 of a 2-option parameter
  expect_refused({member(0, 1)}, {0.5, 0.5});                // one weight per member
  expect_refused({member(0, 1), Eigen::VectorXd::Zero(3)}, {0.5, 0.5});  // wrong size
  EXPECT_TRUE(family.Update({member(2, 1)}, {1.0}).ok());
}

TEST(CategoricalFamilyTest, CreateRefusesBadSettings) {
  const Eigen::Vector3d ok(0.2, 0.3, 0.5);
  auto code = [](std::vector<Eigen::VectorXd> start, double rate, double margin) {
    return CategoricalFamily::Create(std::move(start), rate, margin).status().code();
  };
  EXPECT_EQ(code({}, 0.1, 0.0), absl::StatusCode::kInvalidArgument);
  EXPECT_EQ(code({Eigen::VectorXd::Constant(1, 1.0)}, 0.1, 0.0),
            absl::StatusCode::kInvalidArgument);
  EXPECT_EQ(code({Eigen::Vector3d(0.2, 0.3, 0.6)}, 0.1, 0.0),
            absl::StatusCode::kInvalidArgument);  // sum 1.1
  EXPECT_EQ(code({ok}, 0.0, 0.0), absl::StatusCode::kInvalidArgument);
  EXPECT_EQ(code({ok}, 1.5, 0.0), absl::StatusCode::kInvalidArgument);
  EXPECT_EQ(code({ok}, 0.1, 1.0 / 3), absl::StatusCode::kInvalidArgument);  // margin must be < 1/K
  EXPECT_EQ(code({ok}, 0.1, 0.25), absl::StatusCode::kInvalidArgument);     // θ_0 = 0.2 < margin
  EXPECT_EQ(code({ok}, 0.1, -0.1), absl::StatusCode::kInvalidArgument);
  EXPECT_EQ(code({Eigen::Vector3d(-0.1, 0.6, 0.5)}, 0.1, 0.0), absl::StatusCode::kInvalidArgument);
  EXPECT_EQ(code({ok}, 0.1, 0.2), absl::StatusCode::kOk);
}

}  // namespace
}  // namespace ogive::search
