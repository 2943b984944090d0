// ogive-bench-budget: the search at the budgets of expensive experiments (tens to a few hundred
// evaluations), with and without the ordinal surrogate (CampaignOptions::surrogate), printed as one
// JSON object.
//
// Protocol (that of ogive-bench-search): BBOB functions (Hansen, Finck, Ros, Auger, INRIA RR-6829;
// definitions from memory, tests/support/bbob.h) f1 sphere, f2 separable ellipsoid (condition 10⁶),
// f10 rotated ellipsoid (condition 10⁶), f8 Rosenbrock, f15 rotated Rastrigin; real parameters in
// [−5, 5]^n, start uniform in [−4, 4]^n, σ0 = 0.2 of the range, x_opt uniform in [−4, 4]^n; n = 2, 5
// (budgets 50 and 100) and 10 (100 and 200); IPOP restarts on. A run's result at a budget is the
// best f − f_opt among the first `budget` outcomes, floored at 10⁻⁸. Modes, on the same instances:
//   off        the campaign engine without the model, one trial at a time;
//   model      the same engine with the model, one trial at a time;
//   model-w8   the engine with the model and 8 asynchronous workers (evaluation times lognormal,
//              σ = 1), its result read at 1.5× the budget;
//   uniform    uniform random points in the box.
// Rows give the median and quartiles over seeds (log10) and off/model as a ratio of medians. A second
// table gives the evaluations to f − f_opt ≤ 10⁻⁸ on f1, f2, f10 (n = 10) with and without the model.
// A third ("graded") runs the sphere and Rosenbrock seen only through a scale of 7 grades whose cut
// points are geometric, a decade apart, from the gap at the start point down (c_j = f_0 10^(1−j),
// j = 1..6; the grade is the number of cuts the gap is below): one trial at a time, without the model
// (as `model: auto` runs a graded design) and with it (`model: on`), against the same campaign given
// exact scores with the model; each reports the best true gap among the evaluated points.
//
// Usage: ogive-bench-budget [--seeds N] [--quick] [--only PREFIX]
#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstring>
#include <queue>
#include <string>
#include <vector>

#include "absl/time/time.h"
#include "server/campaign/campaign.h"
#include "server/campaign/surrogate_step.h"
#include "server/search/random_stream.h"
#include "tests/support/problems.h"

namespace {

using ogive::campaign::Campaign;
using ogive::campaign::CampaignOptions;
using ogive::campaign::Report;
using ogive::campaign::Trial;
using ogive::search::Outcome;
using ogive::search::RandomStream;
using ogive::testing::Problem;

constexpr double kFloor = 1e-8;

// The graded rows' scale: grade = how many of the cut points c_1 > ... > c_{L−1} the gap is below.
struct GradeScale {
  std::vector<double> cuts;
  int Grade(double gap) const {
    int g = 0;
    for (double c : cuts) g += gap < c;
    return g;
  }
  int levels() const { return static_cast<int>(cuts.size()) + 1; }
};

// Seven grades, cut points a decade apart from f_0 = the gap at the start point down.
GradeScale ScaleFor(const Problem& problem) {
  Eigen::VectorXd start = problem.space.Center();
  for (size_t i = 0; i < problem.options.start.size(); ++i) {
    if (problem.options.start[i].has_value()) start[static_cast<Eigen::Index>(i)] = *problem.options.start[i];
  }
  const double f0 = problem.gap(problem.space.Decode(start));
  GradeScale scale;
  for (int j = 1; j <= 6; ++j) scale.cuts.push_back(f0 * std::pow(10.0, 1 - j));
  return scale;
}

// Best gaps after each informative outcome (index k: the best of the first k + 1). Reports grades on
// `graded` when given, else the gap as a score.
std::vector<double> Run(const Problem& problem, bool surrogate, int workers, long budget, uint64_t seed,
                        const GradeScale* graded = nullptr) {
  CampaignOptions options;
  options.seed = seed;
  options.restarts = true;
  options.surrogate = surrogate;
  ogive::search::DistributionOptions distribution = problem.options;
  distribution.expected_workers = workers;
  ogive::search::OutcomeOrder order;
  if (graded != nullptr) {
    order.graded = true;
    order.grade_count = graded->levels();
  }
  Campaign c = *Campaign::Create(problem.space, order, distribution, options);
  std::vector<double> best;
  RandomStream times(seed ^ 0x5851f42d4c957f2du);
  struct Pending {
    double done;
    Trial trial;
    bool operator<(const Pending& o) const { return done > o.done; }
  };
  std::priority_queue<Pending> running;
  double clock = 0;
  auto ask = [&]() -> bool {
    absl::StatusOr<std::vector<Trial>> asked = c.Ask(1, "w", std::nullopt, absl::FromUnixSeconds(0) + absl::Seconds(clock));
    if (!asked.ok()) return false;
    const double duration = workers == 1 ? 1.0 : std::exp(times.Normal());
    running.push({clock + duration, asked->front()});
    return true;
  };
  for (int w = 0; w < workers; ++w) {
    if (!ask()) break;
  }
  while (!running.empty() && static_cast<long>(best.size()) < budget) {
    Pending p = running.top();
    running.pop();
    clock = p.done;
    const double gap = problem.gap(problem.space.Decode(p.trial.x));
    best.push_back(std::max(kFloor, best.empty() ? gap : std::min(best.back(), gap)));
    const Report report{p.trial.number, graded != nullptr ? Outcome::Grade(graded->Grade(gap)) : Outcome::Score(gap), ""};
    (void)c.Tell({&report, 1}, absl::FromUnixSeconds(0) + absl::Seconds(clock));
    ask();
  }
  while (static_cast<long>(best.size()) < budget) best.push_back(best.empty() ? INFINITY : best.back());
  return best;
}

// Evaluations until f − f_opt ≤ 10⁻⁸, one trial at a time (INFINITY past 10⁵).
double EvaluationsToFloor(const Problem& problem, bool surrogate, uint64_t seed) {
  CampaignOptions options;
  options.seed = seed;
  options.restarts = true;
  options.surrogate = surrogate;
  Campaign c = *Campaign::Create(problem.space, ogive::search::OutcomeOrder{}, problem.options, options);
  for (long k = 1; k <= 100000; ++k) {
    absl::StatusOr<std::vector<Trial>> asked = c.Ask(1, "w", std::nullopt, absl::FromUnixSeconds(k));
    if (!asked.ok()) break;
    const double gap = problem.gap(problem.space.Decode(asked->front().x));
    if (gap <= kFloor) return static_cast<double>(k);
    const Report report{asked->front().number, Outcome::Score(gap), ""};
    (void)c.Tell({&report, 1}, absl::FromUnixSeconds(k));
  }
  return INFINITY;
}

// Wall time of one refit of the model (a full window of a campaign in n dimensions), milliseconds,
// median of 5.
double FitMilliseconds(int n) {
  const Problem problem = ogive::testing::MakeProblem("f10", n, 77);
  const ogive::search::SearchDistribution d = *ogive::search::SearchDistribution::Create(problem.space, problem.options);
  RandomStream random(5);
  std::vector<ogive::campaign::ModelPoint> window;
  for (int k = 0; k < ogive::campaign::ModelWindow(n, d.population_size()); ++k) {
    Eigen::VectorXd x = d.Sample(random).x;
    window.push_back({x, Outcome::Score(problem.gap(problem.space.Decode(x)))});
  }
  std::vector<double> ms;
  for (int r = 0; r < 5; ++r) {
    const auto start = std::chrono::steady_clock::now();
    auto model = ogive::campaign::FitModel(*d.gaussian(), window, ogive::search::OutcomeOrder{});
    ms.push_back(std::chrono::duration<double, std::milli>(std::chrono::steady_clock::now() - start).count());
    if (model == nullptr) return -1;
  }
  std::sort(ms.begin(), ms.end());
  return ms[2];
}

double UniformBest(const Problem& problem, long budget, uint64_t seed) {
  RandomStream random(seed);
  Eigen::VectorXd x(problem.space.size());
  double best = INFINITY;
  for (long k = 0; k < budget; ++k) {
    for (int j = 0; j < x.size(); ++j) x[j] = random.Uniform();
    best = std::min(best, problem.gap(problem.space.Decode(x)));
  }
  return std::max(best, kFloor);
}

// Quartile q (0.25, 0.5, 0.75) of log10 values, by linear interpolation between order statistics.
double Quantile(std::vector<double> v, double q) {
  std::sort(v.begin(), v.end());
  const double at = q * (v.size() - 1);
  const size_t lo = static_cast<size_t>(std::floor(at));
  const size_t hi = std::min(v.size() - 1, lo + 1);
  return std::log10(v[lo]) + (at - lo) * (std::log10(v[hi]) - std::log10(v[lo]));
}

void PrintStats(const char* name, const std::vector<double>& v, bool last) {
  std::printf("\"%s\": [%.2f, %.2f, %.2f]%s", name, Quantile(v, 0.25), Quantile(v, 0.5), Quantile(v, 0.75),
              last ? "" : ", ");
}

}  // namespace

int main(int argc, char** argv) {
  int seeds = 11;
  bool quick = false;
  std::string only;
  for (int i = 1; i < argc; ++i) {
    if (std::strcmp(argv[i], "--seeds") == 0 && i + 1 < argc) seeds = std::atoi(argv[++i]);
    if (std::strcmp(argv[i], "--quick") == 0) quick = true;
    if (std::strcmp(argv[i], "--only") == 0 && i + 1 < argc) only = argv[++i];
  }
  struct Case {
    const char* problem;
    int n;
  };
  std::vector<Case> cases;
  for (const char* f : {"f1", "f2", "f10", "f8", "f15"}) {
    for (int n : {2, 5, 10}) cases.push_back({f, n});
  }
  if (quick) cases = {{"f1", 2}};
  std::printf("{\n  \"benchmark\": \"ogive-bench-budget\",\n  \"seeds\": %d,\n  \"rows\": [", seeds);
  bool first = true;
  for (const Case& c : cases) {
    if (only == "none" || std::string(c.problem).rfind(only, 0) != 0) continue;
    const std::vector<long> budgets = c.n == 10 ? std::vector<long>{100, 200} : std::vector<long>{50, 100};
    const long longest = budgets.back();
    std::vector<std::vector<double>> off(seeds), model(seeds), async(seeds);
    std::vector<std::vector<double>> uniform(budgets.size());
    for (int s = 0; s < seeds; ++s) {
      const Problem problem = ogive::testing::MakeProblem(c.problem, c.n, 1000 + s);
      off[s] = Run(problem, false, 1, longest, 7000 + s);
      model[s] = Run(problem, true, 1, longest, 7000 + s);
      async[s] = Run(problem, true, 8, longest * 3 / 2, 7000 + s);
      for (size_t b = 0; b < budgets.size(); ++b) uniform[b].push_back(UniformBest(problem, budgets[b], 9000 + s));
    }
    for (size_t b = 0; b < budgets.size(); ++b) {
      const long budget = budgets[b];
      std::vector<double> at_off, at_model, at_async;
      for (int s = 0; s < seeds; ++s) {
        at_off.push_back(off[s][budget - 1]);
        at_model.push_back(model[s][budget - 1]);
        at_async.push_back(async[s][budget * 3 / 2 - 1]);
      }
      std::printf("%s\n    {\"problem\": \"%s\", \"n\": %d, \"budget\": %ld, ", first ? "" : ",", c.problem, c.n, budget);
      first = false;
      PrintStats("off", at_off, false);
      PrintStats("model", at_model, false);
      PrintStats("model_w8_at_1.5x", at_async, false);
      PrintStats("uniform", uniform[b], false);
      std::printf("\"off_over_model\": %.3g, \"off_over_model_w8\": %.3g}",
                  std::pow(10, Quantile(at_off, 0.5) - Quantile(at_model, 0.5)),
                  std::pow(10, Quantile(at_off, 0.5) - Quantile(at_async, 0.5)));
      std::fflush(stdout);
    }
  }
  std::printf("\n  ],\n  \"graded\": [");
  first = true;
  for (const Case& c : cases) {
    if (std::strcmp(c.problem, "f1") != 0 && std::strcmp(c.problem, "f8") != 0) continue;
    if (only == "none" || std::string(c.problem).rfind(only, 0) != 0) continue;
    const std::vector<long> budgets = c.n == 10 ? std::vector<long>{100, 200} : std::vector<long>{50, 100};
    const long longest = budgets.back();
    std::vector<std::vector<double>> off(seeds), model(seeds), exact(seeds);
    for (int s = 0; s < seeds; ++s) {
      const Problem problem = ogive::testing::MakeProblem(c.problem, c.n, 1000 + s);
      const GradeScale scale = ScaleFor(problem);
      off[s] = Run(problem, false, 1, longest, 7000 + s, &scale);
      model[s] = Run(problem, true, 1, longest, 7000 + s, &scale);
      exact[s] = Run(problem, true, 1, longest, 7000 + s);
    }
    for (const long budget : budgets) {
      std::vector<double> at_off, at_model, at_exact;
      for (int s = 0; s < seeds; ++s) {
        at_off.push_back(off[s][budget - 1]);
        at_model.push_back(model[s][budget - 1]);
        at_exact.push_back(exact[s][budget - 1]);
      }
      std::printf("%s\n    {\"problem\": \"%s\", \"n\": %d, \"budget\": %ld, \"grades\": 7, ", first ? "" : ",",
                  c.problem, c.n, budget);
      first = false;
      PrintStats("graded_off", at_off, false);
      PrintStats("graded_model", at_model, false);
      PrintStats("exact_model", at_exact, false);
      std::printf("\"off_over_model\": %.3g}", std::pow(10, Quantile(at_off, 0.5) - Quantile(at_model, 0.5)));
      std::fflush(stdout);
    }
  }
  std::printf("\n  ],\n  \"to_1e-8\": [");
  first = true;
  for (const char* f : {"f1", "f2", "f10"}) {
    if (quick && std::strcmp(f, "f1") != 0) continue;
    if (std::string(f).rfind(only, 0) != 0) continue;
    const int n = quick ? 2 : 10;
    std::vector<double> evals_off, evals_model;
    for (int s = 0; s < seeds; ++s) {
      const Problem problem = ogive::testing::MakeProblem(f, n, 1000 + s);
      evals_off.push_back(EvaluationsToFloor(problem, false, 7000 + s));
      evals_model.push_back(EvaluationsToFloor(problem, true, 7000 + s));
    }
    std::sort(evals_off.begin(), evals_off.end());
    std::sort(evals_model.begin(), evals_model.end());
    const double median_off = evals_off[evals_off.size() / 2], median_model = evals_model[evals_model.size() / 2];
    std::printf("%s\n    {\"problem\": \"%s\", \"n\": %d, \"off\": %.0f, \"model\": %.0f, \"model_over_off\": %.3g}",
                first ? "" : ",", f, n, median_off, median_model, median_model / median_off);
    first = false;
    std::fflush(stdout);
  }
  std::printf("\n  ],\n  \"fit_ms\": [");
  const std::vector<int> fit_dims = quick ? std::vector<int>{2} : std::vector<int>{2, 5, 10, 20, 40};
  for (size_t k = 0; k < fit_dims.size(); ++k) {
    const int n = fit_dims[k];
    std::printf("%s\n    {\"n\": %d, \"window\": %d, \"ms\": %.3g}", k ? "," : "", n,
                ogive::campaign::ModelWindow(n, ogive::search::SearchDistribution::DefaultPopulationSize(
                                                    ogive::testing::MakeProblem("f1", n, 1).space, 1)),
                FitMilliseconds(n));
    std::fflush(stdout);
  }
  std::printf("\n  ]\n}\n");
  return 0;
}
