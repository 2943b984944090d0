// Benchmark problems over whole search spaces, shared by the benchmarks and the engine's tests:
// BBOB functions on a box, OneMax and LeadingOnes on flags, and a mixed problem of our own (a simulated
// solver farm). Each gives a space, start options per the benchmark protocol, and f − f_opt of a
// candidate (0 at the optimum).
#ifndef OGIVE_TESTS_SUPPORT_PROBLEMS_H_
#define OGIVE_TESTS_SUPPORT_PROBLEMS_H_

#include <cstdint>
#include <functional>
#include <string>

#include "server/search/search_distribution.h"
#include "server/search/space.h"

namespace ogive::testing {

struct Problem {
  std::string name;  // "f1", "f2", "f8", "f10", "f11", "f15", "onemax", "leadingones", "mixed"
  int n = 0;         // number of parameters
  search::Space space;
  search::DistributionOptions options;                 // start point and spread of the protocol
  std::function<double(const search::Candidate&)> gap;  // f − f_opt, >= 0
};

// The protocol of ogive-bench-search: BBOB functions with real parameters in [−5, 5]^n, a start point
// uniform in [−4, 4]^n and σ0 = 2 (initial spread 0.2); x_opt uniform in [−4, 4]^n; the discrete
// problems with n flags; "mixed" ignores n (it has 10 parameters). The instance and the start point
// are drawn from `seed`. Aborts on an unknown name.
Problem MakeProblem(const std::string& name, int n, uint64_t seed);

// The plain sequential core on a problem: sample λ, evaluate, rank, update, until f − f_opt ≤ target.
// Returns the evaluations used, or -1 when the budget ran out or the distribution degenerated (a
// restart is the campaign engine's business, not the core's).
long EvaluationsToTarget(const Problem& problem, uint64_t seed, long budget, double target);

}  // namespace ogive::testing

#endif  // OGIVE_TESTS_SUPPORT_PROBLEMS_H_
