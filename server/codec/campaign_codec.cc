#include "server/codec/campaign_codec.h"

#include <cmath>
#include <memory>
#include <optional>

#include "absl/status/status.h"
#include "absl/strings/str_cat.h"
#include "server/codec/design_codec.h"
#include "server/codec/state_codec.h"

namespace ogive::codec {
namespace {

int64_t Nanos(absl::Time t) { return absl::ToUnixNanos(t); }
absl::Time FromNanos(int64_t ns) { return absl::FromUnixNanos(ns); }

}  // namespace

v1::TrialState TrialStateToProto(campaign::TrialState s) {
  switch (s) {
    case campaign::TrialState::kLeased:
      return v1::TRIAL_STATE_LEASED;
    case campaign::TrialState::kReported:
      return v1::TRIAL_STATE_REPORTED;
    case campaign::TrialState::kLapsed:
      return v1::TRIAL_STATE_LAPSED;
    case campaign::TrialState::kVoided:
      return v1::TRIAL_STATE_VOIDED;
  }
  return v1::TRIAL_STATE_UNSPECIFIED;
}

absl::StatusOr<campaign::TrialState> TrialStateFromProto(v1::TrialState s) {
  switch (s) {
    case v1::TRIAL_STATE_LEASED:
      return campaign::TrialState::kLeased;
    case v1::TRIAL_STATE_REPORTED:
      return campaign::TrialState::kReported;
    case v1::TRIAL_STATE_LAPSED:
      return campaign::TrialState::kLapsed;
    case v1::TRIAL_STATE_VOIDED:
      return campaign::TrialState::kVoided;
    default:
      return absl::DataLossError(absl::StrCat("trial record: unknown state ", static_cast<int>(s)));
  }
}

v1::OutcomeUse OutcomeUseToProto(campaign::Use u) {
  switch (u) {
    case campaign::Use::kNone:
      return v1::OUTCOME_USE_UNSPECIFIED;
    case campaign::Use::kPending:
      return v1::OUTCOME_USE_PENDING;
    case campaign::Use::kConsumed:
      return v1::OUTCOME_USE_CONSUMED;
    case campaign::Use::kTooStale:
      return v1::OUTCOME_USE_TOO_STALE;
    case campaign::Use::kAwaitingReplicates:
      return v1::OUTCOME_USE_AWAITING_REPLICATES;
  }
  return v1::OUTCOME_USE_UNSPECIFIED;
}

namespace {

campaign::Use UseFromProto(v1::OutcomeUse u) {
  switch (u) {
    case v1::OUTCOME_USE_PENDING:
      return campaign::Use::kPending;
    case v1::OUTCOME_USE_CONSUMED:
      return campaign::Use::kConsumed;
    case v1::OUTCOME_USE_TOO_STALE:
      return campaign::Use::kTooStale;
    case v1::OUTCOME_USE_AWAITING_REPLICATES:
      return campaign::Use::kAwaitingReplicates;
    default:
      return campaign::Use::kNone;
  }
}

}  // namespace

absl::StatusOr<campaign::CampaignOptions> CampaignOptionsFromDesign(const v1::CampaignDesign& design) {
  absl::StatusOr<search::OutcomeOrder> order = OrderFromObjective(design.objective());
  if (!order.ok()) return order.status();
  campaign::CampaignOptions options;
  options.seed = design.seed();
  if (design.staleness_limit() < 0) {
    return absl::InvalidArgumentError(
        absl::StrCat("staleness_limit: must be >= 0 (0 = default ", campaign::kDefaultStalenessLimit, "), got ",
                     design.staleness_limit()));
  }
  if (design.staleness_limit() > 0) options.staleness_limit = design.staleness_limit();
  options.trial_budget = design.trial_budget();
  if (!std::isfinite(design.lease_seconds()) || design.lease_seconds() < 0) {
    return absl::InvalidArgumentError(
        absl::StrCat("lease_seconds: must be 0 (default) or positive, got ", design.lease_seconds()));
  }
  if (design.lease_seconds() > 0) options.default_lease = absl::Seconds(design.lease_seconds());
  options.restarts = design.restarts();
  const std::optional<campaign::NoiseOptions> noise = campaign::ParseNoise(design.noise());
  if (!noise.has_value()) return absl::InvalidArgumentError(absl::StrCat("noise: ", campaign::NoiseRule(design.noise())));
  options.noise = *noise;
  if (design.has_confirm_target()) options.noise.confirm_target = design.confirm_target();
  {
    int real_and_integer = 0;
    for (const auto& parameter : design.parameters()) {
      real_and_integer += parameter.has_real() || parameter.has_integer() ? 1 : 0;
    }
    const std::optional<bool> model = campaign::ParseModel(design.model(), real_and_integer, design.objective().has_grade_scale());
    if (!model.has_value()) {
      return absl::InvalidArgumentError(absl::StrCat("model: ", campaign::kModelRule, ", got \"", design.model(), "\""));
    }
    options.surrogate = *model;
  }
  options.grade_labels.assign(design.objective().grade_scale().labels().begin(),
                              design.objective().grade_scale().labels().end());
  if (design.has_target() && design.has_target_grade()) {
    return absl::InvalidArgumentError("target, target_grade: set at most one of them");
  }
  if (design.has_target()) {
    if (order->graded) return absl::InvalidArgumentError("target: a graded campaign takes target_grade, not target");
    if (!std::isfinite(design.target())) {
      return absl::InvalidArgumentError(absl::StrCat("target: must be finite, got ", design.target()));
    }
    options.target = search::Outcome::Score(design.target());
  }
  if (design.has_target_grade()) {
    v1::Outcome grade;
    grade.set_grade(design.target_grade());
    absl::StatusOr<search::Outcome> o = OutcomeFromProto(grade, design.objective());
    if (!o.ok()) return absl::InvalidArgumentError(absl::StrCat("target_grade: ", o.status().message()));
    options.target = *o;
  }
  if (absl::Status s = options.Validate(); !s.ok()) return s;
  return options;
}

v1::TrialRecord TrialToProto(const campaign::Trial& t) {
  v1::TrialRecord r;
  r.set_number(t.number);
  r.set_generation(t.generation);
  r.set_epoch(t.epoch);
  for (int i = 0; i < t.x.size(); ++i) r.add_internal(t.x[i]);
  r.set_repaired(t.repaired);
  r.set_state(TrialStateToProto(t.state));
  r.set_worker(t.worker);
  r.set_leased_at_ns(Nanos(t.leased_at));
  r.set_lease_deadline_ns(Nanos(t.lease_deadline));
  if (t.outcome.has_value()) {
    switch (t.outcome->kind) {
      case search::Outcome::Kind::kScore:
        r.set_outcome_kind(v1::OUTCOME_KIND_SCORE);
        r.set_score(t.outcome->score);
        break;
      case search::Outcome::Kind::kGrade:
        r.set_outcome_kind(v1::OUTCOME_KIND_GRADE);
        r.set_grade_index(t.outcome->grade);
        break;
      case search::Outcome::Kind::kInfeasible:
        r.set_outcome_kind(v1::OUTCOME_KIND_INFEASIBLE);
        break;
      case search::Outcome::Kind::kVoid:
        r.set_outcome_kind(v1::OUTCOME_KIND_VOID);
        break;
    }
  }
  r.set_note(t.note);
  r.set_reported_by(t.reported_by);
  r.set_reported_at_ns(Nanos(t.reported_at));
  r.set_report_sequence(t.report_sequence);
  r.set_late(t.late);
  r.set_use(OutcomeUseToProto(t.use));
  r.set_consumed_by(t.consumed_by);
  r.set_replicate_of(t.replicate_of);
  r.set_replicates_wanted(t.replicates_wanted);
  r.set_screened_from(t.screened_from);
  return r;
}

absl::StatusOr<campaign::Trial> TrialFromProto(const v1::TrialRecord& r) {
  campaign::Trial t;
  t.number = r.number();
  t.generation = r.generation();
  t.epoch = r.epoch();
  t.x.resize(r.internal_size());
  for (int i = 0; i < r.internal_size(); ++i) t.x[i] = r.internal(i);
  t.repaired = r.repaired();
  absl::StatusOr<campaign::TrialState> state = TrialStateFromProto(r.state());
  if (!state.ok()) return state.status();
  t.state = *state;
  t.worker = r.worker();
  t.leased_at = FromNanos(r.leased_at_ns());
  t.lease_deadline = FromNanos(r.lease_deadline_ns());
  switch (r.outcome_kind()) {
    case v1::OUTCOME_KIND_UNSPECIFIED:
      break;
    case v1::OUTCOME_KIND_SCORE:
      t.outcome = search::Outcome::Score(r.score());
      break;
    case v1::OUTCOME_KIND_GRADE:
      t.outcome = search::Outcome::Grade(r.grade_index());
      break;
    case v1::OUTCOME_KIND_INFEASIBLE:
      t.outcome = search::Outcome::Infeasible();
      break;
    case v1::OUTCOME_KIND_VOID:
      t.outcome = search::Outcome::Void();
      break;
    default:
      return absl::DataLossError(absl::StrCat("trial ", r.number(), ": unknown outcome kind"));
  }
  t.note = r.note();
  t.reported_by = r.reported_by();
  t.reported_at = FromNanos(r.reported_at_ns());
  t.report_sequence = r.report_sequence();
  t.late = r.late();
  t.use = UseFromProto(r.use());
  t.consumed_by = r.consumed_by();
  t.replicate_of = r.replicate_of();
  t.replicates_wanted = r.replicates_wanted();
  t.screened_from = r.screened_from();
  if (t.screened_from < 0) {
    return absl::DataLossError(absl::StrCat("trial record: screened_from is negative: ", t.screened_from));
  }
  if (t.replicates_wanted < 0 || t.replicates_wanted >= campaign::NoiseOptions::kMaxMeasurements) {
    return absl::DataLossError(absl::StrCat("trial record: replicates_wanted out of range: ", t.replicates_wanted));
  }
  return t;
}

v1::CampaignPhase PhaseToProto(campaign::Phase phase) {
  switch (phase) {
    case campaign::Phase::kOpen:
      return v1::CAMPAIGN_PHASE_OPEN;
    case campaign::Phase::kPaused:
      return v1::CAMPAIGN_PHASE_PAUSED;
    case campaign::Phase::kDone:
      return v1::CAMPAIGN_PHASE_DONE;
  }
  return v1::CAMPAIGN_PHASE_UNSPECIFIED;
}

v1::DoneReason DoneReasonToProto(campaign::DoneReason reason) {
  switch (reason) {
    case campaign::DoneReason::kNone:
      return v1::DONE_REASON_UNSPECIFIED;
    case campaign::DoneReason::kBudget:
      return v1::DONE_REASON_BUDGET;
    case campaign::DoneReason::kTarget:
      return v1::DONE_REASON_TARGET;
    case campaign::DoneReason::kConverged:
      return v1::DONE_REASON_CONVERGED;
    case campaign::DoneReason::kStopped:
      return v1::DONE_REASON_STOPPED;
  }
  return v1::DONE_REASON_UNSPECIFIED;
}

v1::EngineState EngineStateToProto(const campaign::EngineState& e, bool include_distribution) {
  v1::EngineState p;
  p.set_phase(PhaseToProto(e.phase));
  p.set_reason(DoneReasonToProto(e.reason));
  p.set_phase_message(e.phase_message);
  if (include_distribution && e.distribution) {
    *p.mutable_distribution() = DistributionStateToProto(e.distribution->state());
  }
  for (uint64_t word : e.random) p.add_random_state(word);
  p.set_generation(e.generation);
  p.set_epoch(e.epoch);
  p.set_next_trial(e.next_trial);
  p.set_report_sequence(e.report_sequence);
  p.set_informative(e.informative);
  p.set_base_population(e.base_population);
  p.set_flat_generations(e.flat_generations);
  p.set_peak_outstanding(e.peak_outstanding);
  p.set_best_trial(e.best_trial);
  p.set_sigma0(e.sigma0);
  p.set_evaluation_seconds(e.evaluation_seconds);
  p.set_epoch_best_trial(e.epoch_best_trial);
  p.set_last_mixed_generation(e.last_mixed_generation);
  p.set_noise_rank_change(e.noise_rank_change);
  p.set_noise_population(e.noise_population);
  p.set_replicate_credit(e.replicate_credit);
  p.set_confirm_trial(e.confirm_trial);
  p.set_stagnation_trial(e.stagnation_trial);
  p.set_stagnation_generation(e.stagnation_generation);
  p.set_model_agreement(e.model_agreement);
  return p;
}

absl::StatusOr<campaign::EngineState> EngineStateFromProto(const v1::EngineState& p, const search::Space& space) {
  campaign::EngineState e;
  switch (p.phase()) {
    case v1::CAMPAIGN_PHASE_OPEN:
      e.phase = campaign::Phase::kOpen;
      break;
    case v1::CAMPAIGN_PHASE_PAUSED:
      e.phase = campaign::Phase::kPaused;
      break;
    case v1::CAMPAIGN_PHASE_DONE:
      e.phase = campaign::Phase::kDone;
      break;
    default:
      return absl::DataLossError("engine state: unknown phase");
  }
  switch (p.reason()) {
    case v1::DONE_REASON_BUDGET:
      e.reason = campaign::DoneReason::kBudget;
      break;
    case v1::DONE_REASON_TARGET:
      e.reason = campaign::DoneReason::kTarget;
      break;
    case v1::DONE_REASON_CONVERGED:
      e.reason = campaign::DoneReason::kConverged;
      break;
    case v1::DONE_REASON_STOPPED:
      e.reason = campaign::DoneReason::kStopped;
      break;
    default:
      e.reason = campaign::DoneReason::kNone;
  }
  e.phase_message = p.phase_message();
  if (p.random_state_size() != 4) return absl::DataLossError("engine state: the random state needs 4 words");
  for (int i = 0; i < 4; ++i) e.random[i] = p.random_state(i);
  absl::StatusOr<search::DistributionState> state = DistributionStateFromProto(p.distribution());
  if (!state.ok()) return state.status();
  absl::StatusOr<search::SearchDistribution> d = search::SearchDistribution::FromState(space, *std::move(state));
  if (!d.ok()) return absl::DataLossError(absl::StrCat("engine state: ", d.status().message()));
  e.distribution = std::make_shared<const search::SearchDistribution>(*std::move(d));
  e.generation = p.generation();
  e.epoch = p.epoch();
  e.next_trial = p.next_trial();
  e.report_sequence = p.report_sequence();
  e.informative = p.informative();
  e.base_population = p.base_population();
  e.flat_generations = p.flat_generations();
  e.peak_outstanding = p.peak_outstanding();
  e.best_trial = p.best_trial();
  e.sigma0 = p.sigma0();
  e.evaluation_seconds = p.evaluation_seconds();
  e.epoch_best_trial = p.epoch_best_trial();
  e.last_mixed_generation = p.last_mixed_generation();
  e.noise_rank_change = p.noise_rank_change();
  e.noise_population = p.noise_population();
  e.replicate_credit = p.replicate_credit();
  e.confirm_trial = p.confirm_trial();
  e.stagnation_trial = p.stagnation_trial();
  e.stagnation_generation = p.stagnation_generation();
  e.model_agreement = p.model_agreement();
  if (!(e.model_agreement >= -1 && e.model_agreement <= 1)) {
    return absl::DataLossError(absl::StrCat("engine state: model_agreement must be in [-1, 1], got ", e.model_agreement));
  }
  if (!std::isfinite(e.noise_rank_change) || e.noise_population < 0 ||
      e.noise_population > campaign::kMaxPopulationSize || !(e.replicate_credit >= 0) ||
      e.replicate_credit >= 1 || e.confirm_trial < 0 || e.stagnation_trial < 0 ||
      e.stagnation_generation < 0) {
    return absl::DataLossError("engine state: a noise-handling field is out of range");
  }
  if (!(e.evaluation_seconds >= 0) || !std::isfinite(e.evaluation_seconds)) {
    return absl::DataLossError("engine state: evaluation_seconds must be finite and not negative");
  }
  return e;
}

v1::CampaignSnapshot SnapshotToProto(const campaign::CampaignSnapshot& snapshot) {
  v1::CampaignSnapshot p;
  *p.mutable_engine() = EngineStateToProto(snapshot.engine);
  for (const campaign::Trial& t : snapshot.trials) *p.add_trials() = TrialToProto(t);
  return p;
}

absl::StatusOr<campaign::CampaignSnapshot> SnapshotFromProto(const v1::CampaignSnapshot& p, const search::Space& space) {
  campaign::CampaignSnapshot snapshot;
  absl::StatusOr<campaign::EngineState> engine = EngineStateFromProto(p.engine(), space);
  if (!engine.ok()) return engine.status();
  snapshot.engine = *std::move(engine);
  for (const v1::TrialRecord& r : p.trials()) {
    absl::StatusOr<campaign::Trial> t = TrialFromProto(r);
    if (!t.ok()) return t.status();
    snapshot.trials.push_back(*std::move(t));
  }
  return snapshot;
}

v1::GenerationSummary GenerationToProto(const campaign::GenerationRecord& r, absl::Time at) {
  v1::GenerationSummary p;
  p.set_generation(r.generation);
  p.set_epoch(r.epoch);
  p.set_population_size(r.population_size);
  for (int64_t number : r.cohort) p.add_cohort(number);
  p.set_mean_staleness(r.mean_staleness);
  p.set_max_staleness(r.max_staleness);
  if (r.summary.gaussian) {
    const search::GaussianSummary& g = *r.summary.gaussian;
    for (int i = 0; i < g.mean.size(); ++i) p.add_mean(g.mean[i]);
    for (int i = 0; i < g.spread.size(); ++i) p.add_spread(g.spread[i]);
    p.set_sigma(g.sigma);
    p.set_axis_ratio(g.axis_ratio);
  }
  for (int i = 0; i < r.summary.flag_probabilities.size(); ++i) p.add_flag_probabilities(r.summary.flag_probabilities[i]);
  for (const Eigen::VectorXd& theta : r.summary.option_probabilities) {
    for (int k = 0; k < theta.size(); ++k) p.add_option_probabilities(theta[k]);
  }
  p.set_best_trial(r.best_trial);
  p.set_recorded_at_ns(absl::ToUnixNanos(at));
  return p;
}

v1::Outcome OutcomeToProto(const search::Outcome& o, const v1::Objective& objective) {
  v1::Outcome p;
  switch (o.kind) {
    case search::Outcome::Kind::kScore:
      p.set_score(o.score);
      break;
    case search::Outcome::Kind::kGrade:
      if (o.grade >= 0 && o.grade < objective.grade_scale().labels_size()) {
        p.set_grade(objective.grade_scale().labels(o.grade));
      }
      break;
    case search::Outcome::Kind::kInfeasible:
      p.mutable_infeasible();
      break;
    case search::Outcome::Kind::kVoid:
      p.mutable_void_();
      break;
  }
  return p;
}

}  // namespace ogive::codec
