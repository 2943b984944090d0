// Tests of the Gaussian block (CMA-ES): convergence on standard functions, the learned covariance,
// rotation invariance, clipping of external steps, the integer margin, state round trips and
// refusals.
#include "server/search/gaussian_family.h"

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <functional>
#include <limits>
#include <string>
#include <utility>
#include <vector>

#include "Eigen/Core"
#include "Eigen/QR"
#include "absl/status/status.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "server/search/cma_parameters.h"
#include "server/search/random_stream.h"
#include "server/search/ranking.h"

namespace ogive::search {
namespace {

using Objective = std::function<double(const Eigen::VectorXd&)>;

constexpr OutcomeOrder kMinimize{false, Direction::kLowerIsBetter, 0};

GaussianFamily MakeFamily(const Eigen::VectorXd& start, double sigma0, int lambda, bool diagonal,
                          std::vector<int64_t> levels = {}) {
  if (levels.empty()) levels.assign(start.size(), 0);
  absl::StatusOr<GaussianFamily> family =
      GaussianFamily::Create(start, sigma0, lambda, diagonal, std::move(levels));
  EXPECT_TRUE(family.ok()) << family.status();
  return *std::move(family);
}

// One generation: λ samples, ranked by f, one update. Returns the best f of the generation.
double Generation(GaussianFamily& family, const Objective& f, RandomStream& random,
                  int64_t* evaluations, double target, int64_t* hit_at) {
  const int lambda = family.parameters().lambda;
  std::vector<GaussianSample> cohort;
  std::vector<Outcome> outcomes;
  double best = std::numeric_limits<double>::infinity();
  for (int i = 0; i < lambda; ++i) {
    GaussianSample s;
    s.x = family.Sample(random);
    const double fx = f(s.x);
    ++*evaluations;
    if (fx <= target && *hit_at < 0) *hit_at = *evaluations;
    best = std::min(best, fx);
    cohort.push_back(std::move(s));
    outcomes.push_back(Outcome::Score(fx));
  }
  absl::StatusOr<std::vector<TieSpan>> spans = RankCohort(outcomes, kMinimize);
  EXPECT_TRUE(spans.ok()) << spans.status();
  const absl::Status status = family.Update(cohort, *spans);
  EXPECT_TRUE(status.ok()) << status;
  return best;
}

struct RunResult {
  int64_t evaluations_to_target = -1;  // -1 if the target was not reached within the budget
  GaussianFamily family;
};

// A sequential ask/tell loop until f ≤ target or the budget is spent.
RunResult Minimize(GaussianFamily family, const Objective& f, uint64_t seed, double target,
                   int64_t budget) {
  RandomStream random(seed);
  int64_t evaluations = 0;
  int64_t hit_at = -1;
  while (hit_at < 0 && evaluations < budget) {
    Generation(family, f, random, &evaluations, target, &hit_at);
    if (::testing::Test::HasFailure()) break;
  }
  return RunResult{hit_at, std::move(family)};
}

Eigen::VectorXd Optimum(int n) {
  Eigen::VectorXd x(n);
  for (int i = 0; i < n; ++i) x[i] = 0.1 * (i + 1) - 0.3;
  return x;
}

// A start at distance exactly 1 from the optimum in a direction drawn from a fixed seed.
Eigen::VectorXd StartAtDistanceOne(int n, uint64_t seed) {
  RandomStream random(seed);
  Eigen::VectorXd d(n);
  for (int i = 0; i < n; ++i) d[i] = random.Normal();
  return Optimum(n) + d.normalized();
}

// Ellipsoid Σ 10^{6 (i−1)/(n−1)} z_i² (the BBOB ellipsoid f2 of Hansen, Finck, Ros, Auger, INRIA
// RR-6829, without T_osz; formula from memory): condition number 10^6.
double Ellipsoid(const Eigen::VectorXd& z) {
  const int n = static_cast<int>(z.size());
  double f = 0.0;
  for (int i = 0; i < n; ++i) f += std::pow(10.0, 6.0 * i / (n - 1)) * z[i] * z[i];
  return f;
}

// A random rotation: the Q factor of a matrix of standard normal entries, from a fixed seed.
Eigen::MatrixXd RandomRotation(int n, uint64_t seed) {
  RandomStream random(seed);
  Eigen::MatrixXd a(n, n);
  for (int i = 0; i < n; ++i) {
    for (int j = 0; j < n; ++j) a(i, j) = random.Normal();
  }
  Eigen::HouseholderQR<Eigen::MatrixXd> qr(a);
  return qr.householderQ() * Eigen::MatrixXd::Identity(n, n);
}

// Sphere f(x) = ‖x − x*‖², n = 10, start at distance 1, σ0 = 0.3: f ≤ 1e-10 means the distance
// shrank by 10^5. The budget of 3000 evaluations is about twice what a correct CMA-ES with λ = 10
// needs (roughly 1000–1500). The floor relies on docs/references.md "Limits": the mirrored sequential
// (1+λ)-ES with optimal step size reduces ln‖x − x*‖ by about 0.235/n per evaluation (Auger,
// Brockhoff, Hansen, FOGA 2011), so a reduction of 10^5 takes at least ≈ 11.51·10/0.235 ≈ 490
// evaluations. A (μ/μ_w, λ)-ES with λ = 10 and adapted σ progresses markedly slower than that
// optimum (common practice), so a count below the floor would mean the loop miscounts.
TEST(GaussianFamilyTest, SphereConvergesWithinBudget) {
  constexpr int kN = 10;
  const Eigen::VectorXd x_star = Optimum(kN);
  const Objective sphere = [&](const Eigen::VectorXd& x) { return (x - x_star).squaredNorm(); };
  for (uint64_t seed : {1, 2, 3, 4, 5}) {
    const Eigen::VectorXd start = StartAtDistanceOne(kN, 100 + seed);
    RunResult run = Minimize(MakeFamily(start, 0.3, DefaultPopulationSize(kN), false), sphere, seed,
                             1e-10, 3000);
    ASSERT_GT(run.evaluations_to_target, 0) << "seed " << seed << ": target not reached in 3000";
    EXPECT_GE(run.evaluations_to_target, 490) << "seed " << seed;
    // The step size follows the distance to the optimum (σ0 = 0.3 at distance 1, distance 1e-5 at
    // the end).
    EXPECT_LT(run.family.state().sigma, 1e-3 * 0.3) << "seed " << seed;
  }
}

// One generation from a fresh distribution (m, σ, C = I, p_σ = p_c = 0) recomputed from the update
// equations of Hansen's tutorial (arXiv:1604.00772, the equations beside Table 1, their form from
// memory as in docs/references.md; active CMA with the negative weights scaled by n/‖C^{-1/2} y‖²), with
// the weights, μ_eff, c_σ, d_σ, c_c, c_1 and c_μ of CmaParameters (checked against the tutorial's
// table in cma_parameters_test.cc). With C = I, C^{-1/2} = I:
//   y_i = (x_i − m)/σ,  ⟨y⟩_w = Σ_{i≤μ} w_i y_{i:λ},  m' = m + c_m σ ⟨y⟩_w
//   p_σ' = √(c_σ (2 − c_σ) μ_eff) ⟨y⟩_w,  h_σ = [‖p_σ'‖/√(1 − (1 − c_σ)²) < (1.4 + 2/(n+1)) E‖N‖]
//   p_c' = h_σ √(c_c (2 − c_c) μ_eff) ⟨y⟩_w
//   C' = (1 + c_1 δ(h_σ) − c_1 − c_μ Σ w) I + c_1 p_c' p_c'ᵀ + c_μ Σ w°_i y_{i:λ} y_{i:λ}ᵀ
//   σ' = σ exp((c_σ/d_σ)(‖p_σ'‖/E‖N‖ − 1))
// The diagonal model uses the same equations and keeps only the diagonal of C'.
TEST(GaussianFamilyTest, FirstUpdateFollowsTheTutorialEquations) {
  constexpr int kN = 3;
  constexpr int kLambda = 6;
  constexpr double kSigma = 0.5;
  const Eigen::Vector3d m(0.2, -0.1, 0.4);
  // A fixed cohort (from a seeded stream) listed in an order different from its ranking.
  RandomStream random(123);
  std::vector<GaussianSample> cohort(kLambda);
  std::vector<Outcome> outcomes;
  const int rank_of[kLambda] = {3, 0, 5, 1, 4, 2};
  for (int i = 0; i < kLambda; ++i) {
    cohort[i].x = m + kSigma * Eigen::Vector3d(random.Normal(), random.Normal(), random.Normal());
    outcomes.push_back(Outcome::Score(rank_of[i]));
  }
  const std::vector<TieSpan> spans = *RankCohort(outcomes, kMinimize);
  for (bool diagonal : {false, true}) {
    SCOPED_TRACE(diagonal ? "diagonal" : "full");
    GaussianFamily family = MakeFamily(m, kSigma, kLambda, diagonal);
    const CmaParameters& p = family.parameters();
    // Members sorted by rank.
    std::vector<Eigen::VectorXd> y(kLambda);
    for (int i = 0; i < kLambda; ++i) y[rank_of[i]] = (cohort[i].x - m) / kSigma;
    Eigen::VectorXd y_w = Eigen::VectorXd::Zero(kN);
    for (int k = 0; k < p.mu; ++k) y_w += p.weights[k] * y[k];
    const Eigen::VectorXd mean = m + p.c_m * kSigma * y_w;
    const Eigen::VectorXd p_sigma = std::sqrt(p.c_sigma * (2 - p.c_sigma) * p.mu_eff) * y_w;
    const double h_sigma = p_sigma.norm() / std::sqrt(1 - std::pow(1 - p.c_sigma, 2)) <
                                   (1.4 + 2.0 / (kN + 1)) * p.chi_n
                               ? 1.0
                               : 0.0;
    const Eigen::VectorXd p_c = h_sigma * std::sqrt(p.c_c * (2 - p.c_c) * p.mu_eff) * y_w;
    double sum_w = 0;
    Eigen::MatrixXd rank_mu = Eigen::MatrixXd::Zero(kN, kN);
    for (int k = 0; k < kLambda; ++k) {
      sum_w += p.weights[k];
      const double w_circ =
          p.weights[k] >= 0 ? p.weights[k] : p.weights[k] * kN / y[k].squaredNorm();
      rank_mu += w_circ * y[k] * y[k].transpose();
    }
    const double delta_h = (1 - h_sigma) * p.c_c * (2 - p.c_c);
    Eigen::MatrixXd covariance =
        (1 + p.c_1 * delta_h - p.c_1 - p.c_mu * sum_w) * Eigen::MatrixXd::Identity(kN, kN) +
        p.c_1 * p_c * p_c.transpose() + p.c_mu * rank_mu;
    const double sigma =
        kSigma * std::exp((p.c_sigma / p.d_sigma) * (p_sigma.norm() / p.chi_n - 1));

    ASSERT_TRUE(family.Update(cohort, spans).ok());
    const GaussianState& st = family.state();
    EXPECT_LT((st.mean - mean).norm(), 1e-14);
    EXPECT_LT((st.p_sigma - p_sigma).norm(), 1e-14);
    EXPECT_LT((st.p_c - p_c).norm(), 1e-14);
    EXPECT_NEAR(st.sigma, sigma, 1e-14 * sigma);
    if (diagonal) {
      ASSERT_EQ(st.covariance.cols(), 1);
      EXPECT_LT((st.covariance.col(0) - covariance.diagonal()).norm(), 1e-14);
    } else {
      EXPECT_LT((st.covariance - covariance).norm(), 1e-14);
    }
    EXPECT_EQ(st.generation, 1);
  }
}

// The step size is the main adaptation on the sphere: starting far too large or far too small, σ
// moves towards the scale of the distance (cumulative step-size adaptation, Hansen's tutorial).
// The thresholds are generous: the test checks the direction of the adaptation, not its rate.
TEST(GaussianFamilyTest, StepSizeAdaptsUpAndDown) {
  constexpr int kN = 10;
  const Eigen::VectorXd x_star = Optimum(kN);
  const Objective sphere = [&](const Eigen::VectorXd& x) { return (x - x_star).squaredNorm(); };
  {
    GaussianFamily family = MakeFamily(StartAtDistanceOne(kN, 7), 1e-6, 10, false);
    RandomStream random(8);
    int64_t evaluations = 0, hit = -1;
    for (int g = 0; g < 60; ++g) Generation(family, sphere, random, &evaluations, -1, &hit);
    EXPECT_GT(family.state().sigma, 1e-4);  // grew by more than 100×
  }
  {
    GaussianFamily family = MakeFamily(StartAtDistanceOne(kN, 9), 100.0, 10, false);
    RandomStream random(10);
    int64_t evaluations = 0, hit = -1;
    for (int g = 0; g < 150; ++g) Generation(family, sphere, random, &evaluations, -1, &hit);
    EXPECT_LT(family.state().sigma, 1.0);  // shrank by more than 100×
  }
}

// sep-CMA-ES (Ros and Hansen, PPSN 2008) on the separable ellipsoid with condition 10^6 in n = 10:
// it converges, and its diagonal learns the inverse Hessian, C_ii ∝ 10^{−6 (i−1)/(n−1)}, so the
// axis ratio ends near √(10^6) = 10^3 (allowing a factor 3, as for the full model below).
TEST(GaussianFamilyTest, DiagonalModelConvergesOnSeparableEllipsoid) {
  constexpr int kN = 10;
  const Eigen::VectorXd x_star = Optimum(kN);
  const Objective f = [&](const Eigen::VectorXd& x) { return Ellipsoid(x - x_star); };
  for (uint64_t seed : {11, 12, 13}) {
    RunResult run = Minimize(MakeFamily(StartAtDistanceOne(kN, seed), 0.3, 10, /*diagonal=*/true),
                             f, seed, 1e-10, 20000);
    ASSERT_GT(run.evaluations_to_target, 0) << "seed " << seed;
    const GaussianState& st = run.family.state();
    ASSERT_EQ(st.covariance.cols(), 1);  // still diagonal
    const double ratio = std::sqrt(st.covariance(0, 0) / st.covariance(kN - 1, 0));
    EXPECT_GT(ratio, 1e3 / 3) << "seed " << seed;
    EXPECT_LT(ratio, 3e3) << "seed " << seed;
    EXPECT_GT(run.family.Summary().axis_ratio, 1e3 / 3);
    EXPECT_LT(run.family.Summary().axis_ratio, 3e3);
  }
}

// Full CMA-ES on a rotated ellipsoid (f10-like: the ellipsoid of R (x − x*), condition 10^6, R from
// a fixed seed): it converges, and C learns the inverse Hessian, so the axis ratio √(λ_max/λ_min)
// of C ends near 10^3 = √(condition) — a hallmark of covariance learning (Hansen, "The CMA
// Evolution Strategy: A Tutorial", arXiv:1604.00772; from memory). Tolerance: a factor 3. The
// eigenvectors of C line up with the rows of R: the largest axis of C is the direction R's first
// row (smallest weight).
TEST(GaussianFamilyTest, FullModelLearnsRotatedEllipsoid) {
  constexpr int kN = 10;
  const Eigen::VectorXd x_star = Optimum(kN);
  const Eigen::MatrixXd rotation = RandomRotation(kN, 77);
  const Objective f = [&](const Eigen::VectorXd& x) { return Ellipsoid(rotation * (x - x_star)); };
  for (uint64_t seed : {21, 22, 23}) {
    RunResult run =
        Minimize(MakeFamily(StartAtDistanceOne(kN, seed), 0.3, 10, false), f, seed, 1e-10, 20000);
    ASSERT_GT(run.evaluations_to_target, 0) << "seed " << seed;
    const GaussianSummary summary = run.family.Summary();
    EXPECT_GT(summary.axis_ratio, 1e3 / 3) << "seed " << seed;
    EXPECT_LT(summary.axis_ratio, 3e3) << "seed " << seed;
    const GaussianState& st = run.family.state();
    Eigen::Index largest = 0;
    st.eigenvalues.maxCoeff(&largest);
    const Eigen::VectorXd axis = st.eigenvectors.col(largest);
    EXPECT_GT(std::abs(axis.dot(rotation.row(0).transpose())), 0.99) << "seed " << seed;
  }
}

// CMA-ES is invariant under rotations of the search space (Hansen's tutorial lists this among its
// invariance properties; from memory): on an ellipsoid g(x) and on h(x) = g(R x) started at Rᵀ x0,
// the runs differ only because C starts at I in both, so the cost is the same in distribution.
// Statistical check: 15 seeds each, the mean of ln(evaluations to f ≤ 1e-8) agrees within 4 pooled
// standard errors √(s_1²/15 + s_2²/15).
TEST(GaussianFamilyTest, RotationInvarianceInDistribution) {
  constexpr int kN = 10;
  constexpr int kSeeds = 15;
  const Eigen::VectorXd x_star = Optimum(kN);
  const Eigen::MatrixXd rotation = RandomRotation(kN, 4711);
  const Objective g = [&](const Eigen::VectorXd& x) { return Ellipsoid(x - x_star); };
  const Objective h = [&](const Eigen::VectorXd& x) { return Ellipsoid(rotation * x - x_star); };
  std::vector<double> log_g, log_h;
  for (int s = 0; s < kSeeds; ++s) {
    const Eigen::VectorXd x0 = StartAtDistanceOne(kN, 300 + s);
    RunResult a = Minimize(MakeFamily(x0, 0.3, 10, false), g, 1000 + s, 1e-8, 30000);
    RunResult b =
        Minimize(MakeFamily(rotation.transpose() * x0, 0.3, 10, false), h, 2000 + s, 1e-8, 30000);
    ASSERT_GT(a.evaluations_to_target, 0);
    ASSERT_GT(b.evaluations_to_target, 0);
    log_g.push_back(std::log(static_cast<double>(a.evaluations_to_target)));
    log_h.push_back(std::log(static_cast<double>(b.evaluations_to_target)));
  }
  auto mean_and_variance = [](const std::vector<double>& v) {
    double mean = 0;
    for (double x : v) mean += x;
    mean /= v.size();
    double var = 0;
    for (double x : v) var += (x - mean) * (x - mean);
    return std::make_pair(mean, var / (v.size() - 1));
  };
  const auto [mean_g, var_g] = mean_and_variance(log_g);
  const auto [mean_h, var_h] = mean_and_variance(log_h);
  const double pooled_se = std::sqrt(var_g / kSeeds + var_h / kSeeds);
  EXPECT_LT(std::abs(mean_g - mean_h), 4 * pooled_se)
      << "mean ln evals: axis-aligned " << mean_g << ", rotated " << mean_h << ", pooled SE "
      << pooled_se;
}

// c_y = √n + 2n/(n + 2) (Hansen, "Injecting external solutions into CMA-ES", arXiv:1110.4181; rule
// from memory); docs/references.md computed 2.4142 (n=2), 4.8289 (n=10), 8.2293 (n=40), four decimals.
TEST(GaussianFamilyTest, ClipRadiusMatchesTheInjectionRule) {
  const std::pair<int, double> cases[] = {{2, 2.4142}, {10, 4.8289}, {40, 8.2293}};
  for (const auto& [n, c_y] : cases) {
    const GaussianFamily family =
        MakeFamily(Eigen::VectorXd::Zero(n), 1.0, DefaultPopulationSize(n), false);
    EXPECT_NEAR(family.ClipRadius(), c_y, 5e-5) << "n=" << n;
  }
}

TEST(GaussianFamilyTest, ClippedStepsStayWithinTheRadius) {
  constexpr int kN = 10;
  // A family with a non-trivial C: a few generations on a rotated ellipsoid.
  const Eigen::MatrixXd rotation = RandomRotation(kN, 5);
  const Objective f = [&](const Eigen::VectorXd& x) { return Ellipsoid(rotation * x); };
  GaussianFamily family = MakeFamily(Eigen::VectorXd::Ones(kN), 0.5, 10, false);
  RandomStream random(6);
  int64_t evaluations = 0, hit = -1;
  for (int g = 0; g < 100; ++g) Generation(family, f, random, &evaluations, -1, &hit);
  ASSERT_GT(family.Summary().axis_ratio, 3.0);  // C is no longer a multiple of I
  const double radius = family.ClipRadius();
  int clipped = 0;
  for (int t = 0; t < 2000; ++t) {
    Eigen::VectorXd x(kN);
    const double scale = std::pow(10.0, -3.0 + 9.0 * random.Uniform()) * family.state().sigma;
    for (int i = 0; i < kN; ++i) x[i] = family.state().mean[i] + scale * random.Normal();
    const Eigen::VectorXd clipped_step = family.StepOf(x, true);
    const Eigen::VectorXd raw_step = family.StepOf(x, false);
    const double raw_norm = family.MahalanobisNorm(raw_step);
    EXPECT_LE(family.MahalanobisNorm(clipped_step), radius * (1 + 1e-12));
    if (raw_norm <= radius) {
      EXPECT_EQ(clipped_step, raw_step);  // inside the radius nothing changes
    } else {
      ++clipped;
      // Clipping scales the step and keeps its direction.
      EXPECT_NEAR(family.MahalanobisNorm(clipped_step), radius, 1e-9 * radius);
      EXPECT_NEAR(clipped_step.normalized().dot(raw_step.normalized()), 1.0, 1e-12);
    }
  }
  EXPECT_GT(clipped, 100);
  EXPECT_LT(clipped, 1900);
}

// A far-off member of the cohort, 100σ from the mean and ranked best, with every other member
// exactly at the mean: with C = I the mean moves by c_m σ w_1 y_1 (the tutorial's mean update with
// c_m = 1). Internal: ‖Δm‖ = σ w_1 · 100. External: y_1 is clipped to c_y, so ‖Δm‖ = σ w_1 c_y. w_1
// is recomputed from the tutorial's Table 1: w'_1 = ln((λ+1)/2), divided by Σ_{i≤μ} w'_i.
TEST(GaussianFamilyTest, ExternalOutlierMovesTheMeanLessThanAnInternalOne) {
  constexpr int kN = 10;
  constexpr int kLambda = 10;
  constexpr double kSigma = 0.5;
  const Eigen::VectorXd m = Eigen::VectorXd::Constant(kN, 0.25);
  const GaussianFamily fresh = MakeFamily(m, kSigma, kLambda, false);
  double sum_w_prime = 0;
  for (int i = 1; i <= kLambda / 2; ++i) sum_w_prime += std::log((kLambda + 1) / 2.0) - std::log(i);
  const double w_1 = std::log((kLambda + 1) / 2.0) / sum_w_prime;

  std::vector<GaussianSample> cohort(kLambda);
  std::vector<Outcome> outcomes;
  for (int i = 0; i < kLambda; ++i) {
    cohort[i].x = m;
    outcomes.push_back(Outcome::Score(i));
  }
  cohort[0].x[3] += 100 * kSigma;
  const std::vector<TieSpan> spans = *RankCohort(outcomes, kMinimize);

  GaussianFamily internal = fresh;
  ASSERT_TRUE(internal.Update(cohort, spans).ok());
  cohort[0].external = true;
  GaussianFamily external = fresh;
  ASSERT_TRUE(external.Update(cohort, spans).ok());

  const double moved_internal = (internal.state().mean - m).norm();
  const double moved_external = (external.state().mean - m).norm();
  EXPECT_LT(moved_external, moved_internal);
  EXPECT_NEAR(moved_internal, kSigma * w_1 * 100, 1e-12);
  EXPECT_NEAR(moved_external, kSigma * w_1 * fresh.ClipRadius(), 1e-12);
  // Only coordinate 3 moved.
  for (int j = 0; j < kN; ++j) {
    if (j != 3) {
      EXPECT_EQ(external.state().mean[j], m[j]);
    }
  }
}

// gaussian_family.h: external members receive only non-negative weights in the covariance update. A
// worst-ranked member (negative weight, no weight in the mean or the paths) then has no influence
// at all when it is external: moving it changes nothing. As an internal member it does (active
// CMA).
TEST(GaussianFamilyTest, WorstRankedExternalMemberDoesNotEnterTheCovariance) {
  constexpr int kN = 4;
  constexpr int kLambda = 8;
  const Eigen::VectorXd m = Eigen::VectorXd::Constant(kN, 0.5);
  const GaussianFamily fresh = MakeFamily(m, 0.2, kLambda, false);
  RandomStream random(88);
  std::vector<GaussianSample> cohort(kLambda);
  std::vector<Outcome> outcomes;
  for (int i = 0; i < kLambda; ++i) {
    cohort[i].x = fresh.Sample(random);
    outcomes.push_back(Outcome::Score(i));  // member kLambda − 1 is the worst
  }
  const std::vector<TieSpan> spans = *RankCohort(outcomes, kMinimize);
  ASSERT_LT(fresh.parameters().weights[kLambda - 1], 0.0);
  std::vector<GaussianSample> moved = cohort;
  moved.back().x[1] += 0.3;
  for (bool external : {true, false}) {
    cohort.back().external = external;
    moved.back().external = external;
    GaussianFamily a = fresh, b = fresh;
    ASSERT_TRUE(a.Update(cohort, spans).ok());
    ASSERT_TRUE(b.Update(moved, spans).ok());
    EXPECT_EQ(a.state().mean, b.state().mean);
    EXPECT_EQ(a.state().sigma, b.state().sigma);
    if (external) {
      EXPECT_EQ(a.state().covariance, b.state().covariance);
    } else {
      EXPECT_GT((a.state().covariance - b.state().covariance).norm(), 1e-6);
    }
  }
}

// Standard normal upper tail P(Z > z) = erfc(z/√2)/2.
double UpperTail(double z) { return 0.5 * std::erfc(z / std::sqrt(2.0)); }

// The thresholds between integer cells that bound the cell of m (W cells of width 1/W on [0, 1]);
// the end cells have only one.
std::vector<double> CellThresholds(double m, int levels) {
  const double cell = std::clamp(std::floor(m * levels), 0.0, levels - 1.0);
  std::vector<double> thresholds;
  if (cell > 0) thresholds.push_back(cell / levels);
  if (cell < levels - 1) thresholds.push_back((cell + 1) / levels);
  return thresholds;
}

// CMA-ES with Margin (Hamano, Saito, Nomura, Shirakawa, GECCO 2022, arXiv:2205.13482): the
// probability of sampling across the integer threshold nearest to the mean stays at least α = 1/(n
// λ), so the search never freezes on one integer. (gaussian_family.h promises more, α across each
// threshold of the mean's cell; both are checked.) Here n = 2: a real coordinate converging to 0.3
// drives σ down by many orders of magnitude while the objective keeps choosing one integer out of 5
// — the middle one (cell [0.4, 0.6), two thresholds) or the lowest (cell [0, 0.2), one threshold).
// Without the margin, sampling would freeze on that integer.
TEST(GaussianFamilyTest, IntegerMarginKeepsTheSearchFromFreezing) {
  constexpr int kW = 5;
  constexpr int kLambda = 6;
  const double alpha = 1.0 / (2 * kLambda);
  for (int target_cell : {2, 0}) {
    const Objective f = [target_cell](const Eigen::VectorXd& x) {
      const double cell = std::floor(x[1] * kW);
      return (x[0] - 0.3) * (x[0] - 0.3) + (cell == target_cell ? 0.0 : 1.0);
    };
    for (bool diagonal : {false, true}) {
      SCOPED_TRACE(::testing::Message()
                   << "target cell " << target_cell << ", diagonal " << diagonal);
      const Eigen::Vector2d start(0.8, (target_cell + 0.5) / kW);
      GaussianFamily family = MakeFamily(start, 0.3, kLambda, diagonal, {0, kW});
      RandomStream random(31 + target_cell + diagonal);
      int64_t evaluations = 0, hit = -1;
      for (int g = 0; g < 300; ++g) {
        Generation(family, f, random, &evaluations, -1, &hit);
        // From the summary: the marginal spread σ A_jj √C_jj of the integer coordinate.
        const GaussianSummary summary = family.Summary();
        const double m = summary.mean[1];
        const double nearest = std::clamp(std::round(m * kW), 1.0, kW - 1.0) / kW;
        ASSERT_GE(UpperTail(std::abs(m - nearest) / summary.spread[1]), alpha * (1 - 1e-9))
            << "generation " << g;
        for (double t : CellThresholds(m, kW)) {
          ASSERT_GE(UpperTail(std::abs(m - t) / summary.spread[1]), alpha * (1 - 1e-9))
              << "generation " << g << " threshold " << t;
        }
      }
      // The real coordinate converged, so σ is tiny and the margin is what keeps the integer
      // moving.
      EXPECT_LT(family.state().sigma, 1e-6);
      EXPECT_GT(family.state().margin_scale[1], 1e3);
      EXPECT_EQ(family.state().margin_scale[0], 1.0);
      const double m = family.state().mean[1];
      EXPECT_EQ(std::floor(m * kW), target_cell);  // still choosing the same integer
      // Estimate by sampling: 10^5 draws; standard error √(α(1−α)/10^5) ≈ 8.7e-4; tolerance 5 SE.
      constexpr int kDraws = 100000;
      const std::vector<double> thresholds = CellThresholds(m, kW);
      std::vector<int> across(thresholds.size(), 0);
      for (int i = 0; i < kDraws; ++i) {
        const double x = family.Sample(random)[1];
        for (size_t k = 0; k < thresholds.size(); ++k) {
          if ((x - thresholds[k]) * (m - thresholds[k]) < 0) ++across[k];
        }
      }
      const double se = std::sqrt(alpha * (1 - alpha) / kDraws);
      for (size_t k = 0; k < thresholds.size(); ++k) {
        EXPECT_GE(static_cast<double>(across[k]) / kDraws, alpha - 5 * se)
            << "threshold " << thresholds[k];
      }
    }
  }
}

void ExpectSameState(const GaussianState& a, const GaussianState& b) {
  EXPECT_EQ(a.diagonal, b.diagonal);
  EXPECT_EQ(a.population_size, b.population_size);
  EXPECT_EQ(a.mean, b.mean);
  EXPECT_EQ(a.sigma, b.sigma);
  ASSERT_EQ(a.covariance.rows(), b.covariance.rows());
  ASSERT_EQ(a.covariance.cols(), b.covariance.cols());
  EXPECT_EQ(a.covariance, b.covariance);
  EXPECT_EQ(a.p_sigma, b.p_sigma);
  EXPECT_EQ(a.p_c, b.p_c);
  ASSERT_EQ(a.eigenvectors.rows(), b.eigenvectors.rows());
  ASSERT_EQ(a.eigenvectors.cols(), b.eigenvectors.cols());
  EXPECT_EQ(a.eigenvectors, b.eigenvectors);
  EXPECT_EQ(a.eigenvalues, b.eigenvalues);
  EXPECT_EQ(a.generation, b.generation);
  EXPECT_EQ(a.eigen_generation, b.eigen_generation);
  EXPECT_EQ(a.integer_levels, b.integer_levels);
  EXPECT_EQ(a.margin_scale, b.margin_scale);
}

TEST(GaussianFamilyTest, FromStateContinuesBitIdentically) {
  constexpr int kN = 6;
  const Eigen::MatrixXd rotation = RandomRotation(kN, 8);
  const Objective f = [&](const Eigen::VectorXd& x) {
    return Ellipsoid(rotation * x) + std::abs(std::floor(x[2] * 4) - 1);
  };
  for (bool diagonal : {false, true}) {
    GaussianFamily original =
        MakeFamily(Eigen::VectorXd::Constant(kN, 0.6), 0.2, 8, diagonal, {0, 0, 4, 0, 0, 0});
    RandomStream random(55);
    int64_t evaluations = 0, hit = -1;
    for (int g = 0; g < 7; ++g) Generation(original, f, random, &evaluations, -1, &hit);
    absl::StatusOr<GaussianFamily> restored = GaussianFamily::FromState(original.state());
    ASSERT_TRUE(restored.ok()) << restored.status();
    ExpectSameState(restored->state(), original.state());
    RandomStream random_copy = RandomStream::FromState(random.state());
    for (int g = 0; g < 12; ++g) {
      // Same samples...
      RandomStream probe_a = RandomStream::FromState(random.state());
      RandomStream probe_b = RandomStream::FromState(random_copy.state());
      for (int i = 0; i < 8; ++i) ASSERT_EQ(original.Sample(probe_a), restored->Sample(probe_b));
      // ...and the same states after each further update.
      int64_t e1 = 0, e2 = 0, h1 = -1, h2 = -1;
      Generation(original, f, random, &e1, -1, &h1);
      Generation(*restored, f, random_copy, &e2, -1, &h2);
      ExpectSameState(restored->state(), original.state());
    }
  }
}

TEST(GaussianFamilyTest, CreateRefusesBadArguments) {
  const Eigen::VectorXd start = Eigen::VectorXd::Zero(3);
  const std::vector<int64_t> levels(3, 0);
  for (double sigma0 : {0.0, -1.0, std::numeric_limits<double>::quiet_NaN(),
                        std::numeric_limits<double>::infinity()}) {
    absl::StatusOr<GaussianFamily> f = GaussianFamily::Create(start, sigma0, 6, false, levels);
    ASSERT_FALSE(f.ok()) << sigma0;
    EXPECT_EQ(f.status().code(), absl::StatusCode::kInvalidArgument);
  }
  for (int lambda : {1, 0, -3}) {
    absl::StatusOr<GaussianFamily> f = GaussianFamily::Create(start, 0.3, lambda, false, levels);
    ASSERT_FALSE(f.ok()) << lambda;
    EXPECT_EQ(f.status().code(), absl::StatusCode::kInvalidArgument);
    EXPECT_THAT(std::string(f.status().message()), ::testing::HasSubstr("population_size"));
  }
  EXPECT_EQ(GaussianFamily::Create(start, 0.3, 6, false, {0, 0}).status().code(),
            absl::StatusCode::kInvalidArgument);
  EXPECT_EQ(GaussianFamily::Create(Eigen::VectorXd(), 0.3, 6, false, {}).status().code(),
            absl::StatusCode::kInvalidArgument);
  Eigen::VectorXd nan_start = start;
  nan_start[1] = std::numeric_limits<double>::quiet_NaN();
  EXPECT_EQ(GaussianFamily::Create(nan_start, 0.3, 6, false, levels).status().code(),
            absl::StatusCode::kInvalidArgument);
  EXPECT_TRUE(GaussianFamily::Create(start, 0.3, 2, false, levels).ok());
}

TEST(GaussianFamilyTest, UpdateRefusesBadCohortsAndLeavesTheStateUnchanged) {
  constexpr int kN = 4;
  constexpr int kLambda = 6;
  GaussianFamily family =
      MakeFamily(Eigen::VectorXd::Constant(kN, 0.5), 0.3, kLambda, false, {0, 3, 0, 0});
  // Move away from the initial state first so that "unchanged" means something.
  RandomStream random(3);
  const Objective f = [](const Eigen::VectorXd& x) { return x.squaredNorm(); };
  int64_t evaluations = 0, hit = -1;
  for (int g = 0; g < 5; ++g) Generation(family, f, random, &evaluations, -1, &hit);
  const GaussianState before = family.state();

  std::vector<GaussianSample> good(kLambda);
  std::vector<Outcome> outcomes;
  for (int i = 0; i < kLambda; ++i) {
    good[i].x = family.Sample(random);
    outcomes.push_back(Outcome::Score(i));
  }
  const std::vector<TieSpan> spans = *RankCohort(outcomes, kMinimize);

  auto expect_refused = [&](const std::vector<GaussianSample>& cohort,
                            const std::vector<TieSpan>& s) {
    const absl::Status status = family.Update(cohort, s);
    EXPECT_EQ(status.code(), absl::StatusCode::kInvalidArgument) << status;
    ExpectSameState(family.state(), before);
  };
  // Too few and too many members.
  expect_refused(std::vector<GaussianSample>(good.begin(), good.end() - 1),
                 std::vector<TieSpan>(spans.begin(), spans.end() - 1));
  {
    std::vector<GaussianSample> more = good;
    more.push_back(good[0]);
    std::vector<TieSpan> more_spans =
        *RankCohort(std::vector<Outcome>(kLambda + 1, Outcome::Score(1)), kMinimize);
    expect_refused(more, more_spans);
  }
  // Spans and cohort of different sizes.
  expect_refused(good, std::vector<TieSpan>(spans.begin(), spans.end() - 1));
  // Non-finite or wrong-size samples, in the last position so that earlier members were looked at.
  for (double bad :
       {std::numeric_limits<double>::quiet_NaN(), std::numeric_limits<double>::infinity()}) {
    std::vector<GaussianSample> cohort = good;
    cohort.back().x[2] = bad;
    expect_refused(cohort, spans);
  }
  {
    std::vector<GaussianSample> cohort = good;
    cohort.back().x = Eigen::VectorXd::Zero(kN + 1);
    expect_refused(cohort, spans);
  }
  // The good cohort is accepted.
  EXPECT_TRUE(family.Update(good, spans).ok());
  EXPECT_EQ(family.state().generation, before.generation + 1);
}

// gaussian_family.h: an update that would leave a non-finite state is FAILED_PRECONDITION and
// leaves the state unchanged. σ = 1e290 and a cohort of identical members 10^3 σ from the mean make
// ‖p_σ‖/E‖N(0,I)‖ about 460, so σ would grow by e^100 (c_σ/d_σ ≈ 0.22 for n = 10, λ = 10; tutorial,
// Table 1) and overflow, while every sample is still finite (≈ 1e293).
TEST(GaussianFamilyTest, UpdateThatWouldOverflowIsRefusedAndLeavesTheStateUnchanged) {
  constexpr int kN = 10;
  constexpr int kLambda = 10;
  GaussianFamily family = MakeFamily(Eigen::VectorXd::Zero(kN), 1e290, kLambda, false);
  const GaussianState before = family.state();
  std::vector<GaussianSample> cohort(kLambda);
  std::vector<Outcome> outcomes;
  for (int i = 0; i < kLambda; ++i) {
    cohort[i].x = Eigen::VectorXd::Zero(kN);
    cohort[i].x[0] = 1e3 * 1e290;
    outcomes.push_back(Outcome::Score(i));
  }
  ASSERT_TRUE(cohort[0].x.allFinite());
  const absl::Status status = family.Update(cohort, *RankCohort(outcomes, kMinimize));
  EXPECT_EQ(status.code(), absl::StatusCode::kFailedPrecondition) << status;
  ExpectSameState(family.state(), before);
}

TEST(GaussianFamilyTest, SamplesFollowTheDistribution) {
  // With C = I and no integer coordinates, samples are N(m, σ² I): check mean and variance per
  // coordinate over 10^5 draws (standard errors σ/√N and σ²√(2/N); tolerance 5 SE).
  constexpr int kN = 3;
  constexpr double kSigma = 0.7;
  const Eigen::Vector3d m(1.0, -2.0, 0.5);
  const GaussianFamily family = MakeFamily(m, kSigma, 6, false);
  RandomStream random(17);
  constexpr int kDraws = 100000;
  Eigen::Vector3d sum = Eigen::Vector3d::Zero(), sum_sq = Eigen::Vector3d::Zero();
  for (int i = 0; i < kDraws; ++i) {
    const Eigen::VectorXd x = family.Sample(random);
    sum += x;
    sum_sq += (x - m).cwiseAbs2();
  }
  for (int j = 0; j < kN; ++j) {
    EXPECT_NEAR(sum[j] / kDraws, m[j], 5 * kSigma / std::sqrt(kDraws));
    EXPECT_NEAR(sum_sq[j] / kDraws, kSigma * kSigma, 5 * kSigma * kSigma * std::sqrt(2.0 / kDraws));
  }
}

}  // namespace
}  // namespace ogive::search
