// Campaign: the asynchronous campaign engine. It holds a campaign's search distribution, its random-stream
// position, its counters and its trials, and turns the stream of asks, reports, renewals and lapses
// into sound distribution updates (see ../../docs/math.md, "Asynchrony").
//
// Pure and deterministic: no I/O, no clock (every operation takes `now`), randomness from the campaign's
// own seeded stream. The same design, seed and sequence of calls give the same candidates and states.
//
// Every operation comes in two steps so that memory and storage never disagree: Plan*() computes the
// Change a request makes without publishing it (const), the caller commits that change to storage,
// and Apply() then makes it the campaign's state. A failed commit leaves the campaign as it was. The
// one-step forms (Ask, Tell, ...) plan and apply at once, for tests and in-process use.
//
// Not thread-safe: the caller serializes operations on one campaign.
#ifndef OGIVE_SERVER_CAMPAIGN_CAMPAIGN_H_
#define OGIVE_SERVER_CAMPAIGN_CAMPAIGN_H_

#include <cstdint>
#include <deque>
#include <map>
#include <memory>
#include <optional>
#include <set>
#include <string>
#include <utility>
#include <vector>

#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "absl/strings/string_view.h"
#include "absl/time/time.h"
#include "absl/types/span.h"
#include "server/search/ordinal_model.h"
#include "server/search/random_stream.h"
#include "server/search/search_distribution.h"
#include "server/campaign/campaign_options.h"
#include "server/campaign/trial.h"

namespace ogive::campaign {

enum class Phase { kOpen, kPaused, kDone };
enum class DoneReason { kNone, kBudget, kTarget, kConverged, kStopped };
const char* PhaseName(Phase phase);             // "open", "paused", "done"
const char* DoneReasonName(DoneReason reason);  // "", "budget", "target", "converged", "stopped"

enum class PhaseCommand { kPause, kResume, kFinish };

// Everything about a campaign besides its trials and its fixed design.
struct EngineState {
  Phase phase = Phase::kOpen;
  DoneReason reason = DoneReason::kNone;
  std::string phase_message;  // why the phase is what it is, for people
  std::shared_ptr<const search::SearchDistribution> distribution;  // shared between plans; never mutated
  search::RandomStream::State random{};
  int64_t generation = 0;        // updates so far, over all restarts
  int64_t epoch = 0;             // restarts so far
  int64_t next_trial = 1;
  int64_t report_sequence = 0;   // reports stored so far
  int64_t informative = 0;       // informative outcomes stored so far (the budget counts these)
  int base_population = 0;       // the design's λ, doubled at each restart
  int64_t flat_generations = 0;  // consecutive updates whose cohort was all tied
  int peak_outstanding = 0;      // most live trials out at once since the last update (docs/math.md)
  double evaluation_seconds = 0; // typical evaluation time: median of the last cohort's (0: none yet)
  int64_t epoch_best_trial = 0;       // best informative outcome sampled in this epoch, 0 = none
  int64_t last_mixed_generation = 0;  // last update of this epoch whose cohort was not all tied, 0 = none
  int64_t best_trial = 0;        // best informative outcome so far, 0 = none
  double sigma0 = 0.0;           // initial step size (internal units)
  // Noise handling (docs/math.md, "Noisy measurements").
  double noise_rank_change = 0;  // s̄: the smoothed rank-change measure
  int noise_population = 0;      // λ floor raised by noise: auto while s̄ > 0 (0: none; reset at a restart)
  double replicate_credit = 0;   // accumulated share of originals to measure twice for s
  int64_t confirm_trial = 0;     // met the target once; waits for a confirming measurement (0: none)
  int64_t stagnation_trial = 0;       // noise: auto: the cohort median the next must beat (0: none yet)
  int64_t stagnation_generation = 0;  // the update that cohort median came from
  // The surrogate (surrogate_step.h) fitted at the last update, nullptr for none. Not stored: a
  // function of the trial records and the distribution, rebuilt by Restore().
  std::shared_ptr<const search::OrdinalModel> model;
  double model_agreement = 0;  // τ_b of the model on the last cohort where it was defined (0: none)
};

// One update, for history and plots.
struct GenerationRecord {
  int64_t generation = 0;  // the generation this update produced (1, 2, ...)
  int64_t epoch = 0;
  int population_size = 0;
  std::vector<int64_t> cohort;  // trial numbers consumed, oldest report first
  double mean_staleness = 0.0;
  int max_staleness = 0;
  search::DistributionSummary summary;  // after the update
  int64_t best_trial = 0;
};

// The effect of one request: trial records to write (new or changed, complete), the engine state
// after it, and the updates it made. Apply() publishes it.
struct Change {
  std::vector<Trial> trials;
  EngineState engine;
  std::vector<GenerationRecord> generations;
  bool distribution_changed = false;  // an update or restart replaced the distribution
  // Trials whose lease ran out in this change (they are in `trials` too), with the worker that held
  // each, in deadline order.
  std::vector<std::pair<int64_t, std::string>> lapsed;
};

struct AskPlan {
  Change change;
  std::vector<int64_t> trials;  // numbers of the new trials, in order
};

struct TellPlan {
  Change change;
  std::vector<ReportResult> results;  // one per report, in order
};

// Trials by state, and informative outcomes by use.
struct TrialCounts {
  int64_t leased = 0, reported = 0, lapsed = 0, voided = 0;
  int64_t late = 0;     // reported after their lease lapsed (within `reported` or `voided`)
  int64_t pending = 0, consumed = 0, too_stale = 0, awaiting_replicates = 0;
  int64_t total() const { return leased + reported + lapsed + voided; }
};

// A campaign's full state: what Restore() needs to continue bit-identically.
struct CampaignSnapshot {
  EngineState engine;  // distribution is set
  std::vector<Trial> trials;
};

class Campaign {
 public:
  // The largest count one Ask may request.
  static constexpr int kMaxAskCount = 10000;
  // A trial out counts as being evaluated, toward the population, for this many typical evaluation
  // times after it was leased (EngineState::evaluation_seconds; docs/math.md, "Only live trials count").
  static constexpr double kLiveEvaluations = 3.0;
  // The largest spread σ·√λmax(C) of the Gaussian block, in internal units (1 = the width of every
  // real and integer range): a wider one carries no information inside hard bounds.
  static constexpr double kMaxStepSpread = 1.0;
  // A cohort tied on the best level of its epoch keeps σ when a cohort of mixed outcomes came within
  // this many updates, and widens it otherwise (docs/math.md, "Ties and coarse grades").
  static constexpr int kMixedCohortWindow = 5;

  // A new campaign. INVALID_ARGUMENT naming the field for invalid options.
  static absl::StatusOr<Campaign> Create(search::Space space, search::OutcomeOrder order,
                                      search::DistributionOptions distribution_options, CampaignOptions options);
  // Continues from a snapshot taken by Snapshot() of a campaign created with the same arguments.
  // INVALID_ARGUMENT (or DATA_LOSS for inconsistent trials) if the snapshot does not fit.
  static absl::StatusOr<Campaign> Restore(search::Space space, search::OutcomeOrder order,
                                       search::DistributionOptions distribution_options, CampaignOptions options,
                                       CampaignSnapshot snapshot);

  // Samples `count` candidates leased to `worker` until now + lease (default: the campaign's lease).
  // Leases that ran out by `now` lapse first. Never waits for results. INVALID_ARGUMENT for count < 1
  // or > kMaxAskCount or a non-positive lease; FAILED_PRECONDITION when the campaign is paused or done,
  // or its trial budget is taken up by outstanding trials. May return fewer than `count` trials when
  // the budget has room for fewer.
  absl::StatusOr<AskPlan> PlanAsk(int count, const std::string& worker, std::optional<absl::Duration> lease,
                                  absl::Time now) const;
  // Stores each report (see ReportResult); forms cohorts of λ pending outcomes (oldest reports first)
  // and updates; checks target, budget and convergence. Reports are accepted in every phase; updates
  // happen while open or paused. Fails as a whole only if `reports` is empty (INVALID_ARGUMENT).
  absl::StatusOr<TellPlan> PlanTell(absl::Span<const Report> reports, absl::Time now) const;
  // Extends the leases of `trials` held by `worker` to now + lease. A lapsed, unreported trial is leased
  // again. All or nothing: NOT_FOUND for an unknown trial, FAILED_PRECONDITION for a reported one or
  // one leased to another worker.
  absl::StatusOr<Change> PlanRenew(absl::Span<const int64_t> trials, const std::string& worker,
                                   std::optional<absl::Duration> lease, absl::Time now) const;
  // Lapses every lease that ran out by `now`.
  Change PlanSweep(absl::Time now) const;
  // pause (open -> paused), resume (paused -> open), finish (-> done, reason stopped). Repeating the
  // current phase is accepted and changes nothing; resuming a done campaign is FAILED_PRECONDITION.
  absl::StatusOr<Change> PlanSetPhase(PhaseCommand command, absl::Time now) const;

  // Publishes a change planned on the current state. REQUIRES: no other change was applied since.
  void Apply(Change change);

  // Plan and apply in one step.
  absl::StatusOr<std::vector<Trial>> Ask(int count, const std::string& worker, std::optional<absl::Duration> lease,
                                         absl::Time now);
  absl::StatusOr<std::vector<ReportResult>> Tell(absl::Span<const Report> reports, absl::Time now);
  absl::Status Renew(absl::Span<const int64_t> trials, const std::string& worker,
                     std::optional<absl::Duration> lease, absl::Time now);
  int Sweep(absl::Time now);  // returns the number of trials that lapsed
  absl::Status SetPhase(PhaseCommand command, absl::Time now);

  const search::Space& space() const { return space_; }
  const search::OutcomeOrder& order() const { return order_; }
  const CampaignOptions& options() const { return options_; }
  const search::DistributionOptions& distribution_options() const { return distribution_options_; }
  const EngineState& engine() const { return engine_; }
  const search::SearchDistribution& distribution() const { return *engine_.distribution; }
  const TrialCounts& counts() const { return counts_; }
  // Trials 1..trial_count(); nullptr for an unknown number.
  int64_t trial_count() const { return static_cast<int64_t>(trials_.size()); }
  const Trial* trial(int64_t number) const;
  const std::deque<Trial>& trials() const { return trials_; }
  const Trial* best() const { return trial(engine_.best_trial); }

  CampaignSnapshot Snapshot() const;

 private:
  class Planner;
  Campaign(search::Space space, search::OutcomeOrder order, search::DistributionOptions distribution_options,
        CampaignOptions options);
  // FAILED_PRECONDITION with reason CAMPAIGN_DONE: "campaign is done (<reason>): <message><then>".
  absl::Status DoneRefusal(absl::string_view then) const;
  void Count(const Trial& t, int sign);
  void Index(const Trial& t);
  void Unindex(const Trial& t);

  search::Space space_;
  search::OutcomeOrder order_;
  search::DistributionOptions distribution_options_;
  CampaignOptions options_;
  EngineState engine_;
  // trials_[k] has number k + 1. A deque, not a vector: a campaign only ever appends, and a vector's
  // growth would copy every trial while the host holds the campaign's lock (a stall of every request of
  // the campaign, tens of milliseconds at some ten thousand trials).
  std::deque<Trial> trials_;
  TrialCounts counts_;
  std::set<std::pair<int64_t, int64_t>> pending_;  // (report_sequence, number) of pending outcomes
  std::set<std::pair<absl::Time, int64_t>> leases_;  // (lease_deadline, number) of leased trials, soonest first
  // (report_sequence, number) of originals waiting for replicates, and each original's replicates.
  std::set<std::pair<int64_t, int64_t>> awaiting_;
  std::multimap<int64_t, int64_t> replicates_;
};

}  // namespace ogive::campaign

#endif  // OGIVE_SERVER_CAMPAIGN_CAMPAIGN_H_
