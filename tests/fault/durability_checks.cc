#include "tests/fault/durability_checks.h"

#include <set>

#include "absl/strings/str_cat.h"

namespace ogive::testing {
namespace {

bool HasOutcome(const v1::TrialRecord& t) {
  return t.outcome_kind() != v1::OUTCOME_KIND_UNSPECIFIED;
}

// Findings beyond this many are summed up in one line: one broken rule can fail every trial.
constexpr size_t kMaxFindings = 25;

void Note(std::vector<std::string>& findings, std::string finding) {
  if (findings.size() < kMaxFindings) {
    findings.push_back(std::move(finding));
  } else if (findings.size() == kMaxFindings) {
    findings.push_back("... and more");
  }
}

// The served outcome of `t` is the stored one of `r` (grades by kind only: the record holds the
// index, the view the label).
bool SameOutcome(const v1::Trial& t, const v1::TrialRecord& r) {
  switch (r.outcome_kind()) {
    case v1::OUTCOME_KIND_SCORE:
      return t.outcome().kind_case() == v1::Outcome::kScore && t.outcome().score() == r.score();
    case v1::OUTCOME_KIND_GRADE:
      return t.outcome().kind_case() == v1::Outcome::kGrade;
    case v1::OUTCOME_KIND_INFEASIBLE:
      return t.outcome().kind_case() == v1::Outcome::kInfeasible;
    case v1::OUTCOME_KIND_VOID:
      return t.outcome().kind_case() == v1::Outcome::kVoid;
    default:
      return t.outcome().kind_case() == v1::Outcome::KIND_NOT_SET;
  }
}

}  // namespace

bool AckJournal::Add(int64_t trial, double score) {
  absl::MutexLock lock(&mu_);
  auto [it, inserted] = acked_.emplace(trial, score);
  return inserted || it->second == score;
}

std::map<int64_t, double> AckJournal::Snapshot() const {
  absl::MutexLock lock(&mu_);
  return acked_;
}

int64_t AckJournal::size() const {
  absl::MutexLock lock(&mu_);
  return static_cast<int64_t>(acked_.size());
}

std::vector<std::string> CheckStoredCampaign(const StoredCampaignState& stored,
                                          const std::map<int64_t, double>& journal) {
  std::vector<std::string> findings;
  const v1::EngineState& engine = stored.engine;

  for (const auto& [number, score] : journal) {
    auto it = stored.trials.find(number);
    if (it == stored.trials.end()) {
      Note(findings, absl::StrCat("acknowledged trial ", number, " (score ", score, ") is not stored"));
      continue;
    }
    const v1::TrialRecord& t = it->second;
    if (t.state() != v1::TRIAL_STATE_REPORTED || t.outcome_kind() != v1::OUTCOME_KIND_SCORE ||
        t.score() != score) {
      Note(findings, absl::StrCat("acknowledged trial ", number, " (score ", score, ") is stored as ",
                                  v1::TrialState_Name(t.state()), " with ",
                                  v1::OutcomeKind_Name(t.outcome_kind()), " ", t.score()));
    }
    auto column = stored.score_column.find(number);
    if (column == stored.score_column.end() || column->second != score) {
      Note(findings, absl::StrCat("acknowledged trial ", number, ": the score column does not hold ",
                                  score));
    }
  }

  std::set<int64_t> sequences;
  int64_t informative = 0;
  for (const auto& [number, t] : stored.trials) {
    auto events = stored.tell_events.find(number);
    const int tells = events == stored.tell_events.end() ? 0 : events->second;
    if (HasOutcome(t)) {
      if (tells != 1) Note(findings, absl::StrCat("trial ", number, " has ", tells, " tell events, not 1"));
      if (!sequences.insert(t.report_sequence()).second) {
        Note(findings, absl::StrCat("report sequence ", t.report_sequence(), " is used twice"));
      }
    } else if (tells != 0) {
      Note(findings, absl::StrCat("trial ", number, " has no outcome but ", tells, " tell events"));
    }
    if (t.state() == v1::TRIAL_STATE_REPORTED) ++informative;
  }
  for (const auto& [number, tells] : stored.tell_events) {
    if (stored.trials.count(number) == 0) {
      Note(findings, absl::StrCat("a tell event names trial ", number, ", which is not stored"));
    }
  }
  if (!sequences.empty() &&
      (*sequences.begin() != 1 || *sequences.rbegin() != engine.report_sequence() ||
       static_cast<int64_t>(sequences.size()) != engine.report_sequence())) {
    Note(findings, absl::StrCat(sequences.size(), " stored outcomes carry report sequences ",
                                *sequences.begin(), "..", *sequences.rbegin(),
                                "; the engine counts ", engine.report_sequence()));
  }
  if (sequences.empty() && engine.report_sequence() != 0) {
    Note(findings, absl::StrCat("no outcome is stored but the engine counts ",
                                engine.report_sequence(), " reports"));
  }
  if (informative != engine.informative()) {
    Note(findings, absl::StrCat(informative, " reported trials are stored; the engine counts ",
                                engine.informative(), " informative outcomes"));
  }

  const int64_t trial_count = static_cast<int64_t>(stored.trials.size());
  if (trial_count != engine.next_trial() - 1 ||
      (trial_count > 0 && (stored.trials.begin()->first != 1 ||
                           stored.trials.rbegin()->first != trial_count))) {
    Note(findings, absl::StrCat(trial_count, " trials are stored; the engine's next trial is ",
                                engine.next_trial()));
  }

  // Generations and cohorts.
  if (static_cast<int64_t>(stored.generations.size()) != engine.generation()) {
    Note(findings, absl::StrCat(stored.generations.size(),
                                " generation summaries are stored; the engine is at generation ",
                                engine.generation()));
  }
  std::map<int64_t, int64_t> consumer;  // trial -> the generation whose cohort holds it
  for (size_t i = 0; i < stored.generations.size(); ++i) {
    const v1::GenerationSummary& g = stored.generations[i];
    if (g.generation() != static_cast<int64_t>(i) + 1) {
      Note(findings, absl::StrCat("generation summary ", i + 1, " is numbered ", g.generation()));
    }
    if (g.cohort_size() != g.population_size()) {
      Note(findings, absl::StrCat("generation ", g.generation(), " consumed ", g.cohort_size(),
                                  " outcomes with a population of ", g.population_size()));
    }
    for (int64_t number : g.cohort()) {
      auto [it, inserted] = consumer.emplace(number, g.generation());
      if (!inserted) {
        Note(findings, absl::StrCat("trial ", number, " is consumed twice: by generations ",
                                    it->second, " and ", g.generation()));
      }
    }
  }
  int64_t consumed = 0;
  for (const auto& [number, t] : stored.trials) {
    auto it = consumer.find(number);
    if (t.consumed_by() >= 0) {
      ++consumed;
      if (it == consumer.end() || it->second != t.consumed_by() ||
          t.use() != v1::OUTCOME_USE_CONSUMED || t.state() != v1::TRIAL_STATE_REPORTED) {
        Note(findings, absl::StrCat("trial ", number, " says consumed by generation ", t.consumed_by(),
                                    " (", v1::OutcomeUse_Name(t.use()), "); the cohorts say ",
                                    it == consumer.end() ? "none" : absl::StrCat(it->second)));
      }
    } else if (it != consumer.end()) {
      Note(findings, absl::StrCat("trial ", number, " is in the cohort of generation ", it->second,
                                  " but its record says it was not consumed"));
    }
  }
  if (consumed != static_cast<int64_t>(consumer.size())) {
    Note(findings, absl::StrCat(consumed, " trials say consumed; the cohorts hold ",
                                consumer.size()));
  }
  return findings;
}

std::vector<std::string> CheckServedCampaign(const v1::CampaignView& view,
                                          const std::vector<v1::Trial>& trials,
                                          const StoredCampaignState& before_restart,
                                          const std::map<int64_t, double>& journal) {
  std::vector<std::string> findings;
  if (view.status().generation() < before_restart.engine.generation()) {
    Note(findings, absl::StrCat("the server is at generation ", view.status().generation(),
                                ", the file was at ", before_restart.engine.generation()));
  }
  std::map<int64_t, const v1::Trial*> served;
  for (const v1::Trial& t : trials) served[t.number()] = &t;
  for (const auto& [number, score] : journal) {
    auto it = served.find(number);
    if (it == served.end() || it->second->state() != v1::TRIAL_STATE_REPORTED ||
        it->second->outcome().kind_case() != v1::Outcome::kScore ||
        it->second->outcome().score() != score) {
      Note(findings, absl::StrCat("acknowledged trial ", number, " (score ", score,
                                  ") is not served as reported with its score"));
    }
  }
  for (const auto& [number, record] : before_restart.trials) {
    auto it = served.find(number);
    if (it == served.end()) {
      Note(findings, absl::StrCat("stored trial ", number, " is not served"));
      continue;
    }
    // What was stored stays: an outcome, and the generation that consumed it.
    const v1::Trial& t = *it->second;
    if (HasOutcome(record) && (t.state() != record.state() || !SameOutcome(t, record))) {
      Note(findings, absl::StrCat("stored trial ", number, " (", v1::TrialState_Name(record.state()),
                                  ") is served as ", v1::TrialState_Name(t.state())));
    }
    if (record.consumed_by() >= 0 && t.consumed_by() != record.consumed_by()) {
      Note(findings, absl::StrCat("stored trial ", number, " was consumed by generation ",
                                  record.consumed_by(), "; the server says ", t.consumed_by()));
    }
  }
  return findings;
}

std::vector<std::string> CheckServedEqualsStored(const v1::CampaignView& view,
                                                 const std::vector<v1::Trial>& trials,
                                                 const StoredCampaignState& stored) {
  std::vector<std::string> findings;
  const v1::StatusSummary& s = view.status();
  if (s.generation() != stored.engine.generation()) {
    Note(findings, absl::StrCat("the server is at generation ", s.generation(), ", the file at ",
                                stored.engine.generation()));
  }
  if (trials.size() != stored.trials.size()) {
    Note(findings, absl::StrCat("the server lists ", trials.size(), " trials, the file holds ",
                                stored.trials.size()));
  }
  int64_t counts[5] = {0, 0, 0, 0, 0};  // by v1::TrialState
  int64_t consumed = 0;
  for (const v1::Trial& t : trials) {
    auto it = stored.trials.find(t.number());
    if (it == stored.trials.end()) {
      Note(findings, absl::StrCat("served trial ", t.number(), " is not in the file"));
      continue;
    }
    const v1::TrialRecord& r = it->second;
    if (t.state() != r.state() || !SameOutcome(t, r) || t.use() != r.use() ||
        t.consumed_by() != r.consumed_by() || t.late() != r.late() ||
        t.generation() != r.generation()) {
      Note(findings, absl::StrCat("trial ", t.number(), " differs: served ",
                                  v1::TrialState_Name(t.state()), " use ",
                                  v1::OutcomeUse_Name(t.use()), " consumed_by ", t.consumed_by(),
                                  " late ", t.late(), "; stored ", v1::TrialState_Name(r.state()),
                                  " use ", v1::OutcomeUse_Name(r.use()), " consumed_by ",
                                  r.consumed_by(), " late ", r.late()));
    }
  }
  for (const auto& [number, r] : stored.trials) {
    if (r.state() >= 0 && r.state() < 5) ++counts[r.state()];
    if (r.consumed_by() >= 0) ++consumed;
  }
  if (s.leased() != counts[v1::TRIAL_STATE_LEASED] || s.reported() != counts[v1::TRIAL_STATE_REPORTED] ||
      s.lapsed() != counts[v1::TRIAL_STATE_LAPSED] || s.voided() != counts[v1::TRIAL_STATE_VOIDED] ||
      s.consumed() != consumed) {
    Note(findings, absl::StrCat("served counts (leased ", s.leased(), ", reported ", s.reported(),
                                ", lapsed ", s.lapsed(), ", voided ", s.voided(), ", consumed ",
                                s.consumed(), ") differ from the file's (",
                                counts[v1::TRIAL_STATE_LEASED], ", ", counts[v1::TRIAL_STATE_REPORTED],
                                ", ", counts[v1::TRIAL_STATE_LAPSED], ", ",
                                counts[v1::TRIAL_STATE_VOIDED], ", ", consumed, ")"));
  }
  return findings;
}

}  // namespace ogive::testing
