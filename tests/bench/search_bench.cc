// ogive-bench-search: sequential ask/tell on the search core, printed as one JSON object.
//
// Protocol: real parameters bounded in [-5, 5]^n, start point uniform in [-4, 4]^n, σ0 = 2 (an
// initial_spread of 0.2 of the range), x_opt uniform in [-4, 4]^n, default population, budget 2·10^5
// evaluations. A run succeeds when f − f_opt ≤ 1e-8 (BBOB functions) or the optimum is sampled (OneMax,
// LeadingOnes, the mixed problem). `update_cost` times one update at n = 10, 100 (full covariance) and
// 1000 (diagonal) against one Eigen eigendecomposition of an n×n matrix in the same run.
//
// --grades: the graded rows instead (tests/bench/grade_rows.h).
// --noise: the noisy rows instead (tests/bench/noise_rows.h).
//
// Usage: ogive-bench-search [--seeds N] [--quick] [--grades | --noise]
#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstring>
#include <functional>
#include <string>
#include <vector>

#include "Eigen/Eigenvalues"
#include "server/search/random_stream.h"
#include "server/search/ranking.h"
#include "server/search/search_distribution.h"
#include "server/search/space.h"
#include "tests/bench/grade_rows.h"
#include "tests/bench/noise_rows.h"
#include "tests/support/problems.h"

namespace {

using ogive::search::CohortMember;
using ogive::search::DistributionOptions;
using ogive::search::Draw;
using ogive::search::Outcome;
using ogive::search::OutcomeOrder;
using ogive::search::ParameterSpec;
using ogive::search::RandomStream;
using ogive::search::SearchDistribution;
using ogive::search::Space;

constexpr long kBudget = 200000;
constexpr double kTarget = 1e-8;

Space BoxSpace(int n) {
  std::vector<ParameterSpec> specs;
  for (int j = 0; j < n; ++j) specs.push_back(ParameterSpec::Real("x" + std::to_string(j), -5, 5));
  return *Space::Create(specs);
}

struct Row {
  std::string problem;
  int n;
  std::vector<long> evals;  // -1 = failure
};

void PrintRow(const Row& row, bool first) {
  std::vector<long> ok;
  for (long e : row.evals) {
    if (e >= 0) ok.push_back(e);
  }
  std::sort(ok.begin(), ok.end());
  const double rate = static_cast<double>(ok.size()) / row.evals.size();
  double median = -1;
  if (!ok.empty()) {
    median = ok.size() % 2 ? ok[ok.size() / 2] : 0.5 * (ok[ok.size() / 2 - 1] + ok[ok.size() / 2]);
  }
  std::printf("%s\n    {\"problem\": \"%s\", \"n\": %d, \"seeds\": %zu, \"median_evals\": %.1f, \"min_evals\": %ld, "
              "\"max_evals\": %ld, \"success_rate\": %.3f}",
              first ? "" : ",", row.problem.c_str(), row.n, row.evals.size(), median, ok.empty() ? -1 : ok.front(),
              ok.empty() ? -1 : ok.back(), rate);
}

double SecondsOf(const std::function<void()>& work, int repetitions) {
  const auto start = std::chrono::steady_clock::now();
  for (int r = 0; r < repetitions; ++r) work();
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count() / repetitions;
}

// Mean wall time of one update (amortizing the lazy eigendecomposition) over one eigendecomposition.
double UpdateCostRatio(int n, bool diagonal) {
  DistributionOptions options;
  options.gaussian_model = diagonal ? ogive::search::GaussianModel::kDiagonal : ogive::search::GaussianModel::kFull;
  const Space space = BoxSpace(n);
  SearchDistribution d = *SearchDistribution::Create(space, options);
  RandomStream random(99);
  const int generations = n >= 1000 ? 60 : 200;
  std::vector<std::vector<CohortMember>> cohorts;
  std::vector<std::vector<ogive::search::TieSpan>> spans;
  // Pre-draw the cohorts so only the update is timed.
  for (int g = 0; g < generations; ++g) {
    std::vector<CohortMember> cohort;
    std::vector<Outcome> outcomes;
    for (int i = 0; i < d.population_size(); ++i) {
      const Draw draw = d.Sample(random);
      cohort.push_back({draw.x, false});
      outcomes.push_back(Outcome::Score(draw.x.squaredNorm()));
    }
    cohorts.push_back(cohort);
    spans.push_back(*ogive::search::RankCohort(outcomes, OutcomeOrder{}));
  }
  int g = 0;
  const double update = SecondsOf([&] { (void)d.Update(cohorts[g], spans[g]); ++g; }, generations);
  Eigen::MatrixXd a = Eigen::MatrixXd::Random(n, n);
  const Eigen::MatrixXd c = a * a.transpose() + Eigen::MatrixXd::Identity(n, n);
  double sink = 0;
  const double eigen = SecondsOf(
      [&] {
        Eigen::SelfAdjointEigenSolver<Eigen::MatrixXd> solver(c);
        sink += solver.eigenvalues()[0];
      },
      n >= 1000 ? 2 : 50);
  if (sink == 12345.678) std::printf(" ");
  return update / eigen;
}

}  // namespace

int main(int argc, char** argv) {
  int seeds = 15;
  bool quick = false;
  double discrete_rate = 0;  // 0 = the library default
  std::string only;          // run only problems whose name starts with this
  for (int i = 1; i < argc; ++i) {
    if (std::strcmp(argv[i], "--seeds") == 0 && i + 1 < argc) seeds = std::atoi(argv[++i]);
    if (std::strcmp(argv[i], "--quick") == 0) quick = true;
    if (std::strcmp(argv[i], "--discrete-rate") == 0 && i + 1 < argc) discrete_rate = std::atof(argv[++i]);
    if (std::strcmp(argv[i], "--only") == 0 && i + 1 < argc) only = argv[++i];
  }
  for (int i = 1; i < argc; ++i) {
    if (std::strcmp(argv[i], "--grades") == 0) return ogive::bench::RunGradeRows(seeds, quick);
    if (std::strcmp(argv[i], "--noise") == 0) return ogive::bench::RunNoiseRows(seeds, quick);
  }
  const std::vector<int> dims = quick ? std::vector<int>{10} : std::vector<int>{10, 20};
  auto wanted = [&only](const std::string& name) { return name.rfind(only, 0) == 0; };
  struct Case {
    std::string problem;
    int n;
  };
  std::vector<Case> cases;
  for (const char* f : {"f1", "f2", "f8", "f10"}) {
    for (int n : dims) cases.push_back({f, n});
  }
  cases.push_back({"onemax", 100});
  cases.push_back({"leadingones", 100});
  cases.push_back({"mixed", 10});
  std::vector<Row> rows;
  for (const Case& c : cases) {
    if (!wanted(c.problem)) continue;
    Row row{c.problem, c.n, {}};
    for (int s = 0; s < seeds; ++s) {
      ogive::testing::Problem problem = ogive::testing::MakeProblem(c.problem, c.n, 1000 + s);
      problem.options.discrete_learning_rate = discrete_rate;
      row.evals.push_back(ogive::testing::EvaluationsToTarget(problem, 7000 + s, kBudget, kTarget));
    }
    rows.push_back(row);
  }

  std::printf("{\n  \"benchmark\": \"ogive-bench-search\",\n  \"budget\": %ld,\n  \"target\": %g,\n  \"results\": [",
              kBudget, kTarget);
  for (size_t k = 0; k < rows.size(); ++k) PrintRow(rows[k], k == 0);
  std::printf("\n  ],\n  \"update_cost\": [");
  struct Cost {
    int n;
    bool diagonal;
  };
  const std::vector<Cost> costs = quick ? std::vector<Cost>{{10, false}} : std::vector<Cost>{{10, false}, {100, false}, {1000, true}};
  for (size_t k = 0; k < costs.size(); ++k) {
    std::printf("%s\n    {\"n\": %d, \"family\": \"%s\", \"ratio\": %.4g}", k ? "," : "", costs[k].n,
                costs[k].diagonal ? "diagonal" : "gaussian", UpdateCostRatio(costs[k].n, costs[k].diagonal));
  }
  std::printf("\n  ]\n}\n");
  return 0;
}
