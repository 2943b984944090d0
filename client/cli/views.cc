#include "client/cli/views.h"

#include <algorithm>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "absl/strings/str_join.h"
#include "client/cli/format.h"

namespace ogive::cli {
namespace {

const v1::Parameter* FindParameter(const v1::CampaignDesign& design, absl::string_view name) {
  for (const v1::Parameter& p : design.parameters()) {
    if (p.name() == name) return &p;
  }
  return nullptr;
}

std::string WithUnit(std::string text, const std::string& unit) {
  if (!unit.empty()) absl::StrAppend(&text, " ", unit);
  return text;
}

// A value for a table cell: reals to six digits, the rest as ValueText.
std::string ValueCell(const v1::Value& value) {
  if (value.kind_case() == v1::Value::kReal) return FormatShort(value.real());
  return ValueText(value);
}

std::string OutcomeCell(const v1::Outcome& outcome) {
  if (outcome.kind_case() == v1::Outcome::kScore) {
    return absl::StrCat("score ", FormatShort(outcome.score()));
  }
  const std::string text = OutcomeText(outcome);
  return text.empty() ? "-" : text;
}

// "12 s", "4 min", "3 h" ago.
std::string AgoText(int64_t ms) {
  if (ms < 60'000) return absl::StrCat(std::max<int64_t>(0, ms / 1000), " s ago");
  if (ms < 3'600'000) return absl::StrCat(ms / 60'000, " min ago");
  return absl::StrCat(ms / 3'600'000, " h ago");
}

std::string ActivityText(const v1::StatusSummary& s) {
  std::string out = absl::StrCat("activity      ", s.reports_last_hour(), " report",
                                 s.reports_last_hour() == 1 ? "" : "s", " in the last hour; ", s.workers_size(),
                                 " worker", s.workers_size() == 1 ? "" : "s", " seen\n");
  constexpr int kShown = 8;
  for (int i = 0; i < s.workers_size() && i < kShown; ++i) {
    const v1::WorkerActivity& w = s.workers(i);
    absl::StrAppend(&out, "                ", w.worker(), "  ", w.reports_last_hour(), " report",
                    w.reports_last_hour() == 1 ? "" : "s", ", last seen ",
                    AgoText(s.as_of_unix_ms() - w.last_seen_unix_ms()), "\n");
  }
  if (s.workers_size() > kShown) absl::StrAppend(&out, "                and ", s.workers_size() - kShown, " more\n");
  return out;
}

std::string OrDash(absl::string_view text) { return text.empty() ? "-" : std::string(text); }

std::string ObjectiveText(const v1::Objective& objective) {
  if (objective.has_grade_scale()) {
    return absl::StrCat("grades, worst first: ",
                        absl::StrJoin(objective.grade_scale().labels(), " < "));
  }
  switch (objective.direction()) {
    case v1::DIRECTION_LOWER_IS_BETTER:
      return "scores, lower is better";
    case v1::DIRECTION_HIGHER_IS_BETTER:
      return "scores, higher is better";
    default:
      return "-";
  }
}

// "[700, 900]" from the design's own bounds (exact), else from the marginal's.
std::string BoundsText(const v1::Parameter* p, const v1::Marginal& m) {
  if (p != nullptr && p->has_real()) {
    return absl::StrCat("[", FormatExact(p->real().low()), ", ", FormatExact(p->real().high()), "]",
                        p->real().log() ? " log" : "");
  }
  if (p != nullptr && p->has_integer()) {
    return absl::StrCat("[", p->integer().low(), ", ", p->integer().high(), "]");
  }
  return absl::StrCat("[", FormatShort(m.low()), ", ", FormatShort(m.high()), "]");
}

std::string MarginalText(const v1::Parameter* p, const v1::Marginal& m) {
  const bool flag =
      p != nullptr ? p->has_flag() : m.options().empty() && m.probabilities_size() == 1;
  if (flag) {
    return absl::StrCat("P(on) = ",
                        m.probabilities().empty() ? "-" : FormatShort(m.probabilities(0)));
  }
  const bool categorical = p != nullptr ? p->has_categorical() : !m.options().empty();
  if (categorical) {
    std::vector<std::string> parts;
    for (int i = 0; i < m.options_size(); ++i) {
      parts.push_back(absl::StrCat(
          m.options(i), " ",
          i < m.probabilities_size() ? FormatShort(m.probabilities(i)) : std::string("-")));
    }
    return absl::StrJoin(parts, ", ");
  }
  return absl::StrCat(
      WithUnit(absl::StrCat(FormatShort(m.mean()), " ± ", FormatShort(m.spread())), m.unit()),
      "  in ", BoundsText(p, m));
}

}  // namespace

std::optional<v1::TrialState> TrialStateFromName(absl::string_view name) {
  for (v1::TrialState state : {v1::TRIAL_STATE_LEASED, v1::TRIAL_STATE_REPORTED,
                               v1::TRIAL_STATE_LAPSED, v1::TRIAL_STATE_VOIDED}) {
    if (name == TrialStateName(state)) return state;
  }
  return std::nullopt;
}

std::string BestText(const v1::StatusSummary& status) {
  if (!status.has_best() || status.best().outcome().kind_case() == v1::Outcome::KIND_NOT_SET) {
    return "-";
  }
  return absl::StrCat(OutcomeText(status.best().outcome()), " (trial ", status.best().number(),
                      ")");
}

std::string CampaignListTable(const v1::ListCampaignsResponse& campaigns) {
  Table table({"CAMPAIGN", "PHASE", "GENERATION", "LEASED", "REPORTED", "LAPSED", "VOIDED", "BEST"},
              {false, false, true, true, true, true, true, false});
  for (const v1::CampaignView& view : campaigns.campaigns()) {
    const v1::StatusSummary& s = view.status();
    table.AddRow({view.name(), PhaseWithReason(s), absl::StrCat(s.generation()),
                  absl::StrCat(s.leased()), absl::StrCat(s.reported()), absl::StrCat(s.lapsed()),
                  absl::StrCat(s.voided()), BestText(s)});
  }
  return table.Render();
}

std::string CampaignSummary(const v1::CampaignView& view) {
  const v1::CampaignDesign& design = view.design();
  const v1::StatusSummary& s = view.status();
  std::string out;
  absl::StrAppend(&out, "campaign      ", view.name(), "\n");
  absl::StrAppend(&out, "objective     ", ObjectiveText(design.objective()), "\n");
  absl::StrAppend(&out, "phase         ", PhaseWithReason(s), s.phase_message().empty() ? "" : ": ",
                  s.phase_message(), "\n");
  absl::StrAppend(&out, "generation    ", s.generation(), "   restarts ", s.restarts(),
                  "   population ", s.population_size(), "\n");
  absl::StrAppend(&out, "trials        leased ", s.leased(), ", reported ", s.reported(),
                  ", lapsed ", s.lapsed(), ", voided ", s.voided(), ", late ", s.late(), "\n");
  absl::StrAppend(&out, "outcomes      pending ", s.pending(), ", consumed ", s.consumed(),
                  ", too stale ", s.too_stale(),
                  s.awaiting_replicates() > 0 ? absl::StrCat(", awaiting replicates ", s.awaiting_replicates()) : "",
                  "\n");
  if (s.noise_rank_change() != 0) {
    absl::StrAppend(&out, "noise         rank change ", absl::StrFormat("%.3g", s.noise_rank_change()),
                    s.noise_rank_change() > 0 ? " (> 0: the noise reorders the ranking; the population grows)\n"
                                              : " (<= 0: the ranking holds under repeats)\n");
  }
  absl::StrAppend(&out, "best          ", BestText(s), "\n");
  if (s.has_best() && s.best().outcome().kind_case() != v1::Outcome::KIND_NOT_SET) {
    const v1::Candidate& best = s.best().candidate();
    for (const v1::Parameter& p : design.parameters()) {
      auto it = best.values().find(p.name());
      if (it == best.values().end()) continue;
      absl::StrAppend(&out, "                ", p.name(), " = ",
                      WithUnit(ValueText(it->second), p.unit()), "\n");
    }
  }
  if (!s.marginals().empty()) {
    out += "distribution\n";
    Table table({"", "", ""});
    for (const v1::Marginal& m : s.marginals()) {
      table.AddRow({"", m.parameter(), MarginalText(FindParameter(design, m.parameter()), m)});
    }
    // Drop the empty header line the table starts with.
    const std::string rendered = table.Render();
    out += rendered.substr(rendered.find('\n') + 1);
  }
  out += ActivityText(s);
  bool gaussian = false;
  for (const v1::Parameter& p : design.parameters()) gaussian |= p.has_real() || p.has_integer();
  if (gaussian || design.parameters().empty()) {
    absl::StrAppend(&out, "step size     ", FormatShort(s.step_size()), "   axis ratio ",
                    FormatShort(s.axis_ratio()), "\n");
  }
  return out;
}

std::string ProgressBar(int64_t done, int64_t total, int width) {
  const double fraction = total > 0 ? std::clamp(static_cast<double>(done) / static_cast<double>(total), 0.0, 1.0) : 0.0;
  const int filled = static_cast<int>(fraction * width + 0.5);
  return absl::StrCat("[", std::string(static_cast<size_t>(filled), '#'),
                      std::string(static_cast<size_t>(width - filled), '.'), "]  ", done, "/", total, " (",
                      static_cast<int>(fraction * 100), "%)");
}

std::string WatchLine(const v1::CampaignView& view, absl::TimeZone zone) {
  const v1::StatusSummary& s = view.status();
  std::string line = absl::StrCat(FormatUnixMs(s.as_of_unix_ms(), zone), "  ", view.name(), "  ", PhaseWithReason(s),
                                  "  generation ", s.generation(), "  leased ", s.leased(), " reported ",
                                  s.reported(), " lapsed ", s.lapsed(), " voided ", s.voided(), "  best ",
                                  BestText(s));
  if (view.design().trial_budget() > 0) {
    absl::StrAppend(&line, "  budget ", s.reported(), "/", view.design().trial_budget());
  }
  return line + "\n";
}

std::string WatchScreen(const v1::CampaignView& view, absl::TimeZone zone) {
  std::string out = absl::StrCat("ogive campaign watch ", view.name(), "    ", FormatUnixMs(view.status().as_of_unix_ms(), zone),
                                 "    (Ctrl-C to stop)\n\n");
  if (view.design().trial_budget() > 0) {
    absl::StrAppend(&out, "budget        ", ProgressBar(view.status().reported(), view.design().trial_budget(), 40),
                    "\n");
  }
  out += CampaignSummary(view);
  return out;
}

std::string TrialsTable(const v1::CampaignDesign& design, const std::vector<v1::Trial>& trials) {
  std::vector<std::string> header = {"TRIAL", "STATE", "GEN", "WORKER", "OUTCOME", "REPORTED BY", "LATE", "USE"};
  std::vector<bool> right = {true, false, true, false, false, false, false, false};
  for (const v1::Parameter& p : design.parameters()) {
    header.push_back(p.unit().empty() ? p.name() : absl::StrCat(p.name(), " (", p.unit(), ")"));
    right.push_back(p.has_real() || p.has_integer());
  }
  Table table(std::move(header), std::move(right));
  for (const v1::Trial& t : trials) {
    std::vector<std::string> row = {
        absl::StrCat(t.number()),       std::string(TrialStateName(t.state())),
        absl::StrCat(t.generation()),   OrDash(t.worker()),
        OutcomeCell(t.outcome()),       OrDash(t.reported_by()),
        t.late() ? "late" : "-",
        OrDash(OutcomeUseName(t.use()))};
    for (const v1::Parameter& p : design.parameters()) {
      auto it = t.candidate().values().find(p.name());
      row.push_back(it == t.candidate().values().end() ? "-" : ValueCell(it->second));
    }
    table.AddRow(std::move(row));
  }
  return table.Render();
}

std::string LeasedTrialText(const v1::CampaignDesign& design, const v1::Trial& trial,
                            absl::TimeZone zone) {
  std::string out =
      absl::StrCat("trial ", trial.number(), "  (generation ", trial.generation(), ", lease until ",
                   FormatUnixMs(trial.lease_deadline_unix_ms(), zone), ")\n");
  for (const v1::Parameter& p : design.parameters()) {
    auto it = trial.candidate().values().find(p.name());
    if (it == trial.candidate().values().end()) continue;
    absl::StrAppend(&out, "  ", p.name(), " = ", WithUnit(ValueText(it->second), p.unit()), "\n");
  }
  return out;
}

}  // namespace ogive::cli
