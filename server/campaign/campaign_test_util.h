// Helpers shared by the campaign engine's tests: spaces, a fixed clock origin, bit-exact comparisons
// of engine states and trials, and a sequential ask/tell driver over a function of the user's
// values.
#ifndef OGIVE_SERVER_CAMPAIGN_CAMPAIGN_TEST_UTIL_H_
#define OGIVE_SERVER_CAMPAIGN_CAMPAIGN_TEST_UTIL_H_

#include <algorithm>
#include <cstdint>
#include <functional>
#include <iterator>
#include <map>
#include <optional>
#include <random>
#include <string>
#include <utility>
#include <variant>
#include <vector>

#include "Eigen/Core"
#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "absl/strings/str_cat.h"
#include "absl/time/time.h"
#include "gtest/gtest.h"
#include "server/search/ranking.h"
#include "server/search/search_distribution.h"
#include "server/search/space.h"
#include "server/campaign/campaign.h"
#include "server/campaign/campaign_options.h"
#include "server/campaign/trial.h"

namespace ogive::campaign::test_util {

inline constexpr search::OutcomeOrder kMinimize{false, search::Direction::kLowerIsBetter, 0};

// The clock origin of every test: time is an input, so any fixed instant will do.
inline absl::Time Origin() { return absl::FromUnixSeconds(1'700'000'000); }

// n real parameters x0..x{n-1} on [low, high].
inline search::Space RealSpace(int n, double low, double high) {
  std::vector<search::ParameterSpec> p;
  for (int i = 0; i < n; ++i) {
    p.push_back(search::ParameterSpec::Real(absl::StrCat("x", i), low, high));
  }
  absl::StatusOr<search::Space> space = search::Space::Create(std::move(p));
  EXPECT_TRUE(space.ok()) << space.status();
  return *std::move(space);
}

// A small space with every kind of parameter: two reals, an integer, a flag and a categorical.
inline search::Space MixedSpace() {
  absl::StatusOr<search::Space> space = search::Space::Create({
      search::ParameterSpec::Real("a", -1.0, 1.0),
      search::ParameterSpec::Integer("k", 0, 6),
      search::ParameterSpec::Flag("f"),
      search::ParameterSpec::Real("b", 1e-3, 1.0, /*log=*/true),
      search::ParameterSpec::Categorical("c", {"red", "green", "blue"}),
  });
  EXPECT_TRUE(space.ok()) << space.status();
  return *std::move(space);
}

// Creates a campaign or fails the test (and returns a campaign on a one-parameter space so the caller can
// go on without crashing; the failure is already recorded).
inline Campaign MakeCampaign(const search::Space& space, const search::OutcomeOrder& order,
                       const search::DistributionOptions& distribution_options,
                       const CampaignOptions& options) {
  absl::StatusOr<Campaign> campaign = Campaign::Create(space, order, distribution_options, options);
  EXPECT_TRUE(campaign.ok()) << campaign.status();
  if (campaign.ok()) return *std::move(campaign);
  return *Campaign::Create(RealSpace(1, 0, 1), kMinimize, {}, {});
}

// The real coordinates of a candidate in the user's units (every parameter must be real).
inline Eigen::VectorXd UserPoint(const search::Space& space, const Eigen::VectorXd& internal) {
  const search::Candidate c = space.Decode(internal);
  Eigen::VectorXd x(space.size());
  for (int i = 0; i < space.size(); ++i) x[i] = std::get<double>(c[i]);
  return x;
}

inline bool SameOutcome(const search::Outcome& a, const search::Outcome& b) {
  return a.kind == b.kind && a.score == b.score && a.grade == b.grade;
}

// Bit-for-bit equality of distribution states (Eigen's == compares exactly).
inline void ExpectSameDistribution(const search::DistributionState& a,
                                   const search::DistributionState& b) {
  EXPECT_EQ(a.population_size, b.population_size);
  ASSERT_EQ(a.gaussian.has_value(), b.gaussian.has_value());
  if (a.gaussian) {
    const search::GaussianState& g = *a.gaussian;
    const search::GaussianState& h = *b.gaussian;
    EXPECT_EQ(g.diagonal, h.diagonal);
    EXPECT_EQ(g.population_size, h.population_size);
    EXPECT_TRUE(g.mean == h.mean) << g.mean.transpose() << "\nvs\n" << h.mean.transpose();
    EXPECT_EQ(g.sigma, h.sigma);
    EXPECT_TRUE(g.covariance == h.covariance);
    EXPECT_TRUE(g.p_sigma == h.p_sigma);
    EXPECT_TRUE(g.p_c == h.p_c);
    EXPECT_TRUE(g.eigenvectors == h.eigenvectors);
    EXPECT_TRUE(g.eigenvalues == h.eigenvalues);
    EXPECT_EQ(g.generation, h.generation);
    EXPECT_EQ(g.eigen_generation, h.eigen_generation);
    EXPECT_EQ(g.integer_levels, h.integer_levels);
    EXPECT_TRUE(g.margin_scale == h.margin_scale);
  }
  ASSERT_EQ(a.bernoulli.has_value(), b.bernoulli.has_value());
  if (a.bernoulli) {
    EXPECT_TRUE(a.bernoulli->probabilities == b.bernoulli->probabilities);
    EXPECT_EQ(a.bernoulli->learning_rate, b.bernoulli->learning_rate);
    EXPECT_EQ(a.bernoulli->margin, b.bernoulli->margin);
  }
  ASSERT_EQ(a.categorical.has_value(), b.categorical.has_value());
  if (a.categorical) {
    ASSERT_EQ(a.categorical->probabilities.size(), b.categorical->probabilities.size());
    for (size_t j = 0; j < a.categorical->probabilities.size(); ++j) {
      EXPECT_TRUE(a.categorical->probabilities[j] == b.categorical->probabilities[j]);
    }
    EXPECT_EQ(a.categorical->learning_rate, b.categorical->learning_rate);
    EXPECT_EQ(a.categorical->margin, b.categorical->margin);
  }
}

inline void ExpectSameEngine(const EngineState& a, const EngineState& b) {
  EXPECT_EQ(a.phase, b.phase);
  EXPECT_EQ(a.reason, b.reason);
  EXPECT_EQ(a.phase_message, b.phase_message);
  EXPECT_EQ(a.random, b.random);
  EXPECT_EQ(a.generation, b.generation);
  EXPECT_EQ(a.epoch, b.epoch);
  EXPECT_EQ(a.next_trial, b.next_trial);
  EXPECT_EQ(a.report_sequence, b.report_sequence);
  EXPECT_EQ(a.informative, b.informative);
  EXPECT_EQ(a.base_population, b.base_population);
  EXPECT_EQ(a.flat_generations, b.flat_generations);
  EXPECT_EQ(a.peak_outstanding, b.peak_outstanding);
  EXPECT_EQ(a.evaluation_seconds, b.evaluation_seconds);
  EXPECT_EQ(a.epoch_best_trial, b.epoch_best_trial);
  EXPECT_EQ(a.last_mixed_generation, b.last_mixed_generation);
  EXPECT_EQ(a.best_trial, b.best_trial);
  EXPECT_EQ(a.sigma0, b.sigma0);
  EXPECT_EQ(a.noise_rank_change, b.noise_rank_change);
  EXPECT_EQ(a.noise_population, b.noise_population);
  EXPECT_EQ(a.replicate_credit, b.replicate_credit);
  EXPECT_EQ(a.confirm_trial, b.confirm_trial);
  EXPECT_EQ(a.stagnation_trial, b.stagnation_trial);
  EXPECT_EQ(a.stagnation_generation, b.stagnation_generation);
  EXPECT_EQ(a.model_agreement, b.model_agreement);
  ASSERT_NE(a.distribution, nullptr);
  ASSERT_NE(b.distribution, nullptr);
  ExpectSameDistribution(a.distribution->state(), b.distribution->state());
}

// Every field of two trial records, the sample bit for bit.
inline void ExpectSameTrial(const Trial& a, const Trial& b) {
  EXPECT_EQ(a.number, b.number);
  EXPECT_EQ(a.generation, b.generation);
  EXPECT_EQ(a.epoch, b.epoch);
  EXPECT_TRUE(a.x == b.x) << "trial " << a.number << ": " << a.x.transpose() << " vs "
                          << b.x.transpose();
  EXPECT_EQ(a.repaired, b.repaired);
  EXPECT_EQ(a.state, b.state);
  EXPECT_EQ(a.worker, b.worker);
  EXPECT_EQ(a.leased_at, b.leased_at);
  EXPECT_EQ(a.lease_deadline, b.lease_deadline);
  ASSERT_EQ(a.outcome.has_value(), b.outcome.has_value());
  if (a.outcome) {
    EXPECT_TRUE(SameOutcome(*a.outcome, *b.outcome));
  }
  EXPECT_EQ(a.note, b.note);
  EXPECT_EQ(a.reported_by, b.reported_by);
  EXPECT_EQ(a.reported_at, b.reported_at);
  EXPECT_EQ(a.report_sequence, b.report_sequence);
  EXPECT_EQ(a.late, b.late);
  EXPECT_EQ(a.use, b.use);
  EXPECT_EQ(a.consumed_by, b.consumed_by);
  EXPECT_EQ(a.replicate_of, b.replicate_of);
  EXPECT_EQ(a.replicates_wanted, b.replicates_wanted);
  EXPECT_EQ(a.screened_from, b.screened_from);
}

inline void ExpectSameCampaign(const Campaign& a, const Campaign& b) {
  ExpectSameEngine(a.engine(), b.engine());
  ASSERT_EQ(a.trial_count(), b.trial_count());
  for (int64_t k = 1; k <= a.trial_count(); ++k) ExpectSameTrial(*a.trial(k), *b.trial(k));
}

// The result of a sequential run.
struct RunResult {
  int64_t evaluations = 0;  // outcomes reported
  int64_t reached_at = -1;  // evaluations when `reached` first held, -1 if never
  bool done = false;        // the campaign ended by itself
};

// Drives a campaign sequentially: ask λ (the current population size), evaluate every candidate with
// `f`, tell them all at once, one second later; until the campaign is done, `reached` holds for an
// outcome (when `stop_when_reached`), or `max_evaluations` outcomes were reported.
inline RunResult RunSequential(Campaign& campaign, const std::function<search::Outcome(const Trial&)>& f,
                               int64_t max_evaluations,
                               const std::function<bool(const search::Outcome&)>& reached,
                               bool stop_when_reached) {
  RunResult r;
  absl::Time now = Origin();
  while (r.evaluations < max_evaluations && campaign.engine().phase == Phase::kOpen) {
    const int lambda = campaign.distribution().population_size();
    absl::StatusOr<std::vector<Trial>> asked = campaign.Ask(lambda, "w", std::nullopt, now);
    if (!asked.ok()) {
      ADD_FAILURE() << asked.status();
      break;
    }
    std::vector<Report> reports;
    for (const Trial& t : *asked) {
      Report report;
      report.trial = t.number;
      report.outcome = f(t);
      if (r.reached_at < 0 && reached(report.outcome)) r.reached_at = r.evaluations + 1;
      ++r.evaluations;
      reports.push_back(std::move(report));
    }
    now += absl::Seconds(1);
    absl::StatusOr<std::vector<ReportResult>> told = campaign.Tell(reports, now);
    if (!told.ok()) {
      ADD_FAILURE() << told.status();
      break;
    }
    if (stop_when_reached && r.reached_at >= 0) break;
  }
  r.done = campaign.engine().phase == Phase::kDone;
  return r;
}

// Plays random event sequences on a campaign (asks by several workers with random lease lengths,
// reports of random trials in any order, late reports, voids, infeasibles, duplicates, different
// outcomes, reports to unknown trials, renewals, sweeps, optional pauses) with random time
// advances, from its own seeded generator. It keeps its own model of what it was told and checks
// each reply against the engine's contract with EXPECTs. Two drivers with the same seed play the
// same events on two campaigns that behave the same.
class EventDriver {
 public:
  struct Options {
    int workers = 4;
    bool use_plan_api = true;     // Plan*() then Apply(), collecting every GenerationRecord
    bool phase_changes = false;   // occasionally pause and resume
    int64_t trial_budget = 0;     // the campaign's budget, to predict trimmed asks (0 = none)
    bool flat_objective = false;  // every outcome the same score: cohorts tie, the campaign converges
  };

  // What one event did, for comparing two runs.
  struct Step {
    char kind = '?';  // 'a'sk, 't'ell, 'r'enew, 's'weep, 'p'hase, 'w'ait
    absl::StatusCode code = absl::StatusCode::kOk;
    std::vector<int64_t> trials;        // asked or renewed numbers
    std::vector<ReportResult> results;  // for tells
  };

  EventDriver(uint64_t seed, Options options) : rng_(seed), options_(options) {}

  absl::Time now() const { return now_; }
  // Every update made through the Plan*/Apply path, in order.
  const std::vector<GenerationRecord>& generations() const { return generations_; }
  // The time of the last event that swept expired leases (asks, tells, renewals, sweeps).
  absl::Time last_sweep() const { return last_sweep_; }

  // The objective: a sphere in internal coordinates around 0.3, so outcomes depend on every sample.
  static search::Outcome Objective(const Trial& t) {
    return search::Outcome::Score((t.x.array() - 0.3).square().sum());
  }

  Step Next(Campaign& campaign) {
    now_ += absl::Seconds(Uniform(0, 20));
    const double u = Unit();
    if (u < 0.30) return DoAsk(campaign);
    if (u < 0.72) return DoTell(campaign);
    if (u < 0.82) return DoRenew(campaign);
    if (u < 0.90) return DoSweep(campaign);
    if (options_.phase_changes && u < 0.93) return DoPhase(campaign);
    Step step;
    step.kind = 'w';
    now_ += absl::Seconds(Uniform(0, 120));
    return step;
  }

 private:
  struct Held {
    std::string worker;
    absl::Time deadline;
  };

  int Uniform(int lo, int hi) { return std::uniform_int_distribution<int>(lo, hi)(rng_); }
  double Unit() { return std::uniform_real_distribution<double>(0.0, 1.0)(rng_); }
  std::string Worker() { return absl::StrCat("w", Uniform(0, options_.workers - 1)); }

  // A trial that has not been told yet, or 0 if none.
  int64_t Untold() {
    if (untold_.empty()) return 0;
    auto it = untold_.begin();
    std::advance(it, Uniform(0, static_cast<int>(untold_.size()) - 1));
    return it->first;
  }
  int64_t Told() {
    if (told_.empty()) return 0;
    auto it = told_.begin();
    std::advance(it, Uniform(0, static_cast<int>(told_.size()) - 1));
    return it->first;
  }

  int64_t Outstanding() const {
    int64_t n = 0;
    for (const auto& [number, held] : untold_) n += held.deadline > now_;
    return n;
  }

  Step DoAsk(Campaign& campaign) {
    Step step;
    step.kind = 'a';
    int count = Uniform(1, 4);
    if (Unit() < 0.05) count = Uniform(5, 16);
    const std::string worker = Worker();
    std::optional<absl::Duration> lease;
    if (Unit() < 0.9) lease = absl::Seconds(Uniform(10, 300));
    const bool paused = campaign.engine().phase == Phase::kPaused;
    const bool done = campaign.engine().phase == Phase::kDone;
    int64_t expected = count;
    if (options_.trial_budget > 0) {
      expected = std::min<int64_t>(count, options_.trial_budget - informative_ - Outstanding());
    }
    std::vector<int64_t> numbers;
    if (options_.use_plan_api) {
      absl::StatusOr<AskPlan> plan = campaign.PlanAsk(count, worker, lease, now_);
      step.code = plan.status().code();
      if (plan.ok()) {
        numbers = plan->trials;
        CollectAndApply(campaign, std::move(plan->change));
      }
    } else {
      absl::StatusOr<std::vector<Trial>> asked = campaign.Ask(count, worker, lease, now_);
      step.code = asked.status().code();
      if (asked.ok()) {
        for (const Trial& t : *asked) numbers.push_back(t.number);
      }
    }
    if (paused || done || expected <= 0) {
      EXPECT_EQ(step.code, absl::StatusCode::kFailedPrecondition);
    } else {
      EXPECT_EQ(step.code, absl::StatusCode::kOk);
      EXPECT_EQ(static_cast<int64_t>(numbers.size()), expected);
      last_sweep_ = now_;
    }
    const absl::Duration length = lease.value_or(campaign.options().default_lease);
    for (int64_t number : numbers) {
      EXPECT_EQ(number, ++asked_);
      untold_[number] = Held{worker, now_ + length};
    }
    step.trials = std::move(numbers);
    return step;
  }

  Step DoTell(Campaign& campaign) {
    Step step;
    step.kind = 't';
    const int count = Uniform(1, 4);
    std::vector<Report> reports;
    for (int k = 0; k < count; ++k) {
      Report r;
      const double u = Unit();
      if (u < 0.70 && !untold_.empty()) {
        r.trial = Untold();
        r.outcome = Fresh(*campaign.trial(r.trial));
      } else if (u < 0.82 && !told_.empty()) {
        r.trial = Told();  // a duplicate
        r.outcome = told_[r.trial];
      } else if (u < 0.92 && !told_.empty()) {
        r.trial = Told();  // a different outcome
        r.outcome = Different(told_[r.trial]);
      } else {
        const int64_t unknown[] = {0, -1, asked_ + 1, asked_ + 1000};
        r.trial = unknown[Uniform(0, 3)];
        r.outcome = search::Outcome::Score(1.0);
      }
      r.note = absl::StrCat("note ", k);
      reports.push_back(std::move(r));
    }
    if (Unit() < 0.05 && !reports.empty()) reports.push_back(reports.front());  // same trial twice

    // The contract, from this driver's own record of what it was told.
    std::map<int64_t, search::Outcome> told = told_;
    std::vector<ReportResult> expected;
    for (const Report& r : reports) {
      ReportResult e;
      e.trial = r.trial;
      if (r.trial < 1 || r.trial > asked_) {
        e.status = absl::NotFoundError("");
      } else if (auto it = told.find(r.trial); it != told.end()) {
        if (SameOutcome(it->second, r.outcome)) {
          e.duplicate = true;
        } else {
          e.status = absl::AlreadyExistsError("");
        }
      } else {
        e.late = untold_.at(r.trial).deadline <= now_;
        told[r.trial] = r.outcome;
      }
      expected.push_back(e);
    }

    if (options_.use_plan_api) {
      absl::StatusOr<TellPlan> plan = campaign.PlanTell(reports, now_);
      step.code = plan.status().code();
      if (plan.ok()) {
        step.results = plan->results;
        CollectAndApply(campaign, std::move(plan->change));
      }
    } else {
      absl::StatusOr<std::vector<ReportResult>> results = campaign.Tell(reports, now_);
      step.code = results.status().code();
      if (results.ok()) step.results = *results;
    }
    EXPECT_EQ(step.code, absl::StatusCode::kOk);
    last_sweep_ = now_;
    EXPECT_EQ(step.results.size(), expected.size());
    for (size_t k = 0; k < step.results.size() && k < expected.size(); ++k) {
      const ReportResult& got = step.results[k];
      const ReportResult& want = expected[k];
      EXPECT_EQ(got.trial, want.trial);
      EXPECT_EQ(got.status.code(), want.status.code())
          << "trial " << want.trial << ": " << got.status;
      if (want.status.ok()) {
        EXPECT_EQ(got.duplicate, want.duplicate) << "trial " << want.trial;
        if (!want.duplicate) {
          EXPECT_EQ(got.late, want.late) << "trial " << want.trial;
        }
      }
    }
    for (const auto& [number, outcome] : told) {
      if (told_.count(number)) continue;
      if (outcome.informative()) ++informative_;
      told_[number] = outcome;
      untold_.erase(number);
    }
    return step;
  }

  Step DoRenew(Campaign& campaign) {
    Step step;
    step.kind = 'r';
    std::vector<int64_t> numbers;
    const int count = Uniform(1, 2);
    for (int k = 0; k < count; ++k) {
      const double u = Unit();
      if (u < 0.80 && !untold_.empty()) {
        numbers.push_back(Untold());
      } else if (u < 0.90 && !told_.empty()) {
        numbers.push_back(Told());
      } else {
        numbers.push_back(asked_ + 7);
      }
    }
    // Mostly the holder of the first trial, sometimes someone else.
    std::string worker = Worker();
    if (Unit() < 0.8 && untold_.count(numbers.front())) worker = untold_.at(numbers.front()).worker;
    const absl::Duration lease = absl::Seconds(Uniform(10, 300));

    absl::StatusCode want = absl::StatusCode::kOk;
    for (int64_t number : numbers) {
      if (number < 1 || number > asked_) {
        want = absl::StatusCode::kNotFound;
      } else if (told_.count(number) || untold_.at(number).worker != worker) {
        want = absl::StatusCode::kFailedPrecondition;
      } else {
        continue;
      }
      break;
    }
    if (options_.use_plan_api) {
      absl::StatusOr<Change> change = campaign.PlanRenew(numbers, worker, lease, now_);
      step.code = change.status().code();
      if (change.ok()) CollectAndApply(campaign, *std::move(change));
    } else {
      step.code = campaign.Renew(numbers, worker, lease, now_).code();
    }
    EXPECT_EQ(step.code, want) << "renew by " << worker;
    if (step.code == absl::StatusCode::kOk) {
      last_sweep_ = now_;
      for (int64_t number : numbers) untold_[number].deadline = now_ + lease;
    }
    step.trials = std::move(numbers);
    return step;
  }

  Step DoSweep(Campaign& campaign) {
    Step step;
    step.kind = 's';
    if (options_.use_plan_api) {
      CollectAndApply(campaign, campaign.PlanSweep(now_));
    } else {
      campaign.Sweep(now_);
    }
    last_sweep_ = now_;
    return step;
  }

  Step DoPhase(Campaign& campaign) {
    Step step;
    step.kind = 'p';
    const PhaseCommand command = Unit() < 0.5 ? PhaseCommand::kPause : PhaseCommand::kResume;
    const bool done = campaign.engine().phase == Phase::kDone;
    if (options_.use_plan_api) {
      absl::StatusOr<Change> change = campaign.PlanSetPhase(command, now_);
      step.code = change.status().code();
      if (change.ok()) CollectAndApply(campaign, *std::move(change));
    } else {
      step.code = campaign.SetPhase(command, now_).code();
    }
    EXPECT_EQ(step.code, done ? absl::StatusCode::kFailedPrecondition : absl::StatusCode::kOk);
    return step;
  }

  search::Outcome Fresh(const Trial& t) {
    const double u = Unit();
    if (u < 0.12) return search::Outcome::Void();
    if (options_.flat_objective) return search::Outcome::Score(1.0);
    if (u < 0.20) return search::Outcome::Infeasible();
    return Objective(t);
  }

  search::Outcome Different(const search::Outcome& o) {
    switch (o.kind) {
      case search::Outcome::Kind::kScore:
        return Unit() < 0.5 ? search::Outcome::Score(o.score + 1.0) : search::Outcome::Void();
      case search::Outcome::Kind::kVoid:
        return search::Outcome::Score(0.5);
      default:
        return search::Outcome::Void();
    }
  }

  void CollectAndApply(Campaign& campaign, Change change) {
    for (const GenerationRecord& g : change.generations) generations_.push_back(g);
    campaign.Apply(std::move(change));
  }

  std::mt19937_64 rng_;
  Options options_;
  absl::Time now_ = Origin();
  absl::Time last_sweep_ = absl::InfinitePast();
  int64_t asked_ = 0;                        // trials asked so far (numbers 1..asked_)
  int64_t informative_ = 0;                  // informative outcomes accepted
  std::map<int64_t, Held> untold_;           // asked, not told
  std::map<int64_t, search::Outcome> told_;  // the first accepted outcome of each told trial
  std::vector<GenerationRecord> generations_;
};

}  // namespace ogive::campaign::test_util

#endif  // OGIVE_SERVER_CAMPAIGN_CAMPAIGN_TEST_UTIL_H_
