// Tests of the product distribution over a mixed space: invariance under monotone transforms of the
// objective, state round trips, all-or-nothing updates, hard bounds, population size, option
// validation and convergence on a mixed problem.
#include "server/search/search_distribution.h"

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <functional>
#include <limits>
#include <optional>
#include <string>
#include <utility>
#include <vector>

#include "Eigen/Core"
#include "absl/status/status.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "server/search/random_stream.h"
#include "server/search/ranking.h"
#include "server/search/space.h"

namespace ogive::search {
namespace {

using ::testing::HasSubstr;

constexpr OutcomeOrder kMinimize{false, Direction::kLowerIsBetter, 0};

// Parameter positions in the mixed space below; the blocks are interleaved on purpose.
constexpr int kX = 0;       // real [−5, 5]
constexpr int kF1 = 1;      // flag
constexpr int kLayers = 2;  // integer [1, 8]
constexpr int kOpt = 3;     // categorical {sgd, adam, rmsprop}
constexpr int kLr = 4;      // real [1e-5, 1e-1], log scale
constexpr int kF2 = 5;      // flag

Space MixedSpace() {
  std::vector<ParameterSpec> p(6);
  p[kX].name = "x";
  p[kX].kind = ParameterKind::kReal;
  p[kX].low = -5;
  p[kX].high = 5;
  p[kF1].name = "f1";
  p[kF1].kind = ParameterKind::kFlag;
  p[kLayers].name = "layers";
  p[kLayers].kind = ParameterKind::kInteger;
  p[kLayers].integer_low = 1;
  p[kLayers].integer_high = 8;
  p[kOpt].name = "opt";
  p[kOpt].kind = ParameterKind::kCategorical;
  p[kOpt].options = {"sgd", "adam", "rmsprop"};
  p[kLr].name = "lr";
  p[kLr].kind = ParameterKind::kReal;
  p[kLr].low = 1e-5;
  p[kLr].high = 1e-1;
  p[kLr].log = true;
  p[kF2].name = "f2";
  p[kF2].kind = ParameterKind::kFlag;
  absl::StatusOr<Space> space = Space::Create(std::move(p));
  EXPECT_TRUE(space.ok()) << space.status();
  return *std::move(space);
}

// The mixed problem: a sphere on the two reals in internal coordinates, |layers − 6|, one per flag
// that is wrong (f1 should be on, f2 off), one if the optimizer is not "adam". Its minimum is 0.
double MixedObjective(const Space& space, const Eigen::VectorXd& x) {
  const Candidate c = space.Decode(x);
  double f = (x[kX] - 0.7) * (x[kX] - 0.7) + (x[kLr] - 0.35) * (x[kLr] - 0.35);
  f += static_cast<double>(std::abs(std::get<int64_t>(c[kLayers]) - 6));
  f += std::get<bool>(c[kF1]) ? 0.0 : 1.0;
  f += std::get<bool>(c[kF2]) ? 1.0 : 0.0;
  f += std::get<std::string>(c[kOpt]) == "adam" ? 0.0 : 1.0;
  return f;
}

SearchDistribution MakeDistribution(const DistributionOptions& options = {}) {
  absl::StatusOr<SearchDistribution> d = SearchDistribution::Create(MixedSpace(), options);
  EXPECT_TRUE(d.ok()) << d.status();
  return *std::move(d);
}

// One generation of the sequential loop; scores are transform(f). Appends the draws to `history`.
void Generation(SearchDistribution& d, RandomStream& random,
                const std::function<double(double)>& transform,
                std::vector<Eigen::VectorXd>* history, double* best_f = nullptr) {
  std::vector<CohortMember> cohort;
  std::vector<Outcome> outcomes;
  for (int i = 0; i < d.population_size(); ++i) {
    const Draw draw = d.Sample(random);
    const double f = MixedObjective(d.space(), draw.x);
    if (best_f != nullptr) *best_f = std::min(*best_f, f);
    outcomes.push_back(Outcome::Score(transform(f)));
    cohort.push_back({draw.x, draw.repaired});
    if (history != nullptr) history->push_back(draw.x);
  }
  absl::StatusOr<std::vector<TieSpan>> spans = RankCohort(outcomes, kMinimize);
  ASSERT_TRUE(spans.ok()) << spans.status();
  const absl::Status status = d.Update(cohort, *spans);
  ASSERT_TRUE(status.ok()) << status;
}

double Identity(double f) { return f; }

// A start point with every coordinate given.
std::vector<std::optional<double>> FullStart(const Eigen::VectorXd& x) {
  std::vector<std::optional<double>> start;
  for (int i = 0; i < x.size(); ++i) start.push_back(x[i]);
  return start;
}

void ExpectSameGaussianState(const GaussianState& a, const GaussianState& b) {
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

void ExpectSameState(const DistributionState& a, const DistributionState& b) {
  EXPECT_EQ(a.population_size, b.population_size);
  ASSERT_EQ(a.gaussian.has_value(), b.gaussian.has_value());
  ASSERT_EQ(a.bernoulli.has_value(), b.bernoulli.has_value());
  ASSERT_EQ(a.categorical.has_value(), b.categorical.has_value());
  if (a.gaussian) ExpectSameGaussianState(*a.gaussian, *b.gaussian);
  if (a.bernoulli) {
    EXPECT_EQ(a.bernoulli->probabilities, b.bernoulli->probabilities);
    EXPECT_EQ(a.bernoulli->learning_rate, b.bernoulli->learning_rate);
    EXPECT_EQ(a.bernoulli->margin, b.bernoulli->margin);
  }
  if (a.categorical) {
    ASSERT_EQ(a.categorical->probabilities.size(), b.categorical->probabilities.size());
    for (size_t j = 0; j < a.categorical->probabilities.size(); ++j) {
      EXPECT_EQ(a.categorical->probabilities[j], b.categorical->probabilities[j]);
    }
    EXPECT_EQ(a.categorical->learning_rate, b.categorical->learning_rate);
    EXPECT_EQ(a.categorical->margin, b.categorical->margin);
  }
}

// (a) IGO algorithms depend on f only through its ranks (Ollivier, Arnold, Auger, Hansen, JMLR 18,
// 2017, abstract): with the same seed, runs on f, exp(f) and f³ (strictly increasing transforms)
// hand out bit-identical candidates and end in identical states.
TEST(SearchDistributionTest, MonotoneTransformsOfTheObjectiveGiveIdenticalRuns) {
  const std::vector<std::function<double(double)>> transforms = {
      Identity, [](double f) { return std::exp(f); }, [](double f) { return f * f * f; }};
  std::vector<std::vector<Eigen::VectorXd>> histories(transforms.size());
  std::vector<DistributionState> states;
  for (size_t t = 0; t < transforms.size(); ++t) {
    SearchDistribution d = MakeDistribution();
    RandomStream random(2718);
    for (int g = 0; g < 30; ++g) Generation(d, random, transforms[t], &histories[t]);
    states.push_back(d.state());
  }
  ASSERT_EQ(histories[0].size(), 30u * MakeDistribution().population_size());
  for (size_t t = 1; t < transforms.size(); ++t) {
    ASSERT_EQ(histories[t].size(), histories[0].size());
    for (size_t i = 0; i < histories[0].size(); ++i) {
      ASSERT_EQ(histories[t][i], histories[0][i]) << "transform " << t << " draw " << i;
    }
    ExpectSameState(states[t], states[0]);
  }
  // The run did move: the distribution is not where it started.
  EXPECT_NE(states[0].gaussian->mean, MakeDistribution().state().gaussian->mean);
}

// (b) A distribution restored from its state mid-run continues bit-identically.
TEST(SearchDistributionTest, FromStateMidRunContinuesBitIdentically) {
  SearchDistribution original = MakeDistribution();
  RandomStream random(31415);
  for (int g = 0; g < 10; ++g) Generation(original, random, Identity, nullptr);
  absl::StatusOr<SearchDistribution> restored =
      SearchDistribution::FromState(MixedSpace(), original.state());
  ASSERT_TRUE(restored.ok()) << restored.status();
  ExpectSameState(restored->state(), original.state());
  RandomStream random_copy = RandomStream::FromState(random.state());
  std::vector<Eigen::VectorXd> a, b;
  for (int g = 0; g < 15; ++g) {
    Generation(original, random, Identity, &a);
    Generation(*restored, random_copy, Identity, &b);
    ExpectSameState(restored->state(), original.state());
  }
  ASSERT_EQ(a.size(), b.size());
  for (size_t i = 0; i < a.size(); ++i) ASSERT_EQ(a[i], b[i]) << "draw " << i;
}

TEST(SearchDistributionTest, FromStateRefusesStatesThatDoNotMatchTheSpace) {
  const DistributionState good = MakeDistribution().state();
  {
    DistributionState s = good;
    s.bernoulli.reset();
    EXPECT_EQ(SearchDistribution::FromState(MixedSpace(), s).status().code(),
              absl::StatusCode::kInvalidArgument);
  }
  {
    DistributionState s = good;
    s.categorical->probabilities[0] = Eigen::Vector2d(0.5, 0.5);
    EXPECT_EQ(SearchDistribution::FromState(MixedSpace(), s).status().code(),
              absl::StatusCode::kInvalidArgument);
  }
  {
    DistributionState s = good;
    s.population_size = 1;
    EXPECT_EQ(SearchDistribution::FromState(MixedSpace(), s).status().code(),
              absl::StatusCode::kInvalidArgument);
  }
}

// (c) Update is all-or-nothing: whichever block refuses the cohort, no block has changed.
TEST(SearchDistributionTest, UpdateIsAllOrNothing) {
  SearchDistribution d = MakeDistribution();
  RandomStream random(1618);
  for (int g = 0; g < 3; ++g) Generation(d, random, Identity, nullptr);
  const DistributionState before = d.state();

  std::vector<CohortMember> good;
  std::vector<Outcome> outcomes;
  for (int i = 0; i < d.population_size(); ++i) {
    const Draw draw = d.Sample(random);
    good.push_back({draw.x, draw.repaired});
    outcomes.push_back(Outcome::Score(MixedObjective(d.space(), draw.x)));
  }
  const std::vector<TieSpan> spans = *RankCohort(outcomes, kMinimize);

  auto expect_refused = [&](const std::vector<CohortMember>& cohort, const std::vector<TieSpan>& s,
                            const char* what) {
    const absl::Status status = d.Update(cohort, s);
    EXPECT_EQ(status.code(), absl::StatusCode::kInvalidArgument) << what << ": " << status;
    ExpectSameState(d.state(), before);
  };
  {
    std::vector<CohortMember> c = good;
    c.back().x = Eigen::VectorXd::Constant(d.space().size() + 1, 0.5);
    expect_refused(c, spans, "wrong-size member");
  }
  for (int coordinate : {kX, kF1, kOpt, kLr}) {
    std::vector<CohortMember> c = good;
    c.back().x[coordinate] = std::numeric_limits<double>::quiet_NaN();
    expect_refused(c, spans, "NaN coordinate");
  }
  // These pass the Gaussian block and are refused by a later one.
  {
    std::vector<CohortMember> c = good;
    c.back().x[kF2] = 0.5;
    expect_refused(c, spans, "flag that is not a bit");
  }
  {
    std::vector<CohortMember> c = good;
    c.back().x[kOpt] = 3;
    expect_refused(c, spans, "categorical index out of range");
  }
  expect_refused(std::vector<CohortMember>(good.begin(), good.end() - 1),
                 std::vector<TieSpan>(spans.begin(), spans.end() - 1), "short cohort");
  expect_refused(good, std::vector<TieSpan>(spans.begin(), spans.end() - 1), "short spans");
  EXPECT_TRUE(d.Update(good, spans).ok());
}

::testing::AssertionResult DrawInsideBounds(const Space& space, const Draw& draw) {
  for (int i : space.gaussian_indices()) {
    if (!(draw.x[i] >= 0.0 && draw.x[i] <= 1.0)) {
      return ::testing::AssertionFailure() << "internal coordinate " << i << " = " << draw.x[i];
    }
  }
  for (int i : space.flag_indices()) {
    if (draw.x[i] != 0.0 && draw.x[i] != 1.0) {
      return ::testing::AssertionFailure() << "flag " << draw.x[i];
    }
  }
  const Candidate c = space.Decode(draw.x);
  for (int i = 0; i < space.size(); ++i) {
    const ParameterSpec& p = space.parameter(i);
    switch (p.kind) {
      case ParameterKind::kReal: {
        const double v = std::get<double>(c[i]);
        if (!(v >= p.low && v <= p.high)) {
          return ::testing::AssertionFailure() << p.name << " = " << v;
        }
        break;
      }
      case ParameterKind::kInteger: {
        const int64_t v = std::get<int64_t>(c[i]);
        if (v < p.integer_low || v > p.integer_high) {
          return ::testing::AssertionFailure() << p.name << " = " << v;
        }
        break;
      }
      case ParameterKind::kCategorical: {
        const double k = draw.x[i];
        if (k != std::floor(k) || k < 0 || k >= static_cast<double>(p.options.size())) {
          return ::testing::AssertionFailure() << p.name << " index " << k;
        }
        break;
      }
      case ParameterKind::kFlag:
        break;
    }
  }
  return ::testing::AssertionSuccess();
}

// (d) Bounds are hard even when the step size is huge: initial_spread = 1 from a corner, and then σ
// set to 10^12 through the state. 10^4 draws each.
TEST(SearchDistributionTest, DrawsStayInsideTheBoundsWithAHugeStepSize) {
  DistributionOptions options;
  options.initial_spread = 1.0;
  Eigen::VectorXd corner = Eigen::VectorXd::Zero(6);
  corner[kX] = 1.0;
  corner[kLayers] = 0.0;
  corner[kLr] = 1.0;
  corner[kF1] = 1.0;
  options.start = FullStart(corner);
  SearchDistribution d = MakeDistribution(options);
  RandomStream random(99);
  int repaired = 0;
  for (int i = 0; i < 10000; ++i) {
    const Draw draw = d.Sample(random);
    ASSERT_TRUE(DrawInsideBounds(d.space(), draw)) << "draw " << i;
    repaired += draw.repaired;
  }
  EXPECT_GT(repaired, 5000);  // from a corner with σ = 1, most Gaussian samples leave the box

  DistributionState huge = d.state();
  huge.gaussian->sigma = 1e12;
  absl::StatusOr<SearchDistribution> wild = SearchDistribution::FromState(MixedSpace(), huge);
  ASSERT_TRUE(wild.ok()) << wild.status();
  for (int i = 0; i < 10000; ++i) {
    const Draw draw = wild->Sample(random);
    ASSERT_TRUE(DrawInsideBounds(wild->space(), draw)) << "draw " << i;
  }
  // Updating from such draws keeps the state finite and the next draws inside.
  for (int g = 0; g < 20; ++g) Generation(*wild, random, Identity, nullptr);
  for (int i = 0; i < 1000; ++i) ASSERT_TRUE(DrawInsideBounds(wild->space(), wild->Sample(random)));
}

// (e) The tutorial's λ = 4 + ⌊3 ln n⌋ (Hansen, arXiv:1604.00772, Table 1), raised to the expected
// number of concurrent workers, and at least 2.
TEST(SearchDistributionTest, DefaultPopulationSize) {
  const Space mixed = MixedSpace();  // n = 6: 4 + ⌊3 ln 6⌋ = 4 + ⌊5.375⌋ = 9
  EXPECT_EQ(SearchDistribution::DefaultPopulationSize(mixed, 1), 9);
  EXPECT_EQ(SearchDistribution::DefaultPopulationSize(mixed, 0), 9);
  EXPECT_EQ(SearchDistribution::DefaultPopulationSize(mixed, 9), 9);
  EXPECT_EQ(SearchDistribution::DefaultPopulationSize(mixed, 10), 10);
  EXPECT_EQ(SearchDistribution::DefaultPopulationSize(mixed, 64), 64);
  for (int n : {1, 2, 3, 20, 100}) {
    std::vector<ParameterSpec> params(n);
    for (int i = 0; i < n; ++i) {
      params[i].name = "p" + std::to_string(i);
      params[i].kind = ParameterKind::kFlag;
    }
    const Space space = *Space::Create(std::move(params));
    const int expected =
        std::max(4 + static_cast<int>(std::floor(3 * std::log(static_cast<double>(n)))), 2);
    EXPECT_EQ(SearchDistribution::DefaultPopulationSize(space, 1), expected) << "n=" << n;
    EXPECT_EQ(SearchDistribution::DefaultPopulationSize(space, 50), std::max(expected, 50))
        << "n=" << n;
  }
  // Create uses it, and an explicit population size is raised to the expected workers too.
  EXPECT_EQ(MakeDistribution().population_size(), 9);
  DistributionOptions workers;
  workers.expected_workers = 20;
  EXPECT_EQ(MakeDistribution(workers).population_size(), 20);
  DistributionOptions explicit_size;
  explicit_size.population_size = 5;
  EXPECT_EQ(MakeDistribution(explicit_size).population_size(), 5);
  EXPECT_EQ(MakeDistribution(explicit_size).state().gaussian->population_size, 5);
}

void ExpectCreateRefused(const DistributionOptions& options,
                         const std::vector<std::string>& fragments) {
  absl::StatusOr<SearchDistribution> d = SearchDistribution::Create(MixedSpace(), options);
  ASSERT_FALSE(d.ok());
  EXPECT_EQ(d.status().code(), absl::StatusCode::kInvalidArgument);
  for (const std::string& fragment : fragments) {
    EXPECT_THAT(std::string(d.status().message()), HasSubstr(fragment));
  }
}

// (f) Create names the field it refuses.
TEST(SearchDistributionTest, CreateRefusesBadOptionsNamingTheField) {
  for (double spread : {-0.1, 1.5, std::numeric_limits<double>::quiet_NaN(),
                        std::numeric_limits<double>::infinity()}) {
    DistributionOptions o;
    o.initial_spread = spread;
    ExpectCreateRefused(o, {"initial_spread"});
  }
  for (int size : {1, -1}) {
    DistributionOptions o;
    o.population_size = size;
    ExpectCreateRefused(o, {"population_size"});
  }
  {
    DistributionOptions o;
    o.start.assign(6, std::nullopt);
    o.start[kLr] = 1.5;
    ExpectCreateRefused(o, {"start", "'lr'"});
  }
  {
    DistributionOptions o;
    o.start.assign(6, std::nullopt);
    o.start[kLayers] = -0.01;
    ExpectCreateRefused(o, {"start", "'layers'"});
  }
  {
    DistributionOptions o;
    o.start.assign(6, std::nullopt);
    o.start[kF2] = 0.5;  // a flag starts at 0 or 1
    ExpectCreateRefused(o, {"start", "'f2'"});
  }
  for (double bad_index : {3.0, -1.0, 0.5}) {
    DistributionOptions o;
    o.start.assign(6, std::nullopt);
    o.start[kOpt] = bad_index;  // an option index of {sgd, adam, rmsprop}
    ExpectCreateRefused(o, {"start", "'opt'"});
  }
  {
    DistributionOptions o;
    o.start.assign(6, std::nullopt);
    o.start[kX] = std::numeric_limits<double>::quiet_NaN();
    ExpectCreateRefused(o, {"start", "'x'"});
  }
  {
    DistributionOptions o;
    o.start.assign(5, 0.5);
    ExpectCreateRefused(o, {"start"});
  }
  // The edges of the allowed ranges are accepted.
  DistributionOptions edge;
  edge.initial_spread = 1.0;
  edge.population_size = 2;
  EXPECT_TRUE(SearchDistribution::Create(MixedSpace(), edge).ok());
}

// The start point's documented meaning (search_distribution.h): reals and integers set the mean, a
// given flag starts at P = 3/4 towards its value, a given option with half the mass on it and half
// spread uniformly; nullopt keeps the default (the middle of the range, all values equally likely).
TEST(SearchDistributionTest, StartPointSetsMeanAndLeaningProbabilities) {
  DistributionOptions o;
  o.start.assign(6, std::nullopt);
  o.start[kX] = 0.9;
  o.start[kF1] = 0.0;
  o.start[kOpt] = 2.0;
  const SearchDistribution d = MakeDistribution(o);
  const DistributionSummary summary = d.Summary();
  ASSERT_TRUE(summary.gaussian.has_value());
  // Gaussian block order follows the parameter order: x, layers, lr.
  EXPECT_EQ(summary.gaussian->mean[0], 0.9);
  EXPECT_EQ(summary.gaussian->mean[1], 0.5);
  EXPECT_EQ(summary.gaussian->mean[2], 0.5);
  EXPECT_NEAR(summary.flag_probabilities[0], 0.25, 1e-15);  // f1 given as off: P(on) = 1/4
  EXPECT_NEAR(summary.flag_probabilities[1], 0.5, 1e-15);   // f2 not given
  EXPECT_NEAR(summary.option_probabilities[0][0], 1.0 / 6, 1e-15);
  EXPECT_NEAR(summary.option_probabilities[0][1], 1.0 / 6, 1e-15);
  EXPECT_NEAR(summary.option_probabilities[0][2], 1.0 / 2 + 1.0 / 6, 1e-15);
  // No start at all: the centre and uniform probabilities.
  const DistributionSummary plain = MakeDistribution().Summary();
  EXPECT_EQ(plain.gaussian->mean, Eigen::Vector3d::Constant(0.5));
  EXPECT_EQ(plain.flag_probabilities, Eigen::Vector2d::Constant(0.5));
  EXPECT_NEAR(plain.option_probabilities[0][2], 1.0 / 3, 1e-15);
}

// (g) The mixed problem reaches its optimum (f ≤ 1e-10: every discrete part right and the reals
// within 1e-5 in internal coordinates) within 20000 evaluations, for 3 seeds.
TEST(SearchDistributionTest, MixedProblemReachesItsOptimum) {
  for (uint64_t seed : {1, 2, 3}) {
    SearchDistribution d = MakeDistribution();
    RandomStream random(seed);
    double best = std::numeric_limits<double>::infinity();
    int64_t evaluations = 0;
    while (best > 1e-10 && evaluations < 20000) {
      Generation(d, random, Identity, nullptr, &best);
      evaluations += d.population_size();
    }
    EXPECT_LE(best, 1e-10) << "seed " << seed << " after " << evaluations << " evaluations";
    // The discrete blocks concentrated on the right values (up to their margins).
    const DistributionSummary summary = d.Summary();
    EXPECT_GT(summary.flag_probabilities[0], 0.5) << "seed " << seed;
    EXPECT_LT(summary.flag_probabilities[1], 0.5) << "seed " << seed;
    EXPECT_GT(summary.option_probabilities[0][1], 0.5) << "seed " << seed;
  }
}

}  // namespace
}  // namespace ogive::search
