#include "client/cli/import_plan.h"

#include <algorithm>
#include <cmath>
#include <cstdlib>
#include <optional>
#include <string>
#include <utility>
#include <vector>

#include "absl/container/flat_hash_map.h"
#include "absl/strings/ascii.h"
#include "absl/strings/match.h"
#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "client/cli/format.h"
#include "client/cli/grade_match.h"
#include "client/cli/trial_export.h"

namespace ogive::cli {
namespace {

struct Columns {
  int trial = 0;
  int outcome = 1;
  int note = 2;    // -1 when the file has none
  int score = -1;  // the export layout: outcome holds the kind, score and grade the value
  int grade = -1;
  std::vector<std::pair<int, const v1::Parameter*>> parameters;  // the export's candidate columns
  bool export_layout() const { return score >= 0 && grade >= 0; }
};

bool SameOutcome(const v1::Outcome& a, const v1::Outcome& b) {
  if (a.kind_case() != b.kind_case()) return false;
  switch (a.kind_case()) {
    case v1::Outcome::kScore:
      return a.score() == b.score();
    case v1::Outcome::kGrade:
      return a.grade() == b.grade();
    default:
      return true;
  }
}

// The number `text` is as a whole (strtod syntax; infinities included), or nullopt. With
// `decimal_comma`, one comma and no point read as a decimal mark ("3,25" is 3.25).
std::optional<double> ReadNumber(absl::string_view text, bool decimal_comma) {
  std::string copy(text);
  if (decimal_comma && std::count(copy.begin(), copy.end(), ',') == 1 && copy.find('.') == std::string::npos) {
    copy[copy.find(',')] = '.';
  }
  if (copy.empty()) return std::nullopt;
  char* end = nullptr;
  const double value = std::strtod(copy.c_str(), &end);
  if (end != copy.c_str() + copy.size()) return std::nullopt;
  return value;
}

// Whether an export's field `text` shows `value` (reals to 1e-9 relative: a spreadsheet may have
// shortened the digits; flags as true/false in any case, or 1/0).
bool SameValue(absl::string_view text, const v1::Value& value, bool decimal_comma) {
  const absl::string_view t = absl::StripAsciiWhitespace(text);
  switch (value.kind_case()) {
    case v1::Value::kReal: {
      const std::optional<double> x = ReadNumber(t, decimal_comma);
      return x.has_value() && std::fabs(*x - value.real()) <= 1e-9 * std::max(1.0, std::fabs(value.real()));
    }
    case v1::Value::kInteger: {
      int64_t n = 0;
      return absl::SimpleAtoi(t, &n) && n == value.integer();
    }
    case v1::Value::kCategorical:
      return t == value.categorical();
    case v1::Value::kFlag:
      return value.flag() ? (absl::EqualsIgnoreCase(t, "true") || t == "1")
                          : (absl::EqualsIgnoreCase(t, "false") || t == "0");
    default:
      return false;
  }
}

absl::StatusOr<v1::Outcome> ParseOutcomeField(absl::string_view text, const v1::Objective& objective,
                                              bool decimal_comma) {
  const absl::string_view t = absl::StripAsciiWhitespace(text);
  v1::Outcome outcome;
  if (t.empty()) return absl::InvalidArgumentError("the outcome is empty");
  if (absl::EqualsIgnoreCase(t, "infeasible")) {
    outcome.mutable_infeasible();
    return outcome;
  }
  if (absl::EqualsIgnoreCase(t, "void")) {
    outcome.mutable_void_();
    return outcome;
  }
  if (objective.has_grade_scale()) {
    absl::StatusOr<std::string> grade = MatchGrade(t, objective.grade_scale(), "outcome");
    if (!grade.ok()) return grade.status();
    outcome.set_grade(*grade);
    return outcome;
  }
  const std::optional<double> value = ReadNumber(t, decimal_comma);
  if (!value.has_value()) {
    return absl::InvalidArgumentError(absl::StrCat(
        "outcome: '", t, "' is not a number (a score), 'infeasible' or 'void'"));
  }
  if (!std::isfinite(*value)) {
    return absl::InvalidArgumentError(absl::StrCat("outcome: '", t, "' is not a finite number"));
  }
  outcome.set_score(*value);
  return outcome;
}

}  // namespace

std::string OutcomeSummary(const v1::Outcome& outcome) {
  switch (outcome.kind_case()) {
    case v1::Outcome::kScore:
      return absl::StrCat("score ", FormatExact(outcome.score()));
    case v1::Outcome::kGrade:
      return absl::StrCat("grade ", outcome.grade());
    case v1::Outcome::kInfeasible:
      return "infeasible";
    case v1::Outcome::kVoid:
      return "void";
    default:
      return "no outcome";
  }
}

namespace {

// The outcome of an export row: `kind` is score, grade, infeasible or void; the value comes from the
// score or grade field. nullopt for an empty kind (a trial without an outcome).
absl::StatusOr<std::optional<v1::Outcome>> ExportOutcome(absl::string_view kind, absl::string_view score,
                                                         absl::string_view grade, const v1::Objective& objective,
                                                         bool decimal_comma) {
  const absl::string_view k = absl::StripAsciiWhitespace(kind);
  if (k.empty()) return std::optional<v1::Outcome>();
  absl::string_view value;
  if (absl::EqualsIgnoreCase(k, "score")) {
    if (objective.has_grade_scale()) {
      return absl::InvalidArgumentError("outcome: a score on a campaign whose outcomes are grades");
    }
    value = score;
  } else if (absl::EqualsIgnoreCase(k, "grade")) {
    if (!objective.has_grade_scale()) {
      return absl::InvalidArgumentError("outcome: a grade on a campaign whose outcomes are scores");
    }
    value = grade;
  } else if (absl::EqualsIgnoreCase(k, "infeasible") || absl::EqualsIgnoreCase(k, "void")) {
    value = k;
  } else {
    return absl::InvalidArgumentError(
        absl::StrCat("outcome: '", k, "' is not an outcome kind (score, grade, infeasible, void, or empty)"));
  }
  absl::StatusOr<v1::Outcome> outcome = ParseOutcomeField(value, objective, decimal_comma);
  if (!outcome.ok()) return outcome.status();
  return std::optional<v1::Outcome>(*std::move(outcome));
}

}  // namespace

ImportPlan PlanImport(const std::vector<CsvRecord>& records, const v1::CampaignDesign& design,
                      const std::vector<v1::Trial>& trials, bool decimal_comma) {
  ImportPlan plan;
  absl::flat_hash_map<int64_t, const v1::Trial*> by_number;
  for (const v1::Trial& t : trials) by_number[t.number()] = &t;

  Columns columns;
  size_t first = 0;
  if (!records.empty()) {
    int64_t ignored = 0;
    const CsvRecord& head = records[0];
    if (!head.fields.empty() && !absl::SimpleAtoi(absl::StripAsciiWhitespace(head.fields[0]), &ignored)) {
      // A header row: find the columns by name.
      columns = Columns{-1, -1, -1, -1, -1, {}};
      for (size_t i = 0; i < head.fields.size(); ++i) {
        const std::string name = absl::AsciiStrToLower(absl::StripAsciiWhitespace(head.fields[i]));
        if (name == "trial") columns.trial = static_cast<int>(i);
        if (name == "outcome") columns.outcome = static_cast<int>(i);
        if (name == "note") columns.note = static_cast<int>(i);
        if (name == "score") columns.score = static_cast<int>(i);
        if (name == "grade") columns.grade = static_cast<int>(i);
      }
      // The candidate's columns, as the export names them ("peak_temp (degC)").
      for (size_t i = 0; i < head.fields.size(); ++i) {
        const absl::string_view name = absl::StripAsciiWhitespace(head.fields[i]);
        for (const v1::Parameter& parameter : design.parameters()) {
          if (name == ExportColumnName(parameter)) columns.parameters.emplace_back(static_cast<int>(i), &parameter);
        }
      }
      first = 1;
      if (columns.trial < 0 || columns.outcome < 0) {
        plan.bad.push_back({head.line, "the header row must name the columns 'trial' and 'outcome' (and "
                                       "optionally 'note'); without a header the columns are trial, "
                                       "outcome, note"});
        return plan;
      }
    }
  }

  absl::flat_hash_map<int64_t, std::pair<int, v1::Outcome>> seen;  // trial -> (line, outcome)
  for (size_t r = first; r < records.size(); ++r) {
    const CsvRecord& record = records[r];
    auto field = [&](int column) -> std::optional<std::string> {
      if (column < 0 || static_cast<size_t>(column) >= record.fields.size()) return std::nullopt;
      return record.fields[static_cast<size_t>(column)];
    };
    auto bad = [&](std::string reason) { plan.bad.push_back({record.line, std::move(reason)}); };
    const std::optional<std::string> trial_text = field(columns.trial);
    const std::optional<std::string> outcome_text = field(columns.outcome);
    if (!trial_text.has_value() || !outcome_text.has_value()) {
      bad(absl::StrCat("expected at least ", std::max(columns.trial, columns.outcome) + 1, " fields, got ",
                       record.fields.size()));
      continue;
    }
    int64_t number = 0;
    if (!absl::SimpleAtoi(absl::StripAsciiWhitespace(*trial_text), &number) || number < 1) {
      bad(absl::StrCat("trial: '", *trial_text, "' is not a trial number (an integer >= 1)"));
      continue;
    }
    auto found = by_number.find(number);
    if (found == by_number.end()) {
      bad(absl::StrCat("trial ", number, ": no such trial in this campaign"));
      continue;
    }
    absl::StatusOr<v1::Outcome> outcome;
    if (columns.export_layout()) {
      absl::StatusOr<std::optional<v1::Outcome>> exported =
          ExportOutcome(*outcome_text, field(columns.score).value_or(""), field(columns.grade).value_or(""),
                        design.objective(), decimal_comma);
      if (!exported.ok()) {
        outcome = exported.status();
      } else if (!exported->has_value()) {
        ++plan.without_outcome;
        continue;
      } else {
        outcome = **exported;
      }
    } else {
      outcome = ParseOutcomeField(*outcome_text, design.objective(), decimal_comma);
    }
    if (!outcome.ok()) {
      bad(absl::StrCat("trial ", number, ": ", outcome.status().message()));
      continue;
    }
    // An export names the candidate too: it must be this campaign's trial, not another campaign's
    // trial of the same number.
    std::string mismatch;
    for (const auto& [column, parameter] : columns.parameters) {
      const std::optional<std::string> text = field(column);
      const auto value = found->second->candidate().values().find(parameter->name());
      if (!text.has_value() || value == found->second->candidate().values().end()) continue;
      if (!SameValue(*text, value->second, decimal_comma)) {
        mismatch = absl::StrCat("trial ", number, ": the file's ", parameter->name(), " is '", *text,
                                "', this campaign's trial ", number, " has ", ValueData(value->second),
                                " (an export of another campaign?)");
        break;
      }
    }
    if (!mismatch.empty()) {
      bad(mismatch);
      continue;
    }
    if (std::optional<std::string> note = field(columns.note); note.has_value()) outcome->set_note(*note);
    if (auto earlier = seen.find(number); earlier != seen.end()) {
      if (!SameOutcome(earlier->second.second, *outcome)) {
        bad(absl::StrCat("trial ", number, ": line ", earlier->second.first, " gives it ",
                         OutcomeSummary(earlier->second.second), ", this row ", OutcomeSummary(*outcome)));
      }
      continue;  // the same outcome twice in one file: once is enough
    }
    seen[number] = {record.line, *outcome};
    const v1::Trial& stored = *found->second;
    const bool reported = stored.outcome().kind_case() != v1::Outcome::KIND_NOT_SET;
    if (reported) {
      if (SameOutcome(stored.outcome(), *outcome)) {
        plan.already_stored.push_back({record.line, number, *outcome});
      } else {
        bad(absl::StrCat("trial ", number, ": already reported ", OutcomeSummary(stored.outcome()),
                         "; this row says ", OutcomeSummary(*outcome)));
      }
      continue;
    }
    plan.to_report.push_back({record.line, number, *outcome});
  }
  return plan;
}

}  // namespace ogive::cli
