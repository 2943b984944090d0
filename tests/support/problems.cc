#include "tests/support/problems.h"

#include <cmath>
#include <memory>
#include <random>
#include <vector>

#include "server/base/check.h"
#include "server/search/random_stream.h"
#include "server/search/ranking.h"
#include "tests/support/bbob.h"
#include "tests/support/discrete_problems.h"

namespace ogive::testing {
namespace {

using search::Candidate;
using search::ParameterSpec;

search::Space BoxSpace(int n) {
  std::vector<ParameterSpec> specs;
  for (int j = 0; j < n; ++j) specs.push_back(ParameterSpec::Real("x" + std::to_string(j), -5, 5));
  return *search::Space::Create(specs);
}

search::Space FlagSpace(int n) {
  std::vector<ParameterSpec> specs;
  for (int j = 0; j < n; ++j) specs.push_back(ParameterSpec::Flag("b" + std::to_string(j)));
  return *search::Space::Create(specs);
}

std::vector<int> Bits(const Candidate& c) {
  std::vector<int> bits;
  for (const auto& v : c) bits.push_back(std::get<bool>(v) ? 1 : 0);
  return bits;
}

// A simulated solver farm's settings tuned for run time (invented for benchmarks): four reals
// (relaxation, tolerance exponent, two load-balance weights) in a quadratic bowl, a mesh level 1..8,
// a thread count 1..32, three on/off options and a preconditioner among four. Its minimum 0 is at one
// point; every wrong integer, flag or preconditioner costs at least 0.05.
Problem SolverFarm(uint64_t seed) {
  std::mt19937_64 rng(seed);
  std::uniform_real_distribution<double> uniform(-4, 4);
  std::vector<ParameterSpec> specs;
  for (const char* name : {"relaxation", "tolerance_exp", "balance_a", "balance_b"}) {
    specs.push_back(ParameterSpec::Real(name, -5, 5));
  }
  specs.push_back(ParameterSpec::Integer("mesh_level", 1, 8));
  specs.push_back(ParameterSpec::Integer("threads", 1, 32));
  for (const char* name : {"multigrid", "reorder", "warm_start"}) specs.push_back(ParameterSpec::Flag(name));
  specs.push_back(ParameterSpec::Categorical("preconditioner", {"jacobi", "ilu", "amg", "none"}));
  auto opt = std::make_shared<std::vector<double>>();
  for (int j = 0; j < 4; ++j) opt->push_back(uniform(rng));
  Problem p{"mixed", 10, *search::Space::Create(specs), {}, nullptr};
  p.gap = [opt](const Candidate& c) {
    double f = 0;
    for (int j = 0; j < 4; ++j) f += std::pow(std::get<double>(c[j]) - (*opt)[j], 2);
    f += 0.1 * std::abs(std::get<int64_t>(c[4]) - 6) + 0.05 * std::abs(std::get<int64_t>(c[5]) - 12);
    f += (std::get<bool>(c[6]) ? 0 : 0.5) + (std::get<bool>(c[7]) ? 0.3 : 0) + (std::get<bool>(c[8]) ? 0 : 0.2);
    const std::string& pre = std::get<std::string>(c[9]);
    f += pre == "amg" ? 0 : pre == "ilu" ? 0.4 : 1.0;
    return f;
  };
  return p;
}

}  // namespace

Problem MakeProblem(const std::string& name, int n, uint64_t seed) {
  if (name == "mixed") return SolverFarm(seed);
  if (name == "onemax" || name == "leadingones") {
    Problem p{name, n, FlagSpace(n), {}, nullptr};
    const bool onemax = name == "onemax";
    p.gap = [n, onemax](const Candidate& c) {
      const std::vector<int> bits = Bits(c);
      return static_cast<double>(n - (onemax ? OneMax(bits) : LeadingOnes(bits)));
    };
    return p;
  }
  OGIVE_CHECK(name.size() > 1 && name[0] == 'f');
  const int id = std::stoi(name.substr(1));
  auto f = std::make_shared<BbobFunction>(BbobFunction::Create(id, n, seed));
  Problem p{name, n, BoxSpace(n), {}, nullptr};
  std::mt19937_64 rng(seed ^ 0x5bd1e995u);
  std::uniform_real_distribution<double> start(-4, 4);
  p.options.initial_spread = 0.2;
  p.options.start.assign(n, std::nullopt);
  for (int j = 0; j < n; ++j) p.options.start[j] = (start(rng) + 5) / 10;
  p.gap = [f](const Candidate& c) {
    Eigen::VectorXd x(c.size());
    for (size_t j = 0; j < c.size(); ++j) x[j] = std::get<double>(c[j]);
    return (*f)(x) - f->f_opt();
  };
  return p;
}

long EvaluationsToTarget(const Problem& problem, uint64_t seed, long budget, double target) {
  search::SearchDistribution d = *search::SearchDistribution::Create(problem.space, problem.options);
  search::RandomStream random(seed);
  long evaluations = 0;
  while (evaluations < budget) {
    std::vector<search::CohortMember> cohort;
    std::vector<search::Outcome> outcomes;
    for (int i = 0; i < d.population_size(); ++i) {
      const search::Draw draw = d.Sample(random);
      const double gap = problem.gap(problem.space.Decode(draw.x));
      ++evaluations;
      if (gap <= target) return evaluations;
      cohort.push_back({draw.x, draw.repaired});
      outcomes.push_back(search::Outcome::Score(gap));
    }
    if (!d.Update(cohort, *search::RankCohort(outcomes, search::OutcomeOrder{})).ok()) return -1;
  }
  return -1;
}

}  // namespace ogive::testing
