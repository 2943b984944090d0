// ogive-bench-async: a discrete-event simulation of W workers driving one Campaign, against a synchronous
// barrier baseline on the same problems and random streams. Prints one JSON object.
//
// Workers: each evaluation takes a random duration (lognormal with σ = 1 and median 1 time unit, or a
// heavy-tailed Pareto with shape 1.5 and median 1); with probability p = 0.1 the worker vanishes during
// the trial (a fresh worker takes its place at once; the abandoned lease lapses after the lease length of
// 5 time units); with probability q = 0.05 it reports void; 5% of reports are sent a second time a
// little later (duplicates). Workers never renew, so evaluations longer than the lease arrive late.
//
// Modes:
//   engine                  the Campaign with expected_workers = W (λ = max(default, W)) and IPOP restarts,
//                           one ask per free
//                           worker, reports as they come;
//   engine-underestimated   the design says 1 worker while W = 4 λ_default work;
//   barrier                 one generation of λ = max(W, λ_default) candidates at a time on the search
//                           core, waiting for every result; lapsed (vanished or late) and void candidates
//                           are re-issued.
// Success: f − f_opt ≤ 1e-8 (or the optimum of a discrete problem) before 2·10^5 evaluations. Time is
// simulated: the figures do not depend on the machine.
//
// Usage: ogive-bench-async [--seeds N] [--quick] [--only PROBLEM] [--faults]
#include <algorithm>
#include <cmath>
#include <cstdio>
#include <cstring>
#include <queue>
#include <random>
#include <string>
#include <vector>

#include "absl/time/time.h"
#include "server/search/cma_parameters.h"
#include "server/search/random_stream.h"
#include "server/search/search_distribution.h"
#include "server/campaign/campaign.h"
#include "tests/support/problems.h"

namespace {

using ogive::search::CohortMember;
using ogive::search::Outcome;
using ogive::search::RandomStream;
using ogive::search::SearchDistribution;
using ogive::testing::Problem;

constexpr long kBudget = 200000;
constexpr double kTarget = 1e-8;
constexpr double kLease = 5.0;
constexpr double kVanish = 0.1;
constexpr double kVoid = 0.05;
constexpr double kDuplicateRate = 0.05;

// What goes wrong, and the lease length (in median evaluation times).
struct Faults {
  double vanish = kVanish;
  double void_probability = kVoid;
  double duplicate = kDuplicateRate;
  double lease = kLease;
};

enum class Durations { kLognormal, kPareto };

// The workers' random behaviour, from its own stream (separate from the campaign's).
struct WorkerModel {
  Durations durations;
  RandomStream random;
  double Duration() {
    if (durations == Durations::kLognormal) return std::exp(random.Normal());
    // Pareto with shape 1.5 and median 1: x_m 2^(1/1.5) = 1.
    const double x_m = std::pow(2.0, -1.0 / 1.5);
    return x_m / std::pow(random.Uniform(), 1.0 / 1.5);
  }
  bool Happens(double probability) { return random.Uniform() < probability; }
};

struct Result {
  bool solved = false;
  double time = 0;
  long evaluations = 0;  // completed evaluations (every report but duplicates), including voids
};

absl::Time At(double t) { return absl::UnixEpoch() + absl::Seconds(t); }

struct Event {
  double time;
  long sequence;
  enum Kind { kFree, kReport, kDuplicate } kind;
  int64_t trial;
  Outcome outcome;
  bool operator>(const Event& o) const { return time != o.time ? time > o.time : sequence > o.sequence; }
};

Result RunEngine(const Problem& problem, int workers, int expected_workers, Durations durations, uint64_t seed,
                 const Faults& faults = {}, bool surrogate = false) {
  ogive::search::DistributionOptions options = problem.options;
  options.expected_workers = expected_workers;
  ogive::campaign::CampaignOptions campaign_options;
  campaign_options.seed = seed;
  campaign_options.default_lease = absl::Seconds(faults.lease);
  campaign_options.restarts = true;  // part of the engine: a run caught in a local minimum restarts (IPOP)
  campaign_options.surrogate = surrogate;
  ogive::campaign::Campaign campaign =
      *ogive::campaign::Campaign::Create(problem.space, ogive::search::OutcomeOrder{}, options, campaign_options);
  WorkerModel model{durations, RandomStream(seed * 7919 + 1)};
  std::priority_queue<Event, std::vector<Event>, std::greater<Event>> events;
  long sequence = 0;
  for (int w = 0; w < workers; ++w) events.push({0.0, sequence++, Event::kFree, 0, {}});
  Result result;
  while (!events.empty() && result.evaluations < kBudget) {
    const Event e = events.top();
    events.pop();
    if (e.kind == Event::kFree) {
      absl::StatusOr<std::vector<ogive::campaign::Trial>> asked = campaign.Ask(1, "w", std::nullopt, At(e.time));
      if (!asked.ok()) break;  // done (converged) before reaching the target
      const ogive::campaign::Trial& t = asked->front();
      const double duration = model.Duration();
      if (model.Happens(faults.vanish)) {
        // Vanishes part-way; a fresh worker asks at once. The lease lapses on its own.
        events.push({e.time + model.random.Uniform() * duration, sequence++, Event::kFree, 0, {}});
        continue;
      }
      Outcome outcome = Outcome::Void();
      if (!model.Happens(faults.void_probability)) {
        const double gap = problem.gap(campaign.space().Decode(t.x));
        outcome = Outcome::Score(gap);
      }
      events.push({e.time + duration, sequence++, Event::kReport, t.number, outcome});
      continue;
    }
    const ogive::campaign::Report report{e.trial, e.outcome, ""};
    (void)campaign.Tell({&report, 1}, At(e.time));
    if (e.kind == Event::kDuplicate) continue;
    ++result.evaluations;
    if (e.outcome.informative() && e.outcome.score <= kTarget) {
      result.solved = true;
      result.time = e.time;
      return result;
    }
    if (model.Happens(faults.duplicate)) {
      events.push({e.time + model.random.Uniform() * 2.0, sequence++, Event::kDuplicate, e.trial, e.outcome});
    }
    events.push({e.time, sequence++, Event::kFree, 0, {}});
  }
  return result;
}

// The synchronous barrier baseline on the search core.
Result RunBarrier(const Problem& problem, int workers, Durations durations, uint64_t seed, const Faults& faults = {}) {
  ogive::search::DistributionOptions options = problem.options;
  const int lambda = std::max(workers, SearchDistribution::DefaultPopulationSize(problem.space, 1));
  options.population_size = lambda;
  SearchDistribution d = *SearchDistribution::Create(problem.space, options);
  RandomStream random(seed);
  WorkerModel model{durations, RandomStream(seed * 7919 + 1)};
  Result result;
  double now = 0;
  while (result.evaluations < kBudget) {
    std::vector<ogive::search::Draw> draws;
    for (int i = 0; i < lambda; ++i) draws.push_back(d.Sample(random));
    std::vector<double> gaps(lambda);
    for (int i = 0; i < lambda; ++i) gaps[i] = problem.gap(problem.space.Decode(draws[i].x));
    // Each candidate needs one informative result. Tasks queue for W workers; an attempt that
    // vanishes or outlasts the lease is re-issued when the lease lapses, a void one at once; the
    // first informative result of a candidate counts.
    std::vector<double> done_at(lambda, INFINITY);
    using Task = std::pair<double, int>;  // (ready time, candidate)
    std::priority_queue<Task, std::vector<Task>, std::greater<Task>> ready;
    for (int i = 0; i < lambda; ++i) ready.push({now, i});
    std::priority_queue<double, std::vector<double>, std::greater<double>> worker_free;
    for (int w = 0; w < workers; ++w) worker_free.push(now);
    while (!ready.empty()) {
      const auto [ready_time, i] = ready.top();
      ready.pop();
      if (done_at[i] <= ready_time) continue;  // an earlier attempt already delivered
      const double start = std::max(ready_time, worker_free.top());
      worker_free.pop();
      const double duration = model.Duration();
      if (model.Happens(faults.vanish)) {
        worker_free.push(start + model.random.Uniform() * duration);
        ready.push({start + faults.lease, i});
        continue;
      }
      const double finish = start + duration;
      worker_free.push(finish);
      ++result.evaluations;
      if (model.Happens(faults.void_probability)) {
        ready.push({finish, i});
        continue;
      }
      if (finish > start + faults.lease) ready.push({start + faults.lease, i});  // lapsed: re-issued meanwhile
      done_at[i] = std::min(done_at[i], finish);
      if (gaps[i] <= kTarget && (!result.solved || finish < result.time)) {
        result.solved = true;
        result.time = finish;
      }
    }
    if (result.solved) return result;
    now = *std::max_element(done_at.begin(), done_at.end());
    std::vector<CohortMember> cohort;
    std::vector<Outcome> outcomes;
    for (int i = 0; i < lambda; ++i) {
      cohort.push_back({draws[i].x, draws[i].repaired});
      outcomes.push_back(Outcome::Score(gaps[i]));
    }
    if (!d.Update(cohort, *ogive::search::RankCohort(outcomes, ogive::search::OutcomeOrder{})).ok()) break;
  }
  return result;
}

double Median(std::vector<double> v) {
  if (v.empty()) return -1;
  std::sort(v.begin(), v.end());
  return v.size() % 2 ? v[v.size() / 2] : 0.5 * (v[v.size() / 2 - 1] + v[v.size() / 2]);
}

struct Row {
  std::string problem;
  int n, workers;
  std::string mode, durations;
  int seeds;
  double median_time, median_evals, success_rate;
};

Row Summarize(const std::string& problem, int n, int workers, const std::string& mode, const std::string& durations,
              const std::vector<Result>& results) {
  std::vector<double> times, evals;
  for (const Result& r : results) {
    if (!r.solved) continue;
    times.push_back(r.time);
    evals.push_back(static_cast<double>(r.evaluations));
  }
  return {problem, n, workers, mode, durations, static_cast<int>(results.size()), Median(times), Median(evals),
          static_cast<double>(times.size()) / results.size()};
}

// --faults: vanishing workers at 0, 5% and 20% of trials (nothing else goes wrong), leases of 2 and
// 20 median evaluation times, W = 8 and W = 4 λ_default, on f1, f10 and f11 (n = 10). Each row's
// evaluations are compared with the same row without vanishing, and its time with the barrier's on
// the same faults. Prints one JSON object.
//
// The engine runs without the ordinal model (`model: off`, as when these rows were first measured),
// and again as a design's default runs it in n = 10 (`model: auto`, the model on; the barrier is the
// plain core either way). throughput_bound_ratio is the least time ratio any schedule could reach
// with the engine's evaluations: W workers finish at most W evaluations per mean evaluation time
// (e^(1/2) medians for the lognormal), so time ≥ evaluations · e^(1/2) / W.
int RunFaultRows(int seeds, bool quick) {
  struct FaultRow {
    std::string problem;
    int workers;
    double lease, vanish;
    double success_rate, median_evals, evals_ratio_to_no_vanish, time_ratio_to_barrier, barrier_success_rate;
    double throughput_bound_ratio, model_success_rate, model_median_evals, model_time_ratio_to_barrier;
  };
  std::vector<FaultRow> rows;
  const std::vector<std::string> problems = quick ? std::vector<std::string>{"f1"}
                                                  : std::vector<std::string>{"f1", "f10", "f11"};
  constexpr int kN = 10;
  const int lambda_default = ogive::search::DefaultPopulationSize(kN);
  for (const std::string& name : problems) {
    for (int workers : {8, 4 * lambda_default}) {
      for (double lease : {2.0, 20.0}) {
        double no_vanish_evals = -1;
        for (double vanish : {0.0, 0.05, 0.2}) {
          if (quick && vanish == 0.05) continue;
          Faults faults;
          faults.vanish = vanish;
          faults.void_probability = 0;
          faults.duplicate = 0;
          faults.lease = lease;
          std::vector<Result> engine, barrier, with_model;
          for (int s = 0; s < seeds; ++s) {
            const Problem problem = ogive::testing::MakeProblem(name, kN, 1000 + s);
            engine.push_back(RunEngine(problem, workers, workers, Durations::kLognormal, 7000 + s, faults));
            barrier.push_back(RunBarrier(problem, workers, Durations::kLognormal, 7000 + s, faults));
            with_model.push_back(RunEngine(problem, workers, workers, Durations::kLognormal, 7000 + s, faults, true));
          }
          const Row e = Summarize(name, kN, workers, "engine", "lognormal", engine);
          const Row b = Summarize(name, kN, workers, "barrier", "lognormal", barrier);
          const Row m = Summarize(name, kN, workers, "engine-model", "lognormal", with_model);
          if (vanish == 0) no_vanish_evals = e.median_evals;
          const double mean_duration = std::exp(0.5);  // lognormal, σ = 1, median 1
          rows.push_back({name, workers, lease, vanish, e.success_rate, e.median_evals,
                          e.median_evals / no_vanish_evals, e.median_time / b.median_time, b.success_rate,
                          e.median_evals * mean_duration / workers / b.median_time, m.success_rate, m.median_evals,
                          m.median_time / b.median_time});
        }
      }
    }
  }
  std::printf("{\n  \"benchmark\": \"ogive-bench-async --faults\",\n  \"budget\": %ld,\n  \"target\": %g,\n"
              "  \"seeds\": %d,\n  \"durations\": \"lognormal, median 1\",\n  \"rows\": [",
              kBudget, kTarget, seeds);
  for (size_t k = 0; k < rows.size(); ++k) {
    const FaultRow& r = rows[k];
    std::printf("%s\n    {\"problem\": \"%s\", \"n\": %d, \"workers\": %d, \"lease\": %g, \"vanish\": %g, "
                "\"success_rate\": %.3f, \"median_evals\": %.1f, \"evals_ratio_to_no_vanish\": %.3f, "
                "\"time_ratio_to_barrier\": %.3f, \"barrier_success_rate\": %.3f, \"throughput_bound_ratio\": %.3f, "
                "\"model_success_rate\": %.3f, \"model_median_evals\": %.1f, \"model_time_ratio_to_barrier\": %.3f}",
                k ? "," : "", r.problem.c_str(), kN, r.workers, r.lease, r.vanish, r.success_rate, r.median_evals,
                r.evals_ratio_to_no_vanish, r.time_ratio_to_barrier, r.barrier_success_rate, r.throughput_bound_ratio,
                r.model_success_rate, r.model_median_evals, r.model_time_ratio_to_barrier);
  }
  std::printf("\n  ]\n}\n");
  return 0;
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
  for (int i = 1; i < argc; ++i) {
    if (std::strcmp(argv[i], "--faults") == 0) return RunFaultRows(seeds, quick);
  }
  struct Case {
    std::string problem;
    int n;
  };
  std::vector<Case> cases = {{"f1", 10}, {"f10", 10}, {"f8", 10}, {"onemax", 100}, {"mixed", 10}};
  if (quick) cases = {{"f1", 10}};
  std::vector<Row> rows;
  struct Ratio {
    std::string problem;
    int workers;
    std::string durations;
    double time_ratio, evals_ratio;
  };
  std::vector<Ratio> ratios;
  for (const Case& c : cases) {
    if (c.problem.rfind(only, 0) != 0) continue;
    std::vector<double> sequential;
    for (int s = 0; s < seeds; ++s) {
      const long e = ogive::testing::EvaluationsToTarget(ogive::testing::MakeProblem(c.problem, c.n, 1000 + s),
                                                          7000 + s, kBudget, kTarget);
      if (e > 0) sequential.push_back(static_cast<double>(e));
    }
    const double sequential_median = Median(sequential);
    const int lambda_default = ogive::search::DefaultPopulationSize(
        ogive::testing::MakeProblem(c.problem, c.n, 1).space.size());
    std::vector<int> worker_counts = {1, lambda_default, 4 * lambda_default};
    if (quick) worker_counts = {4 * lambda_default};
    for (int workers : worker_counts) {
      for (Durations durations : {Durations::kLognormal, Durations::kPareto}) {
        // The heavy-tailed variant runs at the largest worker count only, to bound the run time.
        if (durations == Durations::kPareto && workers != 4 * lambda_default) continue;
        const std::string dname = durations == Durations::kLognormal ? "lognormal" : "pareto";
        std::vector<Result> engine, barrier, under;
        for (int s = 0; s < seeds; ++s) {
          const Problem problem = ogive::testing::MakeProblem(c.problem, c.n, 1000 + s);
          engine.push_back(RunEngine(problem, workers, workers, durations, 7000 + s));
          barrier.push_back(RunBarrier(problem, workers, durations, 7000 + s));
          if (workers == 4 * lambda_default) under.push_back(RunEngine(problem, workers, 1, durations, 7000 + s));
        }
        const Row e = Summarize(c.problem, c.n, workers, "engine", dname, engine);
        const Row b = Summarize(c.problem, c.n, workers, "barrier", dname, barrier);
        rows.push_back(e);
        rows.push_back(b);
        if (!under.empty()) rows.push_back(Summarize(c.problem, c.n, workers, "engine-underestimated", dname, under));
        ratios.push_back({c.problem, workers, dname, e.median_time / b.median_time, e.median_evals / sequential_median});
      }
    }
  }
  std::printf("{\n  \"benchmark\": \"ogive-bench-async\",\n  \"budget\": %ld,\n  \"target\": %g,\n"
              "  \"lease\": %g,\n  \"vanish_probability\": %g,\n  \"void_probability\": %g,\n"
              "  \"duplicate_fraction\": %g,\n  \"results\": [",
              kBudget, kTarget, kLease, kVanish, kVoid, kDuplicateRate);
  for (size_t k = 0; k < rows.size(); ++k) {
    const Row& r = rows[k];
    std::printf("%s\n    {\"problem\": \"%s\", \"n\": %d, \"workers\": %d, \"mode\": \"%s\", \"durations\": \"%s\", "
                "\"seeds\": %d, \"median_time\": %.2f, \"median_evals\": %.1f, \"success_rate\": %.3f}",
                k ? "," : "", r.problem.c_str(), r.n, r.workers, r.mode.c_str(), r.durations.c_str(), r.seeds,
                r.median_time, r.median_evals, r.success_rate);
  }
  std::printf("\n  ],\n  \"ratios\": [");
  for (size_t k = 0; k < ratios.size(); ++k) {
    const Ratio& r = ratios[k];
    std::printf("%s\n    {\"problem\": \"%s\", \"workers\": %d, \"durations\": \"%s\", \"time_ratio\": %.3f, "
                "\"evals_ratio\": %.3f}",
                k ? "," : "", r.problem.c_str(), r.workers, r.durations.c_str(), r.time_ratio, r.evals_ratio);
  }
  std::printf("\n  ]\n}\n");
  return 0;
}
