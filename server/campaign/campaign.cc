#include "server/campaign/campaign.h"

#include <algorithm>
#include <cmath>
#include <iterator>
#include <limits>
#include <map>
#include <string>
#include <utility>
#include <vector>

#include "absl/status/status.h"
#include "absl/strings/str_cat.h"
#include "server/base/check.h"
#include "server/base/reason.h"
#include "server/campaign/surrogate_step.h"
#include "server/campaign/termination.h"
#include "server/search/rank_change.h"

namespace ogive::campaign {
namespace {

bool SameOutcome(const search::Outcome& a, const search::Outcome& b) {
  if (a.kind != b.kind) return false;
  switch (a.kind) {
    case search::Outcome::Kind::kScore:
      return a.score == b.score;
    case search::Outcome::Kind::kGrade:
      return a.grade == b.grade;
    case search::Outcome::Kind::kInfeasible:
    case search::Outcome::Kind::kVoid:
      return true;
  }
  return false;
}

// "score 3.25", "grade 'good'" (by its label when `labels` has it, else "grade #3"), "infeasible".
std::string Describe(const search::Outcome& o, const std::vector<std::string>& labels) {
  switch (o.kind) {
    case search::Outcome::Kind::kScore:
      return absl::StrCat("score ", o.score);
    case search::Outcome::Kind::kGrade:
      if (o.grade >= 0 && o.grade < static_cast<int>(labels.size())) {
        return absl::StrCat("grade '", labels[static_cast<size_t>(o.grade)], "'");
      }
      return absl::StrCat("grade #", o.grade);
    case search::Outcome::Kind::kInfeasible:
      return "infeasible";
    case search::Outcome::Kind::kVoid:
      return "void";
  }
  return "?";
}

// Bounds are hard: a spread wider than the box says nothing more (every sample folds back into it)
// and only lengthens the way back once the outcomes differ, so σ·√λmax(C) is held at the width of
// the box, Campaign::kMaxStepSpread in internal units (docs/math.md, "Stopping and restarts").
void HoldSpreadWithinTheBox(search::SearchDistribution& d) {
  if (!d.gaussian()) return;
  const double spread = d.gaussian()->LargestSpread();
  if (spread > Campaign::kMaxStepSpread) d.ScaleStepSize(Campaign::kMaxStepSpread / spread);
}


// The model covers campaigns whose parameters are all real or integer (surrogate_step.h).
bool ModelApplies(const search::Space& space, const CampaignOptions& options) {
  return options.surrogate && !space.gaussian_indices().empty() &&
         space.gaussian_indices().size() == static_cast<size_t>(space.size());
}

// The real and integer coordinates of an internal sample: what the model takes.
Eigen::VectorXd ModelCoordinates(const search::Space& space, const Eigen::VectorXd& x) {
  const std::vector<int>& coordinates = space.gaussian_indices();
  Eigen::VectorXd y(coordinates.size());
  for (size_t k = 0; k < coordinates.size(); ++k) y[k] = x[coordinates[k]];
  return y;
}

// The model's window: the most recent originals of the distribution's epoch that an update consumed,
// newest first, ModelWindow() of them at most. Originals are numbered in the order they were leased
// and their epochs only grow, so the scan stops at the first original of an older epoch; a replicate
// carries its original's epoch and may be leased long after it (a confirming measurement), so
// replicates are passed over before that test. The same records give the same window, in memory and
// after a restore.
template <typename GetTrial>
std::vector<ModelPoint> ModelWindowPoints(const search::Space& space, GetTrial get, int64_t last_trial, int64_t epoch,
                                          const search::SearchDistribution& d) {
  const int size = ModelWindow(static_cast<int>(space.gaussian_indices().size()), d.population_size());
  std::vector<ModelPoint> window;
  for (int64_t number = last_trial; number >= 1 && static_cast<int>(window.size()) < size; --number) {
    const Trial& t = *get(number);
    if (t.replicate_of != 0) continue;
    if (t.epoch < epoch) break;
    if (t.use != Use::kConsumed || !t.outcome.has_value()) continue;
    window.push_back({ModelCoordinates(space, t.x), *t.outcome});
  }
  return window;
}

}  // namespace

const char* TrialStateName(TrialState state) {
  switch (state) {
    case TrialState::kLeased:
      return "leased";
    case TrialState::kReported:
      return "reported";
    case TrialState::kLapsed:
      return "lapsed";
    case TrialState::kVoided:
      return "voided";
  }
  return "unknown";
}

const char* UseName(Use use) {
  switch (use) {
    case Use::kNone:
      return "none";
    case Use::kPending:
      return "pending";
    case Use::kConsumed:
      return "consumed";
    case Use::kTooStale:
      return "too_stale";
    case Use::kAwaitingReplicates:
      return "awaiting_replicates";
  }
  return "unknown";
}

const char* PhaseName(Phase phase) {
  switch (phase) {
    case Phase::kOpen:
      return "open";
    case Phase::kPaused:
      return "paused";
    case Phase::kDone:
      return "done";
  }
  return "unknown";
}

const char* DoneReasonName(DoneReason reason) {
  switch (reason) {
    case DoneReason::kNone:
      return "";
    case DoneReason::kBudget:
      return "budget";
    case DoneReason::kTarget:
      return "target";
    case DoneReason::kConverged:
      return "converged";
    case DoneReason::kStopped:
      return "stopped";
  }
  return "unknown";
}

// Computes one request's Change on top of the published state. Changed trials live in an overlay and
// the engine state is a copy; the campaign's index sets are read, never copied: a trial is leased while
// its state is kLeased and pending while its use is kPending (in the overlay when it changed), and the
// planner counts how many entered or left each set. Nothing here touches the Campaign, and the cost of a
// plan grows with what it changes, not with how many trials are out or pending.
class Campaign::Planner {
 public:
  Planner(const Campaign& campaign, absl::Time now) : campaign_(campaign), now_(now), engine_(campaign.engine_) {}

  const Trial* Get(int64_t number) const {
    if (auto it = overlay_.find(number); it != overlay_.end()) return &it->second;
    return campaign_.trial(number);
  }
  Trial& Mutable(int64_t number) {
    auto it = overlay_.find(number);
    if (it == overlay_.end()) it = overlay_.emplace(number, *campaign_.trial(number)).first;
    return it->second;
  }
  EngineState& engine() { return engine_; }
  int64_t outstanding() const { return static_cast<int64_t>(campaign_.leases_.size()) + leased_delta_; }

  // Trials out that are still being evaluated, as far as the campaign can tell: leased within the
  // last kLiveEvaluations typical evaluation times (docs/math.md, "Only live trials count"). A trial
  // whose worker vanished stops counting then, not when its lease lapses. Until an update has measured
  // the evaluation time, every trial out counts. Trials are numbered in the order they were leased,
  // so the count reads only the trials leased in that window.
  int64_t live_outstanding() const {
    if (engine_.evaluation_seconds <= 0) return outstanding();
    int64_t live = 0;
    ForEachLiveTrialOut([&live](const Trial&) { ++live; });
    return live;
  }

  // Calls fn(trial) for every trial live_outstanding() counts: this plan's new trials and the
  // campaign's leases as the plan sees them.
  template <typename Fn>
  void ForEachLiveTrialOut(Fn fn) const {
    if (engine_.evaluation_seconds <= 0) {
      for (const auto& [deadline, number] : campaign_.leases_) {
        if (const Trial* t = Get(number); t->state == TrialState::kLeased) fn(*t);
      }
      for (const auto& [number, t] : overlay_) {
        if (campaign_.trial(number) == nullptr && t.state == TrialState::kLeased) fn(t);
      }
      return;
    }
    const absl::Time since = now_ - absl::Seconds(kLiveEvaluations * engine_.evaluation_seconds);
    for (int64_t number = engine_.next_trial - 1; number >= 1; --number) {
      const Trial* t = Get(number);
      if (t == nullptr) continue;  // the trial an Ask is making now
      if (t->leased_at <= since) break;
      if (t->state == TrialState::kLeased) fn(*t);
    }
  }

  // Raises the peak to the live trials out now. Live trials are a subset of those out, so the scan
  // is skipped when even all of those would not raise it.
  void NotePeak() {
    if (outstanding() <= engine_.peak_outstanding) return;
    engine_.peak_outstanding = std::max<int>(engine_.peak_outstanding, static_cast<int>(live_outstanding()));
  }

  // Lapses every lease that ran out by now: the campaign's leases in deadline order, up to now (a lease
  // this plan changed is judged by its trial as the plan sees it).
  void Sweep() {
    std::vector<int64_t> expired;
    for (const auto& [deadline, number] : campaign_.leases_) {
      if (deadline > now_) break;
      const Trial* t = Get(number);
      if (t->state == TrialState::kLeased && t->lease_deadline <= now_) expired.push_back(number);
    }
    for (int64_t number : expired) {
      Trial& t = Mutable(number);
      t.state = TrialState::kLapsed;
      --leased_delta_;
      lapsed_.emplace_back(number, t.worker);
    }
  }

  // The model's pick among `draws` samples of the distribution: the one the model ranks best among
  // those at least kPickSeparation σ-units (Mahalanobis, in the current distribution) from every live
  // trial out. The model has not seen those outcomes yet, so a pick next to one would spend a second
  // evaluation where the first is about to tell the same; with several workers the previous
  // generation's pick is often still out (surrogate_step.h). When every draw is that close, the
  // model's best of all.
  search::Draw Screen(int draws, search::RandomStream& random) {
    const search::GaussianFamily& g = *engine_.distribution->gaussian();
    // Mahalanobis distances as Euclidean ones between whitened steps C^{-1/2} A⁻¹ (x − m)/σ: O(n) per
    // pair once each point is whitened.
    const auto whitened = [&](const Eigen::VectorXd& x) {
      return g.InverseSqrtTimes(g.StepOf(ModelCoordinates(campaign_.space_, x), false));
    };
    std::vector<Eigen::VectorXd> pending;
    ForEachLiveTrialOut([&](const Trial& t) { pending.push_back(whitened(t.x)); });
    std::optional<search::Draw> best, best_apart;
    double best_value = 0, best_apart_value = 0;
    for (int k = 0; k < draws; ++k) {
      search::Draw draw = engine_.distribution->Sample(random);
      const double value = engine_.model->Predict(ModelCoordinates(campaign_.space_, draw.x));
      const Eigen::VectorXd u = whitened(draw.x);
      bool apart = true;
      for (const Eigen::VectorXd& p : pending) apart = apart && (u - p).norm() >= kPickSeparation;
      if (apart && (!best_apart.has_value() || value < best_apart_value)) {
        best_apart = draw;
        best_apart_value = value;
      }
      if (!best.has_value() || value < best_value) {
        best = std::move(draw);
        best_value = value;
      }
    }
    return best_apart.has_value() ? *std::move(best_apart) : *std::move(best);
  }

  std::vector<int64_t> AddTrials(int count, const std::string& worker, absl::Duration lease) {
    search::RandomStream random = search::RandomStream::FromState(engine_.random);
    std::vector<int64_t> numbers;
    for (int k = 0; k < count; ++k) {
      Trial t;
      t.number = engine_.next_trial++;
      if (const int64_t source = NextToReplicate(); source != 0) {
        // A repeated measurement is handed out before any new candidate: its original waits for it.
        const Trial& original = *Get(source);
        t.generation = original.generation;
        t.epoch = original.epoch;
        t.x = original.x;
        t.repaired = original.repaired;
        t.replicate_of = source;
        added_replicates_.emplace(source, t.number);
      } else {
        // The first candidate of each generation is the model's pick (surrogate_step.h). Replicates
        // carry their original's generation, so the previous original decides.
        const Trial* previous = Get(t.number - 1);
        while (previous != nullptr && previous->replicate_of != 0) previous = Get(previous->number - 1);
        const bool first_of_generation = previous == nullptr || previous->generation != engine_.generation ||
                                         previous->epoch != engine_.epoch;
        const int draws = engine_.model != nullptr && first_of_generation
                              ? ScreeningDraws(engine_.model_agreement, engine_.distribution->population_size())
                              : 1;
        const search::Draw draw = draws > 1 ? Screen(draws, random) : engine_.distribution->Sample(random);
        t.generation = engine_.generation;
        t.epoch = engine_.epoch;
        t.x = draw.x;
        t.repaired = draw.repaired;
        t.screened_from = draws > 1 ? draws : 0;
      }
      t.state = TrialState::kLeased;
      t.worker = worker;
      t.leased_at = now_;
      t.lease_deadline = now_ + lease;
      ++leased_delta_;
      numbers.push_back(t.number);
      overlay_.emplace(t.number, std::move(t));
    }
    engine_.random = random.state();
    NotePeak();
    return numbers;
  }

  ReportResult Store(const Report& report) {
    ReportResult result;
    result.trial = report.trial;
    const Trial* existing = Get(report.trial);
    if (existing == nullptr) {
      result.status = WithReason(
          absl::NotFoundError(absl::StrCat("trial ", report.trial, ": no such trial in this campaign (trials are 1..",
                                           engine_.next_trial - 1, ")")),
          {std::string(reason::kTrialNotFound), {{"trial", absl::StrCat(report.trial)}}, std::nullopt});
      return result;
    }
    if (absl::Status s = search::CheckOutcome(report.outcome, campaign_.order_); !s.ok()) {
      result.status = WithReason(absl::InvalidArgumentError(absl::StrCat("trial ", report.trial, ": ", s.message())),
                                 {std::string(reason::kInvalidField), {{"field", "outcome"}}, std::nullopt});
      return result;
    }
    if (existing->outcome.has_value()) {
      if (SameOutcome(*existing->outcome, report.outcome)) {
        result.duplicate = true;
        result.late = existing->late;
        return result;
      }
      result.status = WithReason(
          absl::AlreadyExistsError(absl::StrCat("trial ", report.trial, ": already reported as ",
                                                Describe(*existing->outcome, campaign_.options_.grade_labels),
                                                "; a different outcome (",
                                                Describe(report.outcome, campaign_.options_.grade_labels),
                                                ") is refused")),
          {std::string(reason::kOutcomeConflict), {{"trial", absl::StrCat(report.trial)}}, std::nullopt});
      return result;
    }
    Trial& t = Mutable(report.trial);
    t.late = t.state == TrialState::kLapsed;
    result.late = t.late;
    if (t.state == TrialState::kLeased) --leased_delta_;
    t.outcome = report.outcome;
    t.note = report.note;
    t.reported_by = report.reported_by;
    t.reported_at = now_;
    t.report_sequence = ++engine_.report_sequence;
    if (!report.outcome.informative()) {
      t.state = TrialState::kVoided;
      t.use = Use::kNone;
      return result;
    }
    t.state = TrialState::kReported;
    ++engine_.informative;
    if (t.replicate_of != 0) {
      StoreReplicate(t);
    } else if (TooStale(t)) {
      t.use = Use::kTooStale;
    } else if (const int wanted = ReplicatesWanted(); wanted > 0) {
      t.use = Use::kAwaitingReplicates;
      t.replicates_wanted = wanted;
      added_awaiting_.push_back(t.number);
    } else {
      t.use = Use::kPending;
      AddPending(t.number);
    }
    if (campaign_.options_.target.has_value() && campaign_.options_.noise.confirms_target()) {
      CheckConfirmation(t.replicate_of != 0 ? t.replicate_of : t.number, *t.outcome);
    }
    const Trial* best = Get(engine_.best_trial);
    if (best == nullptr || search::CompareOutcomes(*t.outcome, *best->outcome, campaign_.order_) < 0) {
      engine_.best_trial = t.number;
    }
    const Trial* epoch_best = Get(engine_.epoch_best_trial);
    if (t.epoch == engine_.epoch &&
        (epoch_best == nullptr || search::CompareOutcomes(*t.outcome, *epoch_best->outcome, campaign_.order_) < 0)) {
      engine_.epoch_best_trial = t.number;
    }
    return result;
  }

  // Forms and consumes cohorts while λ pending outcomes are waiting; then applies the stopping rules.
  void UpdateWhileReady() {
    CheckTarget();  // a target reached by these reports ends the campaign before any update
    while (engine_.phase != Phase::kDone) {
      DropStale();
      const int lambda = engine_.distribution->population_size();
      if (PendingCount() < lambda) break;
      std::vector<int64_t> cohort;
      ForEachPending([&](int64_t number) {
        cohort.push_back(number);
        return static_cast<int>(cohort.size()) < lambda;
      });
      Consume(cohort);
    }
    DropStale();  // also when the last update ended the campaign
    CheckTargetAndBudget();
  }

  void Lease(int64_t number, const std::string& worker, absl::Time deadline) {
    Trial& t = Mutable(number);
    if (t.state != TrialState::kLeased) ++leased_delta_;
    t.state = TrialState::kLeased;
    t.worker = worker;
    t.lease_deadline = deadline;
    NotePeak();
  }

  void SetPhase(Phase phase, DoneReason reason, std::string message) {
    engine_.phase = phase;
    engine_.reason = reason;
    engine_.phase_message = std::move(message);
  }

  Change Finish() {
    Change change;
    change.engine = std::move(engine_);
    change.generations = std::move(generations_);
    change.distribution_changed = distribution_changed_;
    change.lapsed = std::move(lapsed_);
    change.trials.reserve(overlay_.size());
    for (auto& [number, t] : overlay_) change.trials.push_back(std::move(t));
    return change;
  }

 private:
  bool TooStale(const Trial& t) const {
    return t.epoch != engine_.epoch || engine_.generation - t.generation > campaign_.options_.staleness_limit;
  }

  // Pending outcomes, oldest report first: the campaign's (less those this plan took out), then this
  // plan's. `visit(number)` returns whether to go on.
  template <typename Visit>
  void ForEachPending(Visit visit) const {
    // Both lists are in report order; an original that waited for replicates joins this plan's list
    // with its own, older, report sequence, so the two are merged.
    auto it = campaign_.pending_.begin();
    size_t k = 0;
    while (it != campaign_.pending_.end() || k < added_pending_.size()) {
      int64_t number;
      if (k == added_pending_.size() ||
          (it != campaign_.pending_.end() && it->first < Get(added_pending_[k])->report_sequence)) {
        number = (it++)->second;
      } else {
        number = added_pending_[k++];
      }
      if (Get(number)->use == Use::kPending && !visit(number)) return;
    }
  }
  // Adds an outcome to this plan's pending list, in report order.
  void AddPending(int64_t number) {
    const int64_t sequence = Get(number)->report_sequence;
    auto at = std::upper_bound(added_pending_.begin(), added_pending_.end(), sequence,
                               [&](int64_t s, int64_t n) { return s < Get(n)->report_sequence; });
    added_pending_.insert(at, number);
  }
  int PendingCount() const {
    return static_cast<int>(campaign_.pending_.size() + added_pending_.size()) - pending_removed_;
  }
  // Takes a pending outcome out of the pending set, with its new use.
  void Unpend(int64_t number, Use use) {
    Trial& t = Mutable(number);
    OGIVE_CHECK(t.use == Use::kPending);
    t.use = use;
    ++pending_removed_;
  }

  void DropStale() {
    std::vector<int64_t> stale;
    ForEachPending([&](int64_t number) {
      if (TooStale(*Get(number))) stale.push_back(number);
      return true;
    });
    for (int64_t number : stale) {
      Unpend(number, Use::kTooStale);
      DropWaitingReplicates(number);
    }
    std::vector<int64_t> stale_awaiting;
    ForEachAwaiting([&](int64_t number) {
      if (TooStale(*Get(number))) stale_awaiting.push_back(number);
    });
    for (int64_t number : stale_awaiting) {
      Mutable(number).use = Use::kTooStale;
      DropWaitingReplicates(number);
    }
  }
  // The replicates of a candidate that went stale: kept, never used.
  void DropWaitingReplicates(int64_t original) {
    for (int64_t member : Group(original)) {
      if (member != original && Get(member)->use == Use::kAwaitingReplicates) Mutable(member).use = Use::kTooStale;
    }
  }

  void Consume(const std::vector<int64_t>& cohort) {
    std::vector<search::CohortMember> members;
    std::vector<search::Outcome> outcomes;
    GenerationRecord record;
    double staleness_sum = 0;
    std::vector<double> durations;
    std::vector<std::vector<search::Outcome>> measured;  // each member's measurements, first one first
    for (int64_t number : cohort) {
      const Trial& t = *Get(number);
      durations.push_back(std::max(0.0, absl::ToDoubleSeconds(t.reported_at - t.leased_at)));
      const int staleness = static_cast<int>(engine_.generation - t.generation);
      members.push_back({t.x, t.repaired || staleness > 0 || t.screened_from > 1});
      outcomes.push_back(*t.outcome);
      measured.push_back(UsableMeasurements(number));
      staleness_sum += staleness;
      record.max_staleness = std::max(record.max_staleness, staleness);
    }
    absl::StatusOr<std::vector<search::TieSpan>> spans = RankMeasured(measured);
    OGIVE_CHECK(spans.ok());  // every pending outcome passed CheckOutcome when it was stored
    // EqualValues counts tied cohorts of scores (a plateau of the objective) and of the top grade
    // (nothing better exists). A cohort tied below the top grade, or all infeasible, only says that
    // the region is uniform at that level: a graded search crosses such plateaus on its way up (the
    // tie-aware step size keeps it moving), so they do not end it.
    const search::Outcome& level = outcomes.front();
    const bool uninformative_level =
        level.kind == search::Outcome::Kind::kInfeasible ||
        (level.kind == search::Outcome::Kind::kGrade && level.grade < campaign_.order_.grade_count - 1);
    const bool all_tied = std::all_of(spans->begin(), spans->end(), [&](const search::TieSpan& s) {
      return s.better == 0 && s.better_or_equal == static_cast<int>(spans->size());
    });
    const bool flat = all_tied && !uninformative_level;

    search::SearchDistribution next = *engine_.distribution;
    const absl::Status updated = next.Update(members, *spans);
    for (int64_t number : cohort) {
      Unpend(number, Use::kConsumed);
      Mutable(number).consumed_by = engine_.generation + 1;
      for (int64_t member : Group(number)) {
        if (member == number || Get(member)->use != Use::kAwaitingReplicates) continue;
        Trial& r = Mutable(member);
        r.use = Use::kConsumed;
        r.consumed_by = engine_.generation + 1;
      }
    }
    ++engine_.generation;
    engine_.flat_generations = flat ? engine_.flat_generations + 1 : 0;
    if (!all_tied) engine_.last_mixed_generation = engine_.generation;
    // The median, not the mean: a few evaluations that ran far longer (or reports that waited on a
    // worker's disk) do not move it.
    std::nth_element(durations.begin(), durations.begin() + durations.size() / 2, durations.end());
    engine_.evaluation_seconds = durations[durations.size() / 2];
    record.generation = engine_.generation;
    record.epoch = engine_.epoch;
    record.population_size = static_cast<int>(cohort.size());
    record.cohort = cohort;
    record.mean_staleness = staleness_sum / cohort.size();
    std::optional<std::string> converged;
    if (updated.ok()) {
      if (all_tied && uninformative_level && next.gaussian()) {
        next.ScaleStepSize(TiedCohortStepFactor(level, next.gaussian()->parameters()));
      }
      MeasureNoise(outcomes, measured, next);
      HoldSpreadWithinTheBox(next);
      AdaptPopulation(next);
      ModelStep(cohort, next);
      converged = ConvergenceReason(next, engine_.flat_generations, engine_.sigma0);
      if (!converged.has_value()) converged = Stagnation(cohort, outcomes, next);
      engine_.distribution = std::make_shared<const search::SearchDistribution>(std::move(next));
    } else {
      // A degenerate update (FAILED_PRECONDITION) leaves the distribution as it was; the search there
      // is over.
      converged = std::string(updated.message());
    }
    distribution_changed_ = true;
    record.summary = engine_.distribution->Summary();
    record.best_trial = engine_.best_trial;
    generations_.push_back(std::move(record));
    if (converged.has_value()) RestartOrStop(*converged);
  }

  // The surrogate's part of an update (surrogate_step.h): τ_b of the model on this cohort, a refit,
  // model-ranked updates as far as τ_b allows, and a refit in the coordinates the update ends with.
  void ModelStep(const std::vector<int64_t>& cohort, search::SearchDistribution& next) {
    if (!ModelApplies(campaign_.space_, campaign_.options_) || !next.gaussian().has_value()) return;
    const auto get = [this](int64_t number) { return Get(number); };
    const std::vector<ModelPoint> window =
        ModelWindowPoints(campaign_.space_, get, engine_.next_trial - 1, engine_.epoch, next);
    double tau = std::numeric_limits<double>::quiet_NaN();
    if (engine_.model != nullptr) {
      std::vector<ModelPoint> members;
      for (int64_t number : cohort) {
        const Trial& t = *Get(number);
        members.push_back({ModelCoordinates(campaign_.space_, t.x), *t.outcome});
      }
      tau = ModelAgreement(*engine_.model, members, campaign_.order_);
    }
    if (!std::isnan(tau)) {
      engine_.model_agreement = tau;
    } else if (engine_.model == nullptr) {
      engine_.model_agreement = 0;  // the model about to be fitted has not been tested on anything
    }
    engine_.model = FitModel(*next.gaussian(), window, campaign_.order_);
    const int updates = ModelRankedUpdates(engine_.model_agreement, next.population_size());
    if (engine_.model == nullptr || updates == 0) return;
    search::RandomStream random = search::RandomStream::FromState(engine_.random);
    const int made = AdvanceByModel(next, *engine_.model, updates, random);
    engine_.random = random.state();
    if (made == 0) return;
    HoldSpreadWithinTheBox(next);
    engine_.model = FitModel(*next.gaussian(), window, campaign_.order_);
  }

  // A cohort tied below the top of the scale (one grade that is not the best, or all infeasible)
  // carries no direction, but the epoch's other outcomes say which way the step should go
  // (docs/math.md, "Ties and coarse grades"). With φ = exp(0.2 + c_σ/d_σ), the flat-fitness factor
  // of common practice in CMA-ES implementations:
  //  - tied on a level worse than the best this epoch has sampled: a better region lies within
  //    reach and the samples now miss it, so narrow, σ/φ;
  //  - tied on that best level, with a cohort of mixed outcomes within the last kMixedCohortWindow
  //    updates: the level's edge is within the samples' reach and a better level, if any, is nested
  //    inside it, so keep σ (the update's own step-size adaptation acts);
  //  - tied on that best level with no mixed cohort that recent: a plateau wider than the samples,
  //    so widen, σ·φ.
  double TiedCohortStepFactor(const search::Outcome& level, const search::CmaParameters& cp) const {
    const double phi = std::exp(0.2 + cp.c_sigma / cp.d_sigma);
    const Trial* epoch_best = Get(engine_.epoch_best_trial);
    if (epoch_best != nullptr && search::CompareOutcomes(level, *epoch_best->outcome, campaign_.order_) > 0) {
      return 1.0 / phi;
    }
    const bool edge_in_reach = engine_.last_mixed_generation > 0 &&
                               engine_.generation - engine_.last_mixed_generation <= Campaign::kMixedCohortWindow;
    return edge_in_reach ? 1.0 : phi;
  }

  // λ follows the observed concurrency: at least the base population, at least the most live trials
  // that were out at once since the last update (so a cohort is never mostly older than one
  // generation), at most the configured cap.
  void AdaptPopulation(search::SearchDistribution& next) {
    int lambda = std::max(engine_.base_population, engine_.noise_population);
    if (campaign_.options_.adapt_population) lambda = std::max(lambda, engine_.peak_outstanding);
    lambda = std::clamp(lambda, 2, std::max(2, campaign_.options_.max_population_size));
    if (lambda != next.population_size()) next.SetPopulationSize(lambda);
    engine_.peak_outstanding = static_cast<int>(live_outstanding());
  }

  void RestartOrStop(const std::string& why) {
    const int64_t budget = campaign_.options_.trial_budget;
    const bool budget_left = budget == 0 || engine_.informative < budget;
    if (!campaign_.options_.restarts || !budget_left) {
      SetPhase(Phase::kDone, DoneReason::kConverged, why);
      return;
    }
    // IPOP (Auger and Hansen, CEC 2005): double λ and start afresh from a uniform random point.
    search::RandomStream random = search::RandomStream::FromState(engine_.random);
    search::DistributionOptions options = campaign_.distribution_options_;
    engine_.base_population = std::min(2 * engine_.base_population, campaign_.options_.max_population_size);
    options.population_size = engine_.base_population;
    options.expected_workers = 1;
    options.start.assign(campaign_.space_.size(), std::nullopt);
    for (int i : campaign_.space_.gaussian_indices()) options.start[i] = random.Uniform();
    absl::StatusOr<search::SearchDistribution> fresh = search::SearchDistribution::Create(campaign_.space_, options);
    OGIVE_CHECK(fresh.ok());  // the same options created the first distribution
    engine_.random = random.state();
    engine_.distribution = std::make_shared<const search::SearchDistribution>(*std::move(fresh));
    ++engine_.epoch;
    engine_.model = nullptr;  // the new epoch learns its own
    engine_.model_agreement = 0;
    engine_.flat_generations = 0;
    engine_.epoch_best_trial = 0;
    engine_.last_mixed_generation = 0;
    engine_.noise_population = 0;  // the new epoch measures its noise afresh
    engine_.noise_rank_change = 0;
    engine_.stagnation_trial = 0;
    engine_.stagnation_generation = 0;
    engine_.phase_message = absl::StrCat("restart ", engine_.epoch, " with population ", engine_.base_population,
                                         " after: ", why);
    // Outcomes waiting for the old distribution are kept but cannot inform the new one.
    DropStale();
  }

  void CheckTarget() {
    if (engine_.phase == Phase::kDone) return;
    if (campaign_.options_.noise.confirms_target()) {
      if (confirmed_.has_value()) SetPhase(Phase::kDone, DoneReason::kTarget, *confirmed_);
      return;
    }
    const Trial* best = Get(engine_.best_trial);
    if (campaign_.options_.target.has_value() && best != nullptr &&
        search::CompareOutcomes(*best->outcome, *campaign_.options_.target, campaign_.order_) <= 0) {
      SetPhase(Phase::kDone, DoneReason::kTarget, absl::StrCat("trial ", best->number, " reached the target"));
    }
  }

  // The cohort that completes the budget is still consumed; the campaign ends after it.
  void CheckTargetAndBudget() {
    CheckTarget();
    if (engine_.phase == Phase::kDone) return;
    const int64_t budget = campaign_.options_.trial_budget;
    if (budget > 0 && engine_.informative >= budget) {
      SetPhase(Phase::kDone, DoneReason::kBudget,
               absl::StrCat(engine_.informative, " informative outcomes reached the trial budget of ", budget));
    }
  }

  // ---- Noise handling (docs/math.md, "Noisy measurements") ----

  // UH's smoothing of the measure, c_s (from memory of the paper's default).
  static constexpr double kNoiseSmoothing = 0.3;

  // The trials measuring `original`'s candidate: itself first, then its replicates in trial order.
  std::vector<int64_t> Group(int64_t original) const {
    std::vector<int64_t> group{original};
    auto [begin, end] = campaign_.replicates_.equal_range(original);
    for (auto it = begin; it != end; ++it) group.push_back(it->second);
    auto [added_begin, added_end] = added_replicates_.equal_range(original);
    for (auto it = added_begin; it != added_end; ++it) group.push_back(it->second);
    return group;
  }
  // The measurements of `original`'s candidate that a ranking may use: the original's own, then its
  // replicates' that wait for it (one reported after its original was used is not among them).
  std::vector<search::Outcome> UsableMeasurements(int64_t original) const {
    std::vector<search::Outcome> out;
    for (int64_t member : Group(original)) {
      const Trial& t = *Get(member);
      if (member == original || t.use == Use::kAwaitingReplicates) out.push_back(*t.outcome);
    }
    return out;
  }
  // Every informative measurement of `original`'s candidate, best first.
  std::vector<search::Outcome> AllMeasurementsBestFirst(int64_t original) const {
    std::vector<search::Outcome> out;
    for (int64_t member : Group(original)) {
      const Trial& t = *Get(member);
      if (t.outcome.has_value() && t.outcome->informative()) out.push_back(*t.outcome);
    }
    std::sort(out.begin(), out.end(), [&](const search::Outcome& a, const search::Outcome& b) {
      return search::CompareOutcomes(a, b, campaign_.order_) < 0;
    });
    return out;
  }
  struct GroupTally {
    int informative = 0;  // measurements in
    int leased = 0;       // replicates out
  };
  GroupTally Tally(int64_t original) const {
    GroupTally tally;
    for (int64_t member : Group(original)) {
      const Trial& t = *Get(member);
      if (t.outcome.has_value() && t.outcome->informative()) ++tally.informative;
      if (t.state == TrialState::kLeased) ++tally.leased;
    }
    return tally;
  }

  // Originals waiting for replicates: the campaign's, then this plan's. `visit(number)`.
  template <typename Visit>
  void ForEachAwaiting(Visit visit) const {
    for (const auto& [sequence, number] : campaign_.awaiting_) {
      const Trial* t = Get(number);
      if (t->use == Use::kAwaitingReplicates) visit(number);
    }
    for (int64_t number : added_awaiting_) {
      if (Get(number)->use == Use::kAwaitingReplicates) visit(number);
    }
  }

  // The original whose candidate the next trial should measure again, or 0 for a new candidate: first
  // one that met the target and waits for confirmation, then the oldest original waiting for more
  // measurements than it has in and out.
  int64_t NextToReplicate() const {
    if (engine_.confirm_trial != 0) {
      const GroupTally tally = Tally(engine_.confirm_trial);
      if (tally.leased == 0 && tally.informative < NoiseOptions::kMaxMeasurements) return engine_.confirm_trial;
    }
    int64_t found = 0;
    ForEachAwaiting([&](int64_t number) {
      if (found != 0) return;
      const GroupTally tally = Tally(number);
      if (tally.informative + tally.leased < 1 + Get(number)->replicates_wanted) found = number;
    });
    return found;
  }

  // How many repeated measurements a newly reported original waits for.
  int ReplicatesWanted() {
    const NoiseOptions& noise = campaign_.options_.noise;
    switch (noise.mode) {
      case NoiseMode::kOff:
        return 0;
      case NoiseMode::kReplicates:
        return noise.replicates - 1;
      case NoiseMode::kAuto: {
        // UH re-evaluates λ_reev of λ members: a share r_λ = max(0.1, 2/λ) of originals (from memory
        // of the paper's default; at least two per cohort for small λ), kept as a running credit so
        // the share holds exactly over many cohorts without drawing from the random stream.
        const double lambda = engine_.distribution->population_size();
        engine_.replicate_credit += std::max(0.1, 2.0 / lambda);
        if (engine_.replicate_credit < 1.0) return 0;
        engine_.replicate_credit -= 1.0;
        return 1;
      }
    }
    return 0;
  }

  // A replicate's outcome joins its original's ranking while that one waits for a cohort; arrived
  // after the original was used (or dropped), it is kept and unused. Its original becomes pending
  // once all the measurements it waits for are in.
  void StoreReplicate(Trial& t) {
    const Trial& original = *Get(t.replicate_of);
    if (original.use == Use::kPending) {
      t.use = Use::kAwaitingReplicates;
      return;
    }
    if (original.use != Use::kAwaitingReplicates) {
      t.use = Use::kTooStale;
      return;
    }
    t.use = Use::kAwaitingReplicates;
    const int64_t number = original.number;
    if (Tally(number).informative >= 1 + original.replicates_wanted) {
      Mutable(number).use = Use::kPending;
      AddPending(number);
    }
  }

  // Target confirmation: the target counts as reached once at least two measurements of one candidate
  // are in and their median, the worse middle one for an even count, reaches it. A single
  // measurement that reaches it asks for one more; a repeat that misses it withdraws the request.
  void CheckConfirmation(int64_t original, const search::Outcome& latest) {
    const search::Outcome& target = *campaign_.options_.target;
    const std::vector<search::Outcome> in = AllMeasurementsBestFirst(original);
    const auto meets = [&](const search::Outcome& o) { return search::CompareOutcomes(o, target, campaign_.order_) <= 0; };
    if (in.size() >= 2 && meets(in[in.size() / 2])) {
      if (!confirmed_.has_value()) {
        confirmed_ = absl::StrCat("trial ", original, " reached the target, confirmed by ", in.size(),
                                  " measurements of its candidate");
      }
      if (engine_.confirm_trial == original) engine_.confirm_trial = 0;
      return;
    }
    if (meets(latest)) {
      engine_.confirm_trial = original;
    } else if (engine_.confirm_trial == original) {
      engine_.confirm_trial = 0;
    }
  }

  // Tie spans of the cohort. Members measured more than once are ranked by the median of the ranks
  // their measurements take among all measurements of the cohort (only the order is used).
  absl::StatusOr<std::vector<search::TieSpan>> RankMeasured(const std::vector<std::vector<search::Outcome>>& measured) const {
    std::vector<search::Outcome> firsts, all;
    bool repeated = false;
    for (const auto& m : measured) {
      firsts.push_back(m.front());
      all.insert(all.end(), m.begin(), m.end());
      repeated = repeated || m.size() > 1;
    }
    if (!repeated) return search::RankCohort(firsts, campaign_.order_);
    const std::vector<double> rank = search::JointRanks(all, campaign_.order_);
    std::vector<search::Outcome> by_median;
    size_t at = 0;
    for (const auto& m : measured) {
      std::vector<double> own(rank.begin() + at, rank.begin() + at + m.size());
      at += m.size();
      std::sort(own.begin(), own.end());
      const size_t half = own.size() / 2;
      by_median.push_back(search::Outcome::Score(own.size() % 2 ? own[half] : (own[half - 1] + own[half]) / 2));
    }
    return search::RankCohort(by_median, {false, search::Direction::kLowerIsBetter, 0});
  }

  // UH's noise measure on the members measured more than once (Hansen et al., IEEE TEC 2009), and
  // under noise: auto our treatment: while s̄ > 0 the population grows, λ + max(1, λ/100) per
  // update (docs/math.md, "Noisy measurements": a larger population averages the noise out through
  // recombination; UH's own treatments, a larger σ or longer evaluations, did worse in our rows).
  void MeasureNoise(const std::vector<search::Outcome>& firsts,
                    const std::vector<std::vector<search::Outcome>>& measured, const search::SearchDistribution& next) {
    std::vector<search::Remeasurement> repeats;
    for (size_t i = 0; i < measured.size(); ++i) {
      if (measured[i].size() > 1) repeats.push_back({static_cast<int>(i), measured[i][1]});
    }
    if (repeats.empty()) return;
    const double s = search::RankChangeMeasure(firsts, repeats, campaign_.order_);
    engine_.noise_rank_change = (1 - kNoiseSmoothing) * engine_.noise_rank_change + kNoiseSmoothing * s;
    if (campaign_.options_.noise.mode != NoiseMode::kAuto || engine_.noise_rank_change <= 0) return;
    const int lambda = next.population_size();
    engine_.noise_population = std::min(campaign_.options_.max_population_size, lambda + std::max(1, lambda / 100));
  }

  // Under noise: auto a growing population keeps σ from collapsing where the noise has taken over,
  // so the usual rules may never fire there. The tutorial's TolStagnation in a form ranks allow
  // (Hansen, arXiv:1604.00772, Appendix B, from memory, compares medians of recent and older
  // values): every W = 120 + 30n/λ updates the cohort's median outcome must be better than the one
  // W updates before, else the epoch ends (a restart when restarts are on). The median of a cohort
  // is robust to the noise where its best outcome is not: a lucky record keeps coming as λ grows.
  std::optional<std::string> Stagnation(const std::vector<int64_t>& cohort, const std::vector<search::Outcome>& firsts,
                                        const search::SearchDistribution& next) {
    if (campaign_.options_.noise.mode != NoiseMode::kAuto || !next.gaussian()) return std::nullopt;
    std::vector<size_t> order(cohort.size());
    for (size_t i = 0; i < order.size(); ++i) order[i] = i;
    std::nth_element(order.begin(), order.begin() + order.size() / 2, order.end(), [&](size_t a, size_t b) {
      return search::CompareOutcomes(firsts[a], firsts[b], campaign_.order_) < 0;
    });
    const size_t median = order[order.size() / 2];
    const Trial* reference = Get(engine_.stagnation_trial);
    const double window = 120.0 + 30.0 * next.gaussian()->dimension() / next.population_size();
    if (reference != nullptr && engine_.generation - engine_.stagnation_generation < window) return std::nullopt;
    if (reference != nullptr && search::CompareOutcomes(firsts[median], *reference->outcome, campaign_.order_) >= 0) {
      return absl::StrCat("the cohort's median outcome did not improve in ", engine_.generation - engine_.stagnation_generation,
                          " updates (noise handling)");
    }
    engine_.stagnation_trial = cohort[median];
    engine_.stagnation_generation = engine_.generation;
    return std::nullopt;
  }

  const Campaign& campaign_;
  const absl::Time now_;
  EngineState engine_;
  std::vector<int64_t> added_awaiting_;  // originals this plan made wait for replicates
  std::multimap<int64_t, int64_t> added_replicates_;  // original -> replicates asked in this plan
  std::optional<std::string> confirmed_;  // a confirmed target, for CheckTarget
  std::map<int64_t, Trial> overlay_;
  int64_t leased_delta_ = 0;            // leased trials now, less the campaign's
  std::vector<int64_t> added_pending_;  // outcomes this plan made pending, in report order (AddPending)
  int pending_removed_ = 0;             // pending outcomes this plan consumed or dropped
  std::vector<GenerationRecord> generations_;
  bool distribution_changed_ = false;
  std::vector<std::pair<int64_t, std::string>> lapsed_;  // leases found run out, and their workers
};

Campaign::Campaign(search::Space space, search::OutcomeOrder order, search::DistributionOptions distribution_options,
             CampaignOptions options)
    : space_(std::move(space)),
      order_(order),
      distribution_options_(std::move(distribution_options)),
      options_(std::move(options)) {}

absl::StatusOr<Campaign> Campaign::Create(search::Space space, search::OutcomeOrder order,
                                    search::DistributionOptions distribution_options, CampaignOptions options) {
  if (absl::Status s = options.Validate(); !s.ok()) return s;
  if (options.target.has_value()) {
    if (absl::Status s = search::CheckOutcome(*options.target, order); !s.ok()) {
      return absl::InvalidArgumentError(absl::StrCat("target: ", s.message()));
    }
  }
  absl::StatusOr<search::SearchDistribution> d = search::SearchDistribution::Create(space, distribution_options);
  if (!d.ok()) return d.status();
  Campaign campaign(std::move(space), order, std::move(distribution_options), std::move(options));
  EngineState& e = campaign.engine_;
  e.random = search::RandomStream(campaign.options_.seed).state();
  e.base_population = d->population_size();
  e.sigma0 = d->gaussian() ? d->gaussian()->state().sigma : 0.0;
  e.distribution = std::make_shared<const search::SearchDistribution>(*std::move(d));
  return campaign;
}

absl::StatusOr<Campaign> Campaign::Restore(search::Space space, search::OutcomeOrder order,
                                     search::DistributionOptions distribution_options, CampaignOptions options,
                                     CampaignSnapshot snapshot) {
  if (absl::Status s = options.Validate(); !s.ok()) return s;
  if (snapshot.engine.distribution == nullptr) return absl::InvalidArgumentError("snapshot: no distribution");
  if (snapshot.engine.next_trial != static_cast<int64_t>(snapshot.trials.size()) + 1) {
    return absl::DataLossError(absl::StrCat("snapshot: next trial is ", snapshot.engine.next_trial, " but ",
                                            snapshot.trials.size(), " trials are stored"));
  }
  Campaign campaign(std::move(space), order, std::move(distribution_options), std::move(options));
  campaign.engine_ = std::move(snapshot.engine);
  campaign.trials_.assign(std::make_move_iterator(snapshot.trials.begin()), std::make_move_iterator(snapshot.trials.end()));
  for (size_t k = 0; k < campaign.trials_.size(); ++k) {
    const Trial& t = campaign.trials_[k];
    if (t.number != static_cast<int64_t>(k) + 1 || t.x.size() != campaign.space_.size()) {
      return absl::DataLossError(absl::StrCat("snapshot: trial record ", k + 1, " is inconsistent"));
    }
    if (t.replicate_of < 0 || t.replicate_of >= t.number) {
      return absl::DataLossError(absl::StrCat("snapshot: trial record ", k + 1, " repeats trial ", t.replicate_of));
    }
    campaign.Count(t, +1);
    campaign.Index(t);
    if (t.replicate_of != 0) campaign.replicates_.emplace(t.replicate_of, t.number);
  }
  // The model is not stored: it is a function of the records and the distribution (surrogate_step.h).
  const search::SearchDistribution& d = *campaign.engine_.distribution;
  if (ModelApplies(campaign.space_, campaign.options_) && d.gaussian().has_value()) {
    const auto get = [&campaign](int64_t number) { return campaign.trial(number); };
    campaign.engine_.model = FitModel(
        *d.gaussian(),
        ModelWindowPoints(campaign.space_, get, campaign.engine_.next_trial - 1, campaign.engine_.epoch, d),
        campaign.order_);
  }
  return campaign;
}

absl::StatusOr<AskPlan> Campaign::PlanAsk(int count, const std::string& worker, std::optional<absl::Duration> lease,
                                       absl::Time now) const {
  if (count < 1 || count > kMaxAskCount) {
    return absl::InvalidArgumentError(absl::StrCat("count: must be in 1..", kMaxAskCount, ", got ", count));
  }
  const absl::Duration lease_length = lease.value_or(options_.default_lease);
  if (lease_length <= absl::ZeroDuration()) {
    return absl::InvalidArgumentError(
        absl::StrCat("lease_seconds: must be positive, got ", absl::ToDoubleSeconds(lease_length)));
  }
  if (engine_.phase == Phase::kPaused) {
    return WithReason(absl::FailedPreconditionError("campaign is paused; resume it to get candidates"),
                      {std::string(reason::kCampaignPaused), {}, std::nullopt});
  }
  if (engine_.phase == Phase::kDone) return DoneRefusal("");
  Planner planner(*this, now);
  planner.Sweep();
  if (options_.trial_budget > 0) {
    const int64_t room = options_.trial_budget - engine_.informative - planner.outstanding();
    if (room <= 0) {
      return WithReason(
          absl::FailedPreconditionError(absl::StrCat(
              "the trial budget of ", options_.trial_budget, " is taken up by ", engine_.informative,
              " outcomes and ", planner.outstanding(), " outstanding trials; ask again when they report or lapse")),
          {std::string(reason::kBudgetCommitted),
           {{"trial_budget", absl::StrCat(options_.trial_budget)},
            {"outstanding", absl::StrCat(planner.outstanding())}},
           std::nullopt});
    }
    count = static_cast<int>(std::min<int64_t>(count, room));
  }
  AskPlan plan;
  plan.trials = planner.AddTrials(count, worker, lease_length);
  plan.change = planner.Finish();
  return plan;
}

absl::StatusOr<TellPlan> Campaign::PlanTell(absl::Span<const Report> reports, absl::Time now) const {
  if (reports.empty()) return absl::InvalidArgumentError("reports: at least one report is needed");
  Planner planner(*this, now);
  planner.Sweep();
  TellPlan plan;
  for (const Report& report : reports) plan.results.push_back(planner.Store(report));
  planner.UpdateWhileReady();
  plan.change = planner.Finish();
  return plan;
}

absl::StatusOr<Change> Campaign::PlanRenew(absl::Span<const int64_t> trials, const std::string& worker,
                                        std::optional<absl::Duration> lease, absl::Time now) const {
  const absl::Duration lease_length = lease.value_or(options_.default_lease);
  if (lease_length <= absl::ZeroDuration()) {
    return absl::InvalidArgumentError(
        absl::StrCat("lease_seconds: must be positive, got ", absl::ToDoubleSeconds(lease_length)));
  }
  if (trials.empty()) return absl::InvalidArgumentError("trials: at least one trial number is needed");
  Planner planner(*this, now);
  planner.Sweep();
  for (int64_t number : trials) {
    const Trial* t = planner.Get(number);
    if (t == nullptr) {
      return WithReason(absl::NotFoundError(absl::StrCat("trial ", number, ": no such trial in this campaign")),
                        {std::string(reason::kTrialNotFound), {{"trial", absl::StrCat(number)}}, std::nullopt});
    }
    if (t->outcome.has_value()) {
      return WithReason(
          absl::FailedPreconditionError(absl::StrCat("trial ", number, ": already reported; nothing to renew")),
          {std::string(reason::kTrialAlreadyReported), {{"trial", absl::StrCat(number)}}, std::nullopt});
    }
    if (!t->worker.empty() && t->worker != worker) {
      return WithReason(absl::FailedPreconditionError(absl::StrCat("trial ", number, ": leased to worker '",
                                                                   t->worker, "', not '", worker, "'")),
                        {std::string(reason::kLeaseHeldByOther), {{"trial", absl::StrCat(number)}}, std::nullopt});
    }
  }
  for (int64_t number : trials) planner.Lease(number, worker, now + lease_length);
  return planner.Finish();
}

absl::Status Campaign::DoneRefusal(absl::string_view then) const {
  return WithReason(
      absl::FailedPreconditionError(absl::StrCat("campaign is done (", DoneReasonName(engine_.reason), ")",
                                                 engine_.phase_message.empty() ? "" : ": ", engine_.phase_message,
                                                 then)),
      {std::string(reason::kCampaignDone), {{"done_reason", std::string(DoneReasonName(engine_.reason))}},
       std::nullopt});
}

Change Campaign::PlanSweep(absl::Time now) const {
  Planner planner(*this, now);
  planner.Sweep();
  return planner.Finish();
}

absl::StatusOr<Change> Campaign::PlanSetPhase(PhaseCommand command, absl::Time now) const {
  Planner planner(*this, now);
  switch (command) {
    case PhaseCommand::kPause:
      if (engine_.phase == Phase::kDone) {
        return DoneRefusal("; a done campaign cannot be paused");
      }
      if (engine_.phase == Phase::kPaused) return planner.Finish();
      planner.SetPhase(Phase::kPaused, DoneReason::kNone, "paused by request");
      break;
    case PhaseCommand::kResume:
      if (engine_.phase == Phase::kDone) {
        return DoneRefusal("; a done campaign cannot be resumed");
      }
      if (engine_.phase == Phase::kOpen) return planner.Finish();
      planner.SetPhase(Phase::kOpen, DoneReason::kNone, "resumed by request");
      break;
    case PhaseCommand::kFinish:
      if (engine_.phase == Phase::kDone) return planner.Finish();
      planner.SetPhase(Phase::kDone, DoneReason::kStopped, "finished by request");
      break;
  }
  return planner.Finish();
}

void Campaign::Apply(Change change) {
  for (Trial& t : change.trials) {
    OGIVE_CHECK(t.number >= 1 && t.number <= static_cast<int64_t>(trials_.size()) + 1);
    if (t.number == static_cast<int64_t>(trials_.size()) + 1) {
      Count(t, +1);
      Index(t);
      if (t.replicate_of != 0) replicates_.emplace(t.replicate_of, t.number);
      trials_.push_back(std::move(t));
      continue;
    }
    Trial& old = trials_[t.number - 1];
    Count(old, -1);
    Unindex(old);
    old = std::move(t);
    Count(old, +1);
    Index(old);
  }
  engine_ = std::move(change.engine);
}

absl::StatusOr<std::vector<Trial>> Campaign::Ask(int count, const std::string& worker,
                                              std::optional<absl::Duration> lease, absl::Time now) {
  absl::StatusOr<AskPlan> plan = PlanAsk(count, worker, lease, now);
  if (!plan.ok()) return plan.status();
  Apply(std::move(plan->change));
  std::vector<Trial> asked;
  for (int64_t number : plan->trials) asked.push_back(*trial(number));
  return asked;
}

absl::StatusOr<std::vector<ReportResult>> Campaign::Tell(absl::Span<const Report> reports, absl::Time now) {
  absl::StatusOr<TellPlan> plan = PlanTell(reports, now);
  if (!plan.ok()) return plan.status();
  Apply(std::move(plan->change));
  return std::move(plan->results);
}

absl::Status Campaign::Renew(absl::Span<const int64_t> trials, const std::string& worker,
                          std::optional<absl::Duration> lease, absl::Time now) {
  absl::StatusOr<Change> change = PlanRenew(trials, worker, lease, now);
  if (!change.ok()) return change.status();
  Apply(*std::move(change));
  return absl::OkStatus();
}

int Campaign::Sweep(absl::Time now) {
  const int64_t before = counts_.lapsed;
  Apply(PlanSweep(now));
  return static_cast<int>(counts_.lapsed - before);
}

absl::Status Campaign::SetPhase(PhaseCommand command, absl::Time now) {
  absl::StatusOr<Change> change = PlanSetPhase(command, now);
  if (!change.ok()) return change.status();
  Apply(*std::move(change));
  return absl::OkStatus();
}

const Trial* Campaign::trial(int64_t number) const {
  if (number < 1 || number > static_cast<int64_t>(trials_.size())) return nullptr;
  return &trials_[number - 1];
}

CampaignSnapshot Campaign::Snapshot() const {
  return CampaignSnapshot{engine_, std::vector<Trial>(trials_.begin(), trials_.end())};
}

void Campaign::Count(const Trial& t, int sign) {
  switch (t.state) {
    case TrialState::kLeased:
      counts_.leased += sign;
      break;
    case TrialState::kReported:
      counts_.reported += sign;
      break;
    case TrialState::kLapsed:
      counts_.lapsed += sign;
      break;
    case TrialState::kVoided:
      counts_.voided += sign;
      break;
  }
  if (t.late) counts_.late += sign;
  switch (t.use) {
    case Use::kPending:
      counts_.pending += sign;
      break;
    case Use::kConsumed:
      counts_.consumed += sign;
      break;
    case Use::kTooStale:
      counts_.too_stale += sign;
      break;
    case Use::kAwaitingReplicates:
      counts_.awaiting_replicates += sign;
      break;
    case Use::kNone:
      break;
  }
}

void Campaign::Index(const Trial& t) {
  if (t.state == TrialState::kLeased) leases_.insert({t.lease_deadline, t.number});
  if (t.use == Use::kPending) pending_.insert({t.report_sequence, t.number});
  if (t.use == Use::kAwaitingReplicates && t.replicate_of == 0) awaiting_.insert({t.report_sequence, t.number});
}

void Campaign::Unindex(const Trial& t) {
  if (t.state == TrialState::kLeased) leases_.erase({t.lease_deadline, t.number});
  if (t.use == Use::kPending) pending_.erase({t.report_sequence, t.number});
  if (t.use == Use::kAwaitingReplicates && t.replicate_of == 0) awaiting_.erase({t.report_sequence, t.number});
}

}  // namespace ogive::campaign
