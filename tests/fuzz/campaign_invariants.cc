#include "tests/fuzz/campaign_invariants.h"

#include <cmath>
#include <set>

#include "server/campaign/campaign_options.h"
#include "tests/fuzz/candidate_check.h"
#include "tests/fuzz/require.h"

namespace ogive::fuzz {
namespace {

bool SameAsModel(const search::Outcome& o, const v1::TrialRecord& r) {
  switch (o.kind) {
    case search::Outcome::Kind::kScore:
      return r.outcome_kind() == v1::OUTCOME_KIND_SCORE && r.score() == o.score;
    case search::Outcome::Kind::kGrade:
      return r.outcome_kind() == v1::OUTCOME_KIND_GRADE && r.grade_index() == o.grade;
    case search::Outcome::Kind::kInfeasible:
      return r.outcome_kind() == v1::OUTCOME_KIND_INFEASIBLE;
    case search::Outcome::Kind::kVoid:
      return r.outcome_kind() == v1::OUTCOME_KIND_VOID;
  }
  return false;
}

// The internal sample lies in the box: Gaussian coordinates in [0, 1], flags 0 or 1, categorical
// indices among the options.
void RequireInternalInBounds(const search::Space& space, const v1::TrialRecord& r) {
  OGIVE_FUZZ_REQUIRE(r.internal_size() == space.size(), "trial ", r.number(), ": ", r.internal_size(),
                     " internal coordinates for ", space.size(), " parameters");
  for (int i = 0; i < space.size(); ++i) {
    const double x = r.internal(i);
    const search::ParameterSpec& p = space.parameter(i);
    OGIVE_FUZZ_REQUIRE(std::isfinite(x), "trial ", r.number(), " coordinate ", i, " = ", x);
    switch (p.kind) {
      case search::ParameterKind::kReal:
      case search::ParameterKind::kInteger:
        OGIVE_FUZZ_REQUIRE(x >= 0 && x <= 1, "trial ", r.number(), " coordinate ", i, " = ", x);
        break;
      case search::ParameterKind::kFlag:
        OGIVE_FUZZ_REQUIRE(x == 0 || x == 1, "trial ", r.number(), " flag coordinate ", i, " = ", x);
        break;
      case search::ParameterKind::kCategorical:
        OGIVE_FUZZ_REQUIRE(x == std::floor(x) && x >= 0 && x < static_cast<double>(p.options.size()), "trial ",
                           r.number(), " categorical coordinate ", i, " = ", x);
        break;
    }
  }
}

search::Outcome OutcomeOf(const v1::TrialRecord& r) {
  switch (r.outcome_kind()) {
    case v1::OUTCOME_KIND_SCORE:
      return search::Outcome::Score(r.score());
    case v1::OUTCOME_KIND_GRADE:
      return search::Outcome::Grade(r.grade_index());
    case v1::OUTCOME_KIND_INFEASIBLE:
      return search::Outcome::Infeasible();
    default:
      return search::Outcome::Void();
  }
}

}  // namespace

void RequireCampaignInvariants(const CampaignModel& model, const storage::StoredCampaign& stored,
                            const std::vector<v1::GenerationSummary>& generations, const v1::CampaignView& view,
                            absl::Time now) {
  const v1::EngineState& engine = stored.snapshot.engine();
  const v1::StatusSummary& status = view.status();
  const auto& trials = stored.snapshot.trials();
  const int staleness_limit =
      model.design->staleness_limit() > 0 ? model.design->staleness_limit() : campaign::kDefaultStalenessLimit;

  OGIVE_FUZZ_REQUIRE(engine.next_trial() == trials.size() + 1, "next trial ", engine.next_trial(), " with ",
                     trials.size(), " trials stored");
  OGIVE_FUZZ_REQUIRE(status.phase() == engine.phase() && status.generation() == engine.generation() &&
                         status.restarts() == engine.epoch(),
                     "memory and store disagree: ", status.ShortDebugString(), " vs ", engine.ShortDebugString());

  int64_t leased = 0, reported = 0, lapsed = 0, voided = 0, late = 0, pending = 0, consumed = 0, too_stale = 0,
          awaiting = 0;
  int64_t max_sequence = 0;
  std::set<int64_t> sequences;
  for (int k = 0; k < trials.size(); ++k) {
    const v1::TrialRecord& r = trials[k];
    // Only built when a check fails.
    const auto t = [&r] { return absl::StrCat("trial ", r.number(), " (", r.ShortDebugString(), ")"); };
    OGIVE_FUZZ_REQUIRE(r.number() == k + 1, "trial records out of order at ", k, ": ", t());
    RequireInternalInBounds(*model.space, r);
    OGIVE_FUZZ_REQUIRE(r.generation() >= 0 && r.generation() <= engine.generation(), t());
    OGIVE_FUZZ_REQUIRE(r.epoch() >= 0 && r.epoch() <= engine.epoch(), t());
    const auto told = model.reported.find(r.number());
    const bool has_outcome = r.outcome_kind() != v1::OUTCOME_KIND_UNSPECIFIED;
    OGIVE_FUZZ_REQUIRE(has_outcome == (told != model.reported.end()), "stored outcome and what was told differ: ",
                       t());
    if (has_outcome) {
      OGIVE_FUZZ_REQUIRE(SameAsModel(told->second, r), "the stored outcome is not the one first told: ", t());
      OGIVE_FUZZ_REQUIRE(r.report_sequence() >= 1 && sequences.insert(r.report_sequence()).second, t());
      max_sequence = std::max(max_sequence, r.report_sequence());
    } else {
      OGIVE_FUZZ_REQUIRE(r.report_sequence() == 0, t());
    }
    OGIVE_FUZZ_REQUIRE(std::isfinite(r.score()), t());
    switch (r.state()) {
      case v1::TRIAL_STATE_LEASED:
      case v1::TRIAL_STATE_LAPSED:
        OGIVE_FUZZ_REQUIRE(!has_outcome && r.use() == v1::OUTCOME_USE_UNSPECIFIED, t());
        if (r.state() == v1::TRIAL_STATE_LAPSED) {
          OGIVE_FUZZ_REQUIRE(r.lease_deadline_ns() <= absl::ToUnixNanos(now), "lapsed before its deadline: ", t());
        }
        (r.state() == v1::TRIAL_STATE_LEASED ? leased : lapsed)++;
        break;
      case v1::TRIAL_STATE_REPORTED:
        OGIVE_FUZZ_REQUIRE(r.outcome_kind() == v1::OUTCOME_KIND_INFEASIBLE ||
                               (r.outcome_kind() == v1::OUTCOME_KIND_SCORE && !model.order.graded) ||
                               (r.outcome_kind() == v1::OUTCOME_KIND_GRADE && model.order.graded),
                           t());
        if (r.outcome_kind() == v1::OUTCOME_KIND_GRADE) {
          OGIVE_FUZZ_REQUIRE(r.grade_index() >= 0 && r.grade_index() < model.order.grade_count, t());
        }
        OGIVE_FUZZ_REQUIRE(r.use() == v1::OUTCOME_USE_PENDING || r.use() == v1::OUTCOME_USE_CONSUMED ||
                               r.use() == v1::OUTCOME_USE_TOO_STALE || r.use() == v1::OUTCOME_USE_AWAITING_REPLICATES,
                           t());
        ++reported;
        break;
      case v1::TRIAL_STATE_VOIDED:
        OGIVE_FUZZ_REQUIRE(r.outcome_kind() == v1::OUTCOME_KIND_VOID && r.use() == v1::OUTCOME_USE_UNSPECIFIED, t());
        ++voided;
        break;
      default:
        OGIVE_FUZZ_REQUIRE(false, "unknown state: ", t());
    }
    if (r.late()) {
      OGIVE_FUZZ_REQUIRE(has_outcome, "late without a report: ", t());
      ++late;
    }
    switch (r.use()) {
      case v1::OUTCOME_USE_PENDING:
        // Staleness only grows with updates, and every update drops what became too stale.
        OGIVE_FUZZ_REQUIRE(r.epoch() == engine.epoch() && engine.generation() - r.generation() <= staleness_limit,
                           "a pending outcome is too stale to be used: ", t());
        ++pending;
        break;
      case v1::OUTCOME_USE_CONSUMED:
        OGIVE_FUZZ_REQUIRE(r.consumed_by() > r.generation() && r.consumed_by() <= engine.generation() &&
                               r.consumed_by() - 1 - r.generation() <= staleness_limit,
                           t());
        ++consumed;
        break;
      case v1::OUTCOME_USE_TOO_STALE:
        ++too_stale;
        break;
      case v1::OUTCOME_USE_AWAITING_REPLICATES:
        ++awaiting;
        break;
      default:
        break;
    }
    if (r.use() != v1::OUTCOME_USE_CONSUMED) OGIVE_FUZZ_REQUIRE(r.consumed_by() == -1, t());
  }
  OGIVE_FUZZ_REQUIRE(engine.report_sequence() == max_sequence &&
                         engine.report_sequence() == static_cast<int64_t>(sequences.size()),
                     "report sequence ", engine.report_sequence(), " with ", sequences.size(), " reports stored");
  OGIVE_FUZZ_REQUIRE(engine.informative() == reported, "informative ", engine.informative(), " but ", reported,
                     " trials reported");
  OGIVE_FUZZ_REQUIRE(status.leased() == leased && status.reported() == reported && status.lapsed() == lapsed &&
                         status.voided() == voided && status.late() == late && status.pending() == pending &&
                         status.consumed() == consumed && status.too_stale() == too_stale &&
                         status.awaiting_replicates() == awaiting,
                     "counts in memory ", status.ShortDebugString(), " differ from the store: leased ", leased,
                     " reported ", reported, " lapsed ", lapsed, " voided ", voided, " late ", late, " pending ",
                     pending, " consumed ", consumed, " too_stale ", too_stale, " awaiting ", awaiting);

  // The best trial is a reported one and none is strictly better.
  if (reported == 0) {
    OGIVE_FUZZ_REQUIRE(engine.best_trial() == 0, "a best trial without reports: ", engine.best_trial());
  } else {
    OGIVE_FUZZ_REQUIRE(engine.best_trial() >= 1 && engine.best_trial() <= trials.size(), engine.best_trial());
    const v1::TrialRecord& best = trials[engine.best_trial() - 1];
    OGIVE_FUZZ_REQUIRE(best.state() == v1::TRIAL_STATE_REPORTED, best.ShortDebugString());
    for (const v1::TrialRecord& r : trials) {
      if (r.state() != v1::TRIAL_STATE_REPORTED) continue;
      OGIVE_FUZZ_REQUIRE(search::CompareOutcomes(OutcomeOf(r), OutcomeOf(best), model.order) >= 0, "trial ",
                         r.number(), " is better than the best trial ", best.number());
    }
  }

  // Every update is summarized once, consumed exactly its cohort, and no trial twice.
  OGIVE_FUZZ_REQUIRE(static_cast<int64_t>(generations.size()) == engine.generation(), generations.size(),
                     " summaries for generation ", engine.generation());
  std::set<int64_t> in_cohorts;
  for (size_t g = 0; g < generations.size(); ++g) {
    const v1::GenerationSummary& s = generations[g];
    OGIVE_FUZZ_REQUIRE(s.generation() == static_cast<int64_t>(g) + 1, s.ShortDebugString());
    OGIVE_FUZZ_REQUIRE(s.cohort_size() == s.population_size() && s.population_size() >= 2, s.ShortDebugString());
    for (int64_t number : s.cohort()) {
      OGIVE_FUZZ_REQUIRE(in_cohorts.insert(number).second, "trial ", number, " consumed twice");
      OGIVE_FUZZ_REQUIRE(number >= 1 && number <= trials.size(), number);
      const v1::TrialRecord& r = trials[number - 1];
      OGIVE_FUZZ_REQUIRE(r.use() == v1::OUTCOME_USE_CONSUMED && r.consumed_by() == s.generation(), "generation ",
                         s.generation(), " consumed ", r.ShortDebugString());
    }
  }
  OGIVE_FUZZ_REQUIRE(static_cast<int64_t>(in_cohorts.size()) == consumed, in_cohorts.size(), " in cohorts, ",
                     consumed, " consumed");

  // Phase rules: an open or paused campaign has fewer pending outcomes than a cohort, has not used up its
  // budget and has not reached its target.
  const int64_t budget = model.design->trial_budget();
  OGIVE_FUZZ_REQUIRE(status.population_size() >= 2, status.ShortDebugString());
  if (engine.phase() != v1::CAMPAIGN_PHASE_DONE) {
    OGIVE_FUZZ_REQUIRE(pending < status.population_size(), pending, " pending outcomes wait for a cohort of ",
                       status.population_size());
    OGIVE_FUZZ_REQUIRE(budget == 0 || engine.informative() < budget, "budget ", budget, " used up but ",
                       v1::CampaignPhase_Name(engine.phase()));
    const bool has_target = model.design->has_target() || model.design->has_target_grade();
    if (has_target && reported > 0) {
      const v1::TrialRecord& best = trials[engine.best_trial() - 1];
      bool reached = false;
      if (model.design->has_target()) {
        reached = best.outcome_kind() == v1::OUTCOME_KIND_SCORE &&
                  search::CompareOutcomes(OutcomeOf(best), search::Outcome::Score(model.design->target()),
                                          model.order) <= 0;
      } else {
        const auto& labels = model.design->objective().grade_scale().labels();
        const int target = static_cast<int>(std::find(labels.begin(), labels.end(), model.design->target_grade()) -
                                            labels.begin());
        reached = best.outcome_kind() == v1::OUTCOME_KIND_GRADE && best.grade_index() >= target;
      }
      OGIVE_FUZZ_REQUIRE(!reached, "trial ", best.number(), " reached the target but the campaign is ",
                         v1::CampaignPhase_Name(engine.phase()));
    }
  } else {
    OGIVE_FUZZ_REQUIRE(engine.reason() != v1::DONE_REASON_UNSPECIFIED, engine.ShortDebugString());
    if (engine.reason() == v1::DONE_REASON_BUDGET) OGIVE_FUZZ_REQUIRE(engine.informative() >= budget, budget);
  }
  if (engine.phase() != v1::CAMPAIGN_PHASE_DONE) {
    OGIVE_FUZZ_REQUIRE(engine.reason() == v1::DONE_REASON_UNSPECIFIED, engine.ShortDebugString());
  }
}

void RequireTrialViewMatches(const CampaignModel& model, const v1::Trial& view, const v1::TrialRecord& record) {
  const auto t = [&] { return absl::StrCat(view.ShortDebugString(), " vs stored ", record.ShortDebugString()); };
  OGIVE_FUZZ_REQUIRE(view.number() == record.number() && view.state() == record.state() &&
                         view.use() == record.use() && view.consumed_by() == record.consumed_by() &&
                         view.generation() == record.generation() && view.worker() == record.worker() &&
                         view.late() == record.late() &&
                         view.lease_deadline_unix_ms() == record.lease_deadline_ns() / 1000000 -
                                                              (record.lease_deadline_ns() % 1000000 < 0 ? 1 : 0),
                     t());
  RequireCandidateInDesign(view.candidate(), *model.design);
  const auto told = model.reported.find(record.number());
  OGIVE_FUZZ_REQUIRE(view.has_outcome() == (told != model.reported.end()), t());
  if (!view.has_outcome()) return;
  const v1::Outcome& o = view.outcome();
  switch (told->second.kind) {
    case search::Outcome::Kind::kScore:
      OGIVE_FUZZ_REQUIRE(o.has_score() && o.score() == told->second.score, t());
      break;
    case search::Outcome::Kind::kGrade:
      OGIVE_FUZZ_REQUIRE(o.has_grade() && o.grade() == model.design->objective().grade_scale().labels(
                                                               told->second.grade),
                         t());
      break;
    case search::Outcome::Kind::kInfeasible:
      OGIVE_FUZZ_REQUIRE(o.has_infeasible(), t());
      break;
    case search::Outcome::Kind::kVoid:
      OGIVE_FUZZ_REQUIRE(o.has_void_(), t());
      break;
  }
}

}  // namespace ogive::fuzz
