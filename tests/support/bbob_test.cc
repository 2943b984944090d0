// Checks of the BBOB benchmark functions in tests/support/bbob.h against the formulas of Hansen,
// Finck, Ros, Auger, "Real-Parameter Black-Box Optimization Benchmarking 2009: Noiseless Functions
// Definitions", INRIA RR-6829 (formulas from memory). Every expected value below is worked out by
// hand (or with bc(1), as noted) from those formulas, not taken from the code's output.
#include "tests/support/bbob.h"

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <numbers>
#include <random>
#include <string>
#include <tuple>
#include <vector>

#include <Eigen/Core>
#include <gtest/gtest.h>

namespace {

using ::ogive::testing::BbobFunction;
using ::ogive::testing::LambdaDiagonal;
using ::ogive::testing::RandomRotation;
using ::ogive::testing::Tasy;
using ::ogive::testing::Tosz;

constexpr int kIds[] = {1, 2, 8, 10, 15};
constexpr int kDims[] = {2, 10, 20};
constexpr uint64_t kSeeds[] = {1, 2, 17, 12345, 0xdeadbeefcafef00dULL};

Eigen::VectorXd Unit(int n, int i) { return Eigen::VectorXd::Unit(n, i); }

// Largest |A^T A - I| entry.
double OrthogonalityError(const Eigen::MatrixXd& a) {
  const Eigen::MatrixXd identity = Eigen::MatrixXd::Identity(a.cols(), a.cols());
  return (a.transpose() * a - identity).cwiseAbs().maxCoeff();
}

// Uniform in [lo, hi]^n, from a test-local engine (independent of the code under test).
Eigen::VectorXd RandomPoint(std::mt19937_64& rng, int n, double lo, double hi) {
  std::uniform_real_distribution<double> u(lo, hi);
  Eigen::VectorXd x(n);
  for (int i = 0; i < n; ++i) x(i) = u(rng);
  return x;
}

// ---------------------------------------------------------------------------------------------
// T_osz, T_asy, Lambda, rotations.

TEST(ToszTest, FixedPoints) {
  // T_osz(0) = 0 by definition; at x = +-1, x_hat = ln 1 = 0 so both sines vanish and
  // T_osz(+-1) = +-exp(0) = +-1 exactly.
  EXPECT_EQ(Tosz(0.0), 0.0);
  EXPECT_EQ(Tosz(1.0), 1.0);
  EXPECT_EQ(Tosz(-1.0), -1.0);
}

TEST(ToszTest, HandValues) {
  const double e = std::numbers::e;
  // x = e: x_hat = 1, c1 = 10, c2 = 7.9.
  //   sin 10 = -0.5440211108893698, sin 7.9 = 0.9989413418397720, sum = 0.4549202309504022,
  //   0.049 * sum = 0.0222910913165697, T = exp(1.0222910913165697) = 2.7795556903563565 (bc -l).
  EXPECT_NEAR(Tosz(e), 2.7795556903563565, 1e-12);
  // x = -e: x_hat = 1, c1 = 5.5, c2 = 3.1.
  //   sin 5.5 = -0.7055403255703919, sin 3.1 = 0.0415806624332906, sum = -0.6639596631371013,
  //   0.049 * sum = -0.0325340234937180, T = -exp(0.9674659765062820) = -2.6312683084530912.
  EXPECT_NEAR(Tosz(-e), -2.6312683084530912, 1e-12);
  // The constants differ by sign, so T_osz is not odd: |T(-e)| < e < T(e).
  EXPECT_LT(std::abs(Tosz(-e)), e);
  EXPECT_GT(Tosz(e), e);
  // x = 1/e: x_hat = -1, x > 0 so c1 = 10, c2 = 7.9; sin is odd, so
  //   T = exp(-1 - 0.0222910913165697) = 0.3597697299138459 (bc -l).
  EXPECT_NEAR(Tosz(1.0 / e), 0.3597697299138459, 1e-12);
  // x = 2: x_hat = ln 2 = 0.6931471805599453; sin(6.931471805599453) = 0.6038214271168690,
  //   sin(5.475862726423568) = -0.7224385041512011; T = 2 exp(0.049 * (-0.1186170770343321))
  //   = 1.9884092431921050 (bc -l).
  EXPECT_NEAR(Tosz(2.0), 1.9884092431921050, 1e-12);
}

TEST(ToszTest, VectorIsPerCoordinate) {
  const double e = std::numbers::e;
  Eigen::VectorXd x(4);
  x << 0.0, 1.0, -e, e;
  const Eigen::VectorXd t = Tosz(x);
  ASSERT_EQ(t.size(), 4);
  EXPECT_EQ(t(0), 0.0);
  EXPECT_EQ(t(1), 1.0);
  EXPECT_NEAR(t(2), -2.6312683084530912, 1e-12);
  EXPECT_NEAR(t(3), 2.7795556903563565, 1e-12);
}

TEST(TasyTest, HandValues) {
  // n = 3, beta = 0.5, x_i = 4 (so sqrt(x_i) = 2); exponents 1 + 0.5 * (i-1)/2 * 2:
  //   i = 1: 4^1 = 4; i = 2: 4^1.5 = 8; i = 3: 4^2 = 16.
  const Eigen::VectorXd t = Tasy(Eigen::VectorXd::Constant(3, 4.0), 0.5);
  ASSERT_EQ(t.size(), 3);
  EXPECT_NEAR(t(0), 4.0, 1e-12);
  EXPECT_NEAR(t(1), 8.0, 1e-12);
  EXPECT_NEAR(t(2), 16.0, 1e-12);
  // Non-positive coordinates pass through unchanged.
  Eigen::VectorXd x(3);
  x << -4.0, 0.0, -0.25;
  const Eigen::VectorXd u = Tasy(x, 0.5);
  EXPECT_EQ(u(0), -4.0);
  EXPECT_EQ(u(1), 0.0);
  EXPECT_EQ(u(2), -0.25);
  // n = 1: the ratio (i-1)/(n-1) is taken as 0, so the exponent is 1.
  EXPECT_EQ(Tasy(Eigen::VectorXd::Constant(1, 4.0), 0.5)(0), 4.0);
}

TEST(LambdaTest, HandValues) {
  // alpha^((i-1)/(2(n-1))), n = 3, alpha = 100: 100^0 = 1, 100^(1/4) = sqrt(10), 100^(1/2) = 10.
  const Eigen::VectorXd l = LambdaDiagonal(3, 100.0);
  ASSERT_EQ(l.size(), 3);
  EXPECT_NEAR(l(0), 1.0, 1e-12);
  EXPECT_NEAR(l(1), std::sqrt(10.0), 1e-12);
  EXPECT_NEAR(l(2), 10.0, 1e-12);
  // n = 2, alpha = 10: 1 and 10^(1/2).
  const Eigen::VectorXd m = LambdaDiagonal(2, 10.0);
  EXPECT_NEAR(m(0), 1.0, 1e-12);
  EXPECT_NEAR(m(1), std::sqrt(10.0), 1e-12);
  EXPECT_EQ(LambdaDiagonal(1, 10.0)(0), 1.0);
}

TEST(RandomRotationTest, OrthogonalDeterministicAndNotTrivial) {
  for (int n : {1, 2, 3, 10, 20, 50}) {
    for (uint64_t seed : kSeeds) {
      std::mt19937_64 rng(seed);
      const Eigen::MatrixXd q = RandomRotation(n, rng);
      ASSERT_EQ(q.rows(), n);
      ASSERT_EQ(q.cols(), n);
      EXPECT_LT(OrthogonalityError(q), 1e-12) << "n=" << n << " seed=" << seed;
      EXPECT_LT(OrthogonalityError(q.transpose()), 1e-12) << "n=" << n << " seed=" << seed;
      std::mt19937_64 again(seed);
      EXPECT_EQ(RandomRotation(n, again), q) << "n=" << n << " seed=" << seed;
      if (n >= 2) {
        // Not a signed permutation: a random rotation mixes the axes.
        const Eigen::MatrixXd abs = q.cwiseAbs();
        EXPECT_LT(abs.maxCoeff(), 1.0 - 1e-6) << "n=" << n << " seed=" << seed;
      }
    }
  }
}

// ---------------------------------------------------------------------------------------------
// Properties every instance must have.

class BbobInstanceTest : public ::testing::TestWithParam<std::tuple<int, int, uint64_t>> {};

TEST_P(BbobInstanceTest, InstanceIsWellFormed) {
  const auto [id, n, seed] = GetParam();
  const BbobFunction f = BbobFunction::Create(id, n, seed);
  EXPECT_EQ(f.id(), id);
  EXPECT_EQ(f.n(), n);
  ASSERT_EQ(f.x_opt().size(), n);
  EXPECT_LE(f.x_opt().cwiseAbs().maxCoeff(), 4.0);
  EXPECT_GE(f.f_opt(), -100.0);
  EXPECT_LE(f.f_opt(), 100.0);
  // Two decimals: 100 f_opt is an integer up to rounding of the division.
  EXPECT_NEAR(f.f_opt() * 100.0, std::round(f.f_opt() * 100.0), 1e-9);
  if (id == 10 || id == 15) {
    ASSERT_EQ(f.r().rows(), n);
    EXPECT_LT(OrthogonalityError(f.r()), 1e-12);
  } else {
    EXPECT_EQ(f.r().size(), 0);
  }
  if (id == 15) {
    ASSERT_EQ(f.q().rows(), n);
    EXPECT_LT(OrthogonalityError(f.q()), 1e-12);
    EXPECT_NE(f.q(), f.r());
  } else {
    EXPECT_EQ(f.q().size(), 0);
  }
}

TEST_P(BbobInstanceTest, OptimumValueIsFOpt) {
  const auto [id, n, seed] = GetParam();
  const BbobFunction f = BbobFunction::Create(id, n, seed);
  EXPECT_NEAR(f(f.x_opt()), f.f_opt(), 1e-12 * std::max(1.0, std::abs(f.f_opt())));
}

TEST_P(BbobInstanceTest, OtherPointsAreWorse) {
  const auto [id, n, seed] = GetParam();
  const BbobFunction f = BbobFunction::Create(id, n, seed);
  std::mt19937_64 rng(seed ^ 0x5eed5eed5eed5eedULL);
  // Far points across the usual [-5, 5]^n domain.
  for (int k = 0; k < 200; ++k) {
    const Eigen::VectorXd x = RandomPoint(rng, n, -5.0, 5.0);
    EXPECT_GT(f(x), f.f_opt()) << "id=" << id << " n=" << n << " seed=" << seed;
  }
  // Near points, at distances from about 1e-3 up to 1 from x_opt.
  for (int k = 0; k < 200; ++k) {
    const double radius = std::pow(10.0, -3.0 + 3.0 * k / 199.0);
    const Eigen::VectorXd x = f.x_opt() + RandomPoint(rng, n, -radius, radius);
    EXPECT_GT(f(x), f.f_opt()) << "id=" << id << " n=" << n << " seed=" << seed << " k=" << k;
  }
}

TEST_P(BbobInstanceTest, SameSeedSameInstance) {
  const auto [id, n, seed] = GetParam();
  const BbobFunction a = BbobFunction::Create(id, n, seed);
  const BbobFunction b = BbobFunction::Create(id, n, seed);
  EXPECT_EQ(a.x_opt(), b.x_opt());
  EXPECT_EQ(a.f_opt(), b.f_opt());
  EXPECT_EQ(a.r(), b.r());
  EXPECT_EQ(a.q(), b.q());
  std::mt19937_64 rng(seed);
  const Eigen::VectorXd x = RandomPoint(rng, n, -5.0, 5.0);
  EXPECT_EQ(a(x), b(x));
  // A different seed gives a different instance.
  const BbobFunction c = BbobFunction::Create(id, n, seed + 1);
  EXPECT_NE(a.x_opt(), c.x_opt());
}

std::vector<std::tuple<int, int, uint64_t>> AllInstances() {
  std::vector<std::tuple<int, int, uint64_t>> out;
  for (int id : kIds) {
    for (int n : kDims) {
      for (uint64_t seed : kSeeds) out.emplace_back(id, n, seed);
    }
  }
  return out;
}

INSTANTIATE_TEST_SUITE_P(
    AllFunctions, BbobInstanceTest, ::testing::ValuesIn(AllInstances()),
    // (The parameter is not called `info`: the macro already declares one, and -Wshadow objects.)
    [](const ::testing::TestParamInfo<BbobInstanceTest::ParamType>& param_info) {
      return "f" + std::to_string(std::get<0>(param_info.param)) + "_n" +
             std::to_string(std::get<1>(param_info.param)) + "_s" +
             std::to_string(param_info.index);
    });

// ---------------------------------------------------------------------------------------------
// Hand-computed values of each function.

TEST(SphereTest, HandValues) {
  // f1 = ||x - x_opt||^2 + f_opt. Offset (3, -4): 9 + 16 = 25. Offset (1, 2, 2): 1 + 4 + 4 = 9.
  const BbobFunction f2d = BbobFunction::Create(1, 2, 7);
  Eigen::VectorXd d2(2);
  d2 << 3.0, -4.0;
  EXPECT_NEAR(f2d(f2d.x_opt() + d2) - f2d.f_opt(), 25.0, 1e-12);
  const BbobFunction f3d = BbobFunction::Create(1, 3, 8);
  Eigen::VectorXd d3(3);
  d3 << 1.0, 2.0, 2.0;
  EXPECT_NEAR(f3d(f3d.x_opt() + d3) - f3d.f_opt(), 9.0, 1e-12);
}

TEST(EllipsoidTest, ConditioningAlongAxes) {
  // f2 = sum_i 10^(6 (i-1)/(n-1)) T_osz(x - x_opt)_i^2 + f_opt, and T_osz(+-1) = +-1, so along e_1
  // the increase is 10^0 = 1 and along e_n it is 10^6.
  for (int n : kDims) {
    for (uint64_t seed : kSeeds) {
      const BbobFunction f = BbobFunction::Create(2, n, seed);
      const Eigen::VectorXd& xo = f.x_opt();
      EXPECT_NEAR(f(xo + Unit(n, 0)) - f.f_opt(), 1.0, 1e-12) << "n=" << n;
      EXPECT_NEAR(f(xo - Unit(n, 0)) - f.f_opt(), 1.0, 1e-12) << "n=" << n;
      EXPECT_NEAR(f(xo + Unit(n, n - 1)) - f.f_opt(), 1e6, 1e-12 * 1e6) << "n=" << n;
      EXPECT_NEAR(f(xo - Unit(n, n - 1)) - f.f_opt(), 1e6, 1e-12 * 1e6) << "n=" << n;
      // Offset 2 along e_1: T_osz(2)^2 = 1.9884092431921050^2 = 3.9537713184117996 (bc -l).
      EXPECT_NEAR(f(xo + 2.0 * Unit(n, 0)) - f.f_opt(), 3.9537713184117996, 1e-12) << "n=" << n;
    }
  }
  // n = 10, the 4th axis (i = 4): weight 10^(6 * 3 / 9) = 10^2 = 100.
  const BbobFunction f = BbobFunction::Create(2, 10, 3);
  EXPECT_NEAR(f(f.x_opt() + Unit(10, 3)) - f.f_opt(), 100.0, 1e-10);
}

TEST(RotatedEllipsoidTest, ConditioningAlongRotatedAxes) {
  // f10 = f2's sum at z = T_osz(R (x - x_opt)). At x = x_opt + R^T e_i, R (x - x_opt) = e_i, so the
  // increase is the axis weight: 1 for e_1, 10^6 for e_n (up to the rounding of R R^T).
  for (int n : kDims) {
    for (uint64_t seed : kSeeds) {
      const BbobFunction f = BbobFunction::Create(10, n, seed);
      const Eigen::VectorXd& xo = f.x_opt();
      const Eigen::MatrixXd rt = f.r().transpose();
      EXPECT_NEAR(f(xo + rt * Unit(n, 0)) - f.f_opt(), 1.0, 1e-9) << "n=" << n;
      EXPECT_NEAR(f(xo + rt * Unit(n, n - 1)) - f.f_opt(), 1e6, 1e-6) << "n=" << n;
      // The coordinate axes are not the principal axes: a unit step along e_1 picks up the large
      // weights through R's mixing (the n-th weight alone is 10^6 T_osz(R_n1)^2).
      EXPECT_GT(f(xo + Unit(n, 0)) - f.f_opt(), 10.0) << "n=" << n;
    }
  }
}

TEST(NoisySuiteTest, NoiseFreePartsAndTheGaussianNoiseModel) {
  // f116's noise-free part: f10's form with condition 10^4 (RR-6869, from memory); f101 and f104 are
  // f1 and f8 before the noise.
  for (int n : kDims) {
    if (n < 2) continue;
    const BbobFunction f = BbobFunction::Create(116, n, 5);
    const Eigen::MatrixXd rt = f.r().transpose();
    EXPECT_NEAR(f(f.x_opt() + rt * Unit(n, 0)) - f.f_opt(), 1.0, 1e-9) << "n=" << n;
    EXPECT_NEAR(f(f.x_opt() + rt * Unit(n, n - 1)) - f.f_opt(), 1e4, 1e-8) << "n=" << n;
    const BbobFunction sphere = BbobFunction::Create(101, n, 5), plain = BbobFunction::Create(1, n, 5);
    const Eigen::VectorXd x = Eigen::VectorXd::Constant(n, 0.5);
    EXPECT_EQ(sphere(x), plain(x));
    const BbobFunction rosenbrock = BbobFunction::Create(104, n, 5), plain8 = BbobFunction::Create(8, n, 5);
    EXPECT_EQ(rosenbrock(x), plain8(x));
  }
  // f_GN(f, β) = f exp(β N) + 1.01e-8 above 1e-8, exact below (RR-6869, from memory).
  EXPECT_DOUBLE_EQ(ogive::testing::NoisyGap(2.0, 1.0, 0.5), 2.0 * std::exp(0.5) + 1.01e-8);
  EXPECT_DOUBLE_EQ(ogive::testing::NoisyGap(2.0, 0.01, -1.0), 2.0 * std::exp(-0.01) + 1.01e-8);
  EXPECT_EQ(ogive::testing::NoisyGap(5e-9, 1.0, 3.0), 5e-9);
}

TEST(RotatedDiscusTest, OneSensitiveRotatedAxis) {
  // f11 = 10^6 z_1^2 + sum_{i>=2} z_i^2 + f_opt, z = T_osz(R (x - x_opt)) (RR-6829, from memory).
  // At x = x_opt + t R^T e_i, z = T_osz(t e_i): 10^6 T_osz(t)^2 for i = 1, T_osz(t)^2 otherwise;
  // T_osz(1) = 1 and T_osz(2)^2 = 3.9537713184117996 (bc -l, as above).
  for (int n : kDims) {
    if (n < 2) continue;
    for (uint64_t seed : kSeeds) {
      const BbobFunction f = BbobFunction::Create(11, n, seed);
      const Eigen::VectorXd& xo = f.x_opt();
      const Eigen::MatrixXd rt = f.r().transpose();
      EXPECT_NEAR(f(xo) - f.f_opt(), 0.0, 1e-12) << "n=" << n;
      EXPECT_NEAR(f(xo + rt * Unit(n, 0)) - f.f_opt(), 1e6, 1e-6) << "n=" << n;
      EXPECT_NEAR(f(xo + rt * Unit(n, n - 1)) - f.f_opt(), 1.0, 1e-9) << "n=" << n;
      EXPECT_NEAR(f(xo + 2.0 * rt * Unit(n, 1)) - f.f_opt(), 3.9537713184117996, 1e-9) << "n=" << n;
    }
  }
}

TEST(RosenbrockTest, HandValues) {
  // f8 = sum_{i<n} 100 (z_i^2 - z_{i+1})^2 + (z_i - 1)^2 + f_opt, z = s (x - x_opt) + 1,
  // s = max(1, sqrt(n)/8): s = 1 for n <= 64, s = 2 for n = 256.
  {
    // n = 2, offset (0.1, -0.2): z = (1.1, 0.8); 100 (1.21 - 0.8)^2 + 0.1^2 = 16.81 + 0.01 = 16.82.
    const BbobFunction f = BbobFunction::Create(8, 2, 11);
    Eigen::VectorXd d(2);
    d << 0.1, -0.2;
    EXPECT_NEAR(f(f.x_opt() + d) - f.f_opt(), 16.82, 1e-10);
    // Offset (-2, 0): z = (-1, 1); 100 (1 - 1)^2 + (-2)^2 = 4.
    d << -2.0, 0.0;
    EXPECT_NEAR(f(f.x_opt() + d) - f.f_opt(), 4.0, 1e-10);
  }
  {
    // n = 10, offset 0.1 on axis k = 5 (1-based), z_5 = 1.1, others 1. Term i = 4:
    // 100 (1 - 1.1)^2 = 1; term i = 5: 100 (1.21 - 1)^2 + 0.1^2 = 4.41 + 0.01 = 4.42. Total 5.42.
    const BbobFunction f = BbobFunction::Create(8, 10, 12);
    EXPECT_NEAR(f(f.x_opt() + 0.1 * Unit(10, 4)) - f.f_opt(), 5.42, 1e-10);
  }
  {
    // n = 256, s = sqrt(256)/8 = 2. Offset 0.1 on axis 1: z_1 = 1.2; term i = 1 only:
    // 100 (1.44 - 1)^2 + 0.2^2 = 19.36 + 0.04 = 19.40.
    const BbobFunction f = BbobFunction::Create(8, 256, 13);
    EXPECT_NEAR(f(f.x_opt() + 0.1 * Unit(256, 0)) - f.f_opt(), 19.40, 1e-10);
    // Offset 0.1 on axis n: z_n = 1.2 appears only in term i = n - 1: 100 (1 - 1.2)^2 = 4.
    EXPECT_NEAR(f(f.x_opt() + 0.1 * Unit(256, 255)) - f.f_opt(), 4.0, 1e-10);
    EXPECT_NEAR(f(f.x_opt()), f.f_opt(), 1e-12 * std::max(1.0, std::abs(f.f_opt())));
  }
}

TEST(RotatedRastriginTest, NeverBelowOptimumOnRandomSample) {
  // f15 >= f_opt everywhere: 10 (n - sum cos 2 pi z_i) >= 0 and ||z||^2 >= 0.
  for (int n : kDims) {
    for (uint64_t seed : kSeeds) {
      const BbobFunction f = BbobFunction::Create(15, n, seed);
      EXPECT_EQ(f(f.x_opt()), f.f_opt());
      std::mt19937_64 rng(seed + 1000);
      for (int k = 0; k < 1000; ++k) {
        const Eigen::VectorXd x = RandomPoint(rng, n, -5.0, 5.0);
        ASSERT_GE(f(x), f.f_opt()) << "n=" << n << " seed=" << seed << " k=" << k;
      }
    }
  }
}

// f15 - f_opt when z = R Lambda^10 Q (t e_k), straight from the formula:
//   10 sum_i (1 - cos 2 pi z_i) + t^2 ||Lambda^10 Q e_k||^2  (R is orthogonal, so ||z|| is that).
double RastriginIncrease(const BbobFunction& f, int k, double t) {
  const int n = f.n();
  const Eigen::VectorXd lambda_q = t * LambdaDiagonal(n, 10.0).cwiseProduct(f.q().col(k));
  const Eigen::VectorXd z = f.r() * lambda_q;
  double sum = lambda_q.squaredNorm();
  for (int i = 0; i < n; ++i) sum += 10.0 * (1.0 - std::cos(2.0 * std::numbers::pi * z(i)));
  return sum;
}

TEST(RotatedRastriginTest, MatchesFormulaAlongRotatedAxes) {
  // f15 uses z = R Lambda^10 Q T_asy^0.2(T_osz(R (x - x_opt))).
  const double e = std::numbers::e;
  for (int n : kDims) {
    const BbobFunction f = BbobFunction::Create(15, n, 21);
    const Eigen::MatrixXd rt = f.r().transpose();
    // x = x_opt + R^T e_1: R (x - x_opt) = e_1; T_osz(e_1) = e_1 (T_osz(1) = 1, T_osz(0) = 0);
    // T_asy(e_1) = e_1 (first exponent 1 + 0 = 1). So t = 1 along Q e_1.
    EXPECT_NEAR(f(f.x_opt() + rt * Unit(n, 0)) - f.f_opt(), RastriginIncrease(f, 0, 1.0), 1e-9)
        << "n=" << n;
    // x = x_opt + e R^T e_n: R (x - x_opt) = e e_n; T_osz(e) = 2.7795556903563565 (ToszTest);
    // T_asy^0.2 on the last axis ((i-1)/(n-1) = 1): u^(1 + 0.2 sqrt(u)) with u = T_osz(e).
    const double u = 2.7795556903563565;
    const double t = std::pow(u, 1.0 + 0.2 * std::sqrt(u));
    EXPECT_NEAR(f(f.x_opt() + e * (rt * Unit(n, n - 1))) - f.f_opt(),
                RastriginIncrease(f, n - 1, t), 1e-8)
        << "n=" << n;
  }
}

TEST(RotatedRastriginTest, IsMultimodalAlongALine) {
  // Rastrigin's cosine term makes many local minima. Along x_opt + t R^T e_1, t in [0, 3], count
  // strict interior local minima of a fine sampling; a unimodal function would have none.
  const BbobFunction f = BbobFunction::Create(15, 10, 5);
  const Eigen::VectorXd dir = f.r().transpose() * Unit(10, 0);
  std::vector<double> values;
  for (int k = 0; k <= 3000; ++k) values.push_back(f(f.x_opt() + (3.0 * k / 3000.0) * dir));
  int local_minima = 0;
  for (size_t k = 1; k + 1 < values.size(); ++k) {
    if (values[k] < values[k - 1] && values[k] < values[k + 1]) ++local_minima;
  }
  EXPECT_GE(local_minima, 2);
}

// ---------------------------------------------------------------------------------------------
// Misuse is a programming error and aborts.

TEST(BbobDeathTest, RejectsUnknownIdAndWrongDimension) {
  EXPECT_DEATH(BbobFunction::Create(3, 2, 1), "check failed");
  EXPECT_DEATH(BbobFunction::Create(1, 0, 1), "check failed");
  const BbobFunction f = BbobFunction::Create(1, 3, 1);
  EXPECT_DEATH(f(Eigen::VectorXd::Zero(2)), "check failed");
}

}  // namespace
