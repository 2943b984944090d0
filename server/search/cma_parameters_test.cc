// Tests of the CMA-ES default strategy parameters against published and computed values.
#include "server/search/cma_parameters.h"

#include <algorithm>
#include <cmath>
#include <string>
#include <vector>

#include "gtest/gtest.h"

namespace ogive::search {
namespace {

// The reference table has six decimals, so a correct value is within half a unit of the last place.
constexpr double kTableTolerance = 5e-6;

// One column of the table "CMA-ES default parameters" in docs/references.md (the project's list
// of published check values): computed in double precision from N. Hansen, "The CMA Evolution Strategy: A Tutorial", arXiv:1604.00772
// (2016), Table 1 (the form of the formulas from memory), with the 1/4 term in c_μ.
struct TableColumn {
  int n;
  int lambda;
  int mu;
  double mu_eff;
  double c_sigma;
  double d_sigma;
  double c_c;
  double c_1;
  double c_mu;
  double expected_norm_exact;
  double expected_norm_approx;
};

constexpr TableColumn kTable[] = {
    {2, 6, 3, 2.028611, 0.446205, 1.446205, 0.624555, 0.154815, 0.085593, 1.253314, 1.254273},
    {10, 10, 5, 3.167299, 0.284429, 1.284429, 0.294990, 0.015284, 0.023552, 3.084328, 3.084727},
    {40, 15, 7, 4.540915, 0.132031, 1.132031, 0.093009, 0.001169, 0.003405, 6.285154, 6.285215},
};

class CmaParametersTableTest : public testing::TestWithParam<TableColumn> {};

TEST_P(CmaParametersTableTest, DefaultsMatchTheTutorialTable) {
  const TableColumn& t = GetParam();
  // λ = 4 + ⌊3 ln n⌋ (tutorial, Table 1).
  EXPECT_EQ(DefaultPopulationSize(t.n), t.lambda);
  const CmaParameters p =
      CmaParameters::Default(t.n, DefaultPopulationSize(t.n), /*diagonal=*/false);
  EXPECT_EQ(p.n, t.n);
  EXPECT_EQ(p.lambda, t.lambda);
  EXPECT_EQ(p.mu, t.mu);
  EXPECT_EQ(static_cast<int>(p.weights.size()), t.lambda);
  EXPECT_NEAR(p.mu_eff, t.mu_eff, kTableTolerance);
  EXPECT_NEAR(p.c_sigma, t.c_sigma, kTableTolerance);
  EXPECT_NEAR(p.d_sigma, t.d_sigma, kTableTolerance);
  EXPECT_NEAR(p.c_c, t.c_c, kTableTolerance);
  EXPECT_NEAR(p.c_1, t.c_1, kTableTolerance);
  EXPECT_NEAR(p.c_mu, t.c_mu, kTableTolerance);
  EXPECT_DOUBLE_EQ(p.c_m, 1.0);  // tutorial, Table 1: c_m = 1
  // E‖N(0,I)‖: exact √2 Γ((n+1)/2)/Γ(n/2) and the tutorial's approximation √n (1 − 1/(4n) +
  // 1/(21n²)).
  EXPECT_NEAR(ExpectedNormOfStandardNormal(t.n), t.expected_norm_exact, kTableTolerance);
  EXPECT_NEAR(p.chi_n, t.expected_norm_approx, kTableTolerance);
}

TEST_P(CmaParametersTableTest, PositiveWeightsSumToOneAndWeightsDecrease) {
  const TableColumn& t = GetParam();
  const CmaParameters p = CmaParameters::Default(t.n, t.lambda, /*diagonal=*/false);
  double positive_sum = 0.0;
  for (double w : p.weights) {
    if (w > 0) positive_sum += w;
  }
  // Tutorial, Table 1: the positive weights are normalized to sum to 1.
  EXPECT_NEAR(positive_sum, 1.0, 1e-12);
  // The first μ weights are positive, the rest are not (w'_i = ln((λ+1)/2) − ln i changes sign
  // after μ).
  for (int i = 0; i < t.lambda; ++i) {
    if (i < t.mu) {
      EXPECT_GT(p.weights[i], 0.0) << "i=" << i;
    } else {
      EXPECT_LE(p.weights[i], 0.0) << "i=" << i;
    }
  }
  // w'_i decreases strictly in i, and the positive and negative parts are scaled by positive
  // factors, so the weights decrease strictly within each part and across the border.
  for (int i = 1; i < t.lambda; ++i) EXPECT_LT(p.weights[i], p.weights[i - 1]) << "i=" << i;
}

TEST_P(CmaParametersTableTest, WeightsFollowTheTutorialFormula) {
  const TableColumn& t = GetParam();
  const CmaParameters p = CmaParameters::Default(t.n, t.lambda, /*diagonal=*/false);
  // Recompute the weights from the published formulas (tutorial, Table 1). α⁻ takes c_1, c_μ and
  // μ_eff from the parameters themselves; those are checked against the table in the test above.
  std::vector<double> w_prime(t.lambda);
  double sum_pos = 0, sum_neg_abs = 0, neg = 0, neg_sq = 0;
  for (int i = 1; i <= t.lambda; ++i) {
    w_prime[i - 1] = std::log((t.lambda + 1) / 2.0) - std::log(static_cast<double>(i));
    if (w_prime[i - 1] > 0) sum_pos += w_prime[i - 1];
    if (w_prime[i - 1] < 0) sum_neg_abs -= w_prime[i - 1];
    if (i > t.mu) {
      neg += w_prime[i - 1];
      neg_sq += w_prime[i - 1] * w_prime[i - 1];
    }
  }
  const double mu_eff_minus = neg * neg / neg_sq;
  EXPECT_NEAR(p.mu_eff_minus, mu_eff_minus, 1e-12);
  const double alpha_minus =
      std::min({1.0 + p.c_1 / p.c_mu, 1.0 + 2.0 * mu_eff_minus / (p.mu_eff + 2.0),
                (1.0 - p.c_1 - p.c_mu) / (t.n * p.c_mu)});
  EXPECT_NEAR(p.alpha_minus, alpha_minus, 1e-12);
  for (int i = 0; i < t.lambda; ++i) {
    const double expected =
        w_prime[i] >= 0 ? w_prime[i] / sum_pos : alpha_minus * w_prime[i] / sum_neg_abs;
    EXPECT_NEAR(p.weights[i], expected, 1e-12) << "i=" << i;
  }
}

INSTANTIATE_TEST_SUITE_P(Table, CmaParametersTableTest, testing::ValuesIn(kTable),
                         [](const testing::TestParamInfo<TableColumn>& param_info) {
                           return "n" + std::to_string(param_info.param.n);
                         });

// docs/references.md, "Invariants": where 1 + c_1/c_μ is the smallest candidate for α⁻ (n = 10 and 40),
// the negative weights sum to −α⁻ = −(1 + c_1/c_μ), so Σ w = 1 − (1 + c_1/c_μ) = −c_1/c_μ, which
// makes the covariance decay 1 − c_1 − c_μ Σ w equal to 1 (tutorial, the remark beside the α⁻
// choices).
TEST(CmaParametersTest, SumOfAllWeightsIsMinusC1OverCmuForN10AndN40) {
  for (int n : {10, 40}) {
    const CmaParameters p = CmaParameters::Default(n, DefaultPopulationSize(n), /*diagonal=*/false);
    EXPECT_NEAR(p.SumOfWeights(), -p.c_1 / p.c_mu, 1e-12) << "n=" << n;
  }
}

// n = 2: the smallest α⁻ is 1 + 2 μ_eff⁻/(μ_eff + 2) (computed from the tutorial's formulas: 2.2073
// against 2.8087 and 4.4372), so Σ w = 1 − 2.2073.
TEST(CmaParametersTest, SumOfAllWeightsForN2UsesTheMuEffMinusBound) {
  const CmaParameters p = CmaParameters::Default(2, 6, /*diagonal=*/false);
  EXPECT_NEAR(p.alpha_minus, 2.207324, 1e-5);
  EXPECT_NEAR(p.SumOfWeights(), 1.0 - 2.207324, 1e-5);
}

// sep-CMA-ES (Ros and Hansen, PPSN 2008; factor from memory): c_1 and c_μ multiplied by (n + 2)/3,
// and no negative weights in the diagonal model (the header's choice).
TEST(CmaParametersTest, DiagonalModelScalesLearningRatesAndDropsNegativeWeights) {
  for (int n : {2, 10, 40}) {
    const int lambda = DefaultPopulationSize(n);
    const CmaParameters full = CmaParameters::Default(n, lambda, /*diagonal=*/false);
    const CmaParameters diag = CmaParameters::Default(n, lambda, /*diagonal=*/true);
    const double factor = (n + 2) / 3.0;
    EXPECT_NEAR(diag.c_1, full.c_1 * factor, 1e-15) << "n=" << n;
    EXPECT_NEAR(diag.c_mu, full.c_mu * factor, 1e-15) << "n=" << n;
    // Everything else is the same as in the full model.
    EXPECT_DOUBLE_EQ(diag.mu_eff, full.mu_eff);
    EXPECT_DOUBLE_EQ(diag.c_sigma, full.c_sigma);
    EXPECT_DOUBLE_EQ(diag.d_sigma, full.d_sigma);
    EXPECT_DOUBLE_EQ(diag.c_c, full.c_c);
    double positive_sum = 0.0;
    for (double w : diag.weights) {
      EXPECT_GE(w, 0.0) << "n=" << n;
      positive_sum += w;
    }
    EXPECT_NEAR(positive_sum, 1.0, 1e-12) << "n=" << n;
    EXPECT_NEAR(diag.SumOfWeights(), 1.0, 1e-12) << "n=" << n;
  }
}

// The learning rates must leave room for the old covariance: c_1 + c_μ ≤ 1 (tutorial, Table 1: c_μ
// is capped at 1 − c_1) for any population size, and the larger the population, the larger μ_eff.
TEST(CmaParametersTest, LearningRatesStayBelowOneForLargePopulations) {
  for (int n : {1, 2, 5}) {
    for (int lambda : {2, 3, 50, 1000}) {
      for (bool diagonal : {false, true}) {
        const CmaParameters p = CmaParameters::Default(n, lambda, diagonal);
        EXPECT_LE(p.c_1 + p.c_mu, 1.0 + 1e-15) << "n=" << n << " lambda=" << lambda;
        EXPECT_GT(p.c_1, 0.0);
        EXPECT_GT(p.c_mu, 0.0);
        EXPECT_EQ(p.mu, lambda / 2);
      }
    }
  }
  EXPECT_LT(CmaParameters::Default(10, 10, false).mu_eff,
            CmaParameters::Default(10, 100, false).mu_eff);
}

// μ_eff lies in [1, μ]: Cauchy–Schwarz on its definition (Σ w)²/Σ w² over μ positive weights
// (tutorial, Table 1).
TEST(CmaParametersTest, MuEffLiesBetweenOneAndMu) {
  for (int lambda : {2, 3, 4, 7, 10, 15, 100}) {
    const CmaParameters p = CmaParameters::Default(10, lambda, false);
    EXPECT_GE(p.mu_eff, 1.0 - 1e-12) << "lambda=" << lambda;
    EXPECT_LE(p.mu_eff, p.mu + 1e-12) << "lambda=" << lambda;
  }
}

}  // namespace
}  // namespace ogive::search
