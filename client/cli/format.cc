#include "client/cli/format.h"

#include <algorithm>
#include <charconv>
#include <cinttypes>
#include <cstdio>

#include "absl/strings/str_cat.h"

namespace ogive::cli {

std::string FormatExact(double value) {
  char buffer[64];
  const std::to_chars_result result = std::to_chars(buffer, buffer + sizeof buffer, value);
  return std::string(buffer, result.ptr);
}

std::string FormatShort(double value) {
  char buffer[64];
  std::snprintf(buffer, sizeof buffer, "%.6g", value);
  return buffer;
}

absl::string_view TrialStateName(v1::TrialState state) {
  switch (state) {
    case v1::TRIAL_STATE_LEASED:
      return "leased";
    case v1::TRIAL_STATE_REPORTED:
      return "reported";
    case v1::TRIAL_STATE_LAPSED:
      return "lapsed";
    case v1::TRIAL_STATE_VOIDED:
      return "voided";
    default:
      return "";
  }
}

absl::string_view OutcomeUseName(v1::OutcomeUse use) {
  switch (use) {
    case v1::OUTCOME_USE_PENDING:
      return "pending";
    case v1::OUTCOME_USE_CONSUMED:
      return "consumed";
    case v1::OUTCOME_USE_TOO_STALE:
      return "too_stale";
    case v1::OUTCOME_USE_AWAITING_REPLICATES:
      return "awaiting_replicates";
    default:
      return "";
  }
}

absl::string_view PhaseName(v1::CampaignPhase phase) {
  switch (phase) {
    case v1::CAMPAIGN_PHASE_OPEN:
      return "open";
    case v1::CAMPAIGN_PHASE_PAUSED:
      return "paused";
    case v1::CAMPAIGN_PHASE_DONE:
      return "done";
    default:
      return "";
  }
}

absl::string_view DoneReasonName(v1::DoneReason reason) {
  switch (reason) {
    case v1::DONE_REASON_BUDGET:
      return "budget";
    case v1::DONE_REASON_TARGET:
      return "target";
    case v1::DONE_REASON_CONVERGED:
      return "converged";
    case v1::DONE_REASON_STOPPED:
      return "stopped";
    default:
      return "";
  }
}

std::string PhaseWithReason(const v1::StatusSummary& status) {
  std::string text(PhaseName(status.phase()));
  if (status.phase() == v1::CAMPAIGN_PHASE_DONE && status.reason() != v1::DONE_REASON_UNSPECIFIED) {
    absl::StrAppend(&text, " (", DoneReasonName(status.reason()), ")");
  }
  return text;
}

absl::string_view OutcomeKindName(const v1::Outcome& outcome) {
  switch (outcome.kind_case()) {
    case v1::Outcome::kScore:
      return "score";
    case v1::Outcome::kGrade:
      return "grade";
    case v1::Outcome::kInfeasible:
      return "infeasible";
    case v1::Outcome::kVoid:
      return "void";
    case v1::Outcome::KIND_NOT_SET:
      break;
  }
  return "";
}

std::string OutcomeText(const v1::Outcome& outcome) {
  switch (outcome.kind_case()) {
    case v1::Outcome::kScore:
      return absl::StrCat("score ", FormatExact(outcome.score()));
    case v1::Outcome::kGrade:
      return absl::StrCat("grade ", outcome.grade());
    default:
      return std::string(OutcomeKindName(outcome));
  }
}

std::string ValueText(const v1::Value& value) {
  switch (value.kind_case()) {
    case v1::Value::kReal:
      return FormatExact(value.real());
    case v1::Value::kInteger:
      return absl::StrCat(value.integer());
    case v1::Value::kCategorical:
      return value.categorical();
    case v1::Value::kFlag:
      return value.flag() ? "on" : "off";
    case v1::Value::KIND_NOT_SET:
      break;
  }
  return "";
}

std::string ValueData(const v1::Value& value) {
  if (value.kind_case() == v1::Value::kFlag) return value.flag() ? "true" : "false";
  return ValueText(value);
}

std::string FormatUnixMs(int64_t unix_ms, absl::TimeZone zone) {
  return absl::FormatTime("%Y-%m-%d %H:%M:%S %Z", absl::FromUnixMillis(unix_ms), zone);
}

namespace {

// Columns are counted in code points so that "degC" and "°C" line up alike (no East Asian wide
// characters are expected in units and names).
size_t DisplayWidth(absl::string_view s) {
  return std::count_if(s.begin(), s.end(), [](char c) { return (c & 0xC0) != 0x80; });
}

}  // namespace

Table::Table(std::vector<std::string> header, std::vector<bool> right_aligned)
    : right_aligned_(std::move(right_aligned)) {
  rows_.push_back(std::move(header));
}

void Table::AddRow(std::vector<std::string> row) { rows_.push_back(std::move(row)); }

std::string Table::Render() const {
  std::vector<size_t> width;
  for (const auto& row : rows_) {
    if (width.size() < row.size()) width.resize(row.size(), 0);
    for (size_t c = 0; c < row.size(); ++c) width[c] = std::max(width[c], DisplayWidth(row[c]));
  }
  std::string out;
  for (const auto& row : rows_) {
    std::string line;
    for (size_t c = 0; c < row.size(); ++c) {
      if (c > 0) line += "  ";
      const std::string pad(width[c] - DisplayWidth(row[c]), ' ');
      const bool right = c < right_aligned_.size() && right_aligned_[c];
      absl::StrAppend(&line, right ? pad : "", row[c], right ? "" : pad);
    }
    line.erase(line.find_last_not_of(' ') + 1);
    absl::StrAppend(&out, line, "\n");
  }
  return out;
}

std::string CsvField(absl::string_view field) {
  if (field.find_first_of(",\"\r\n") == absl::string_view::npos) return std::string(field);
  std::string out = "\"";
  for (char c : field) {
    if (c == '"') out += '"';
    out += c;
  }
  out += '"';
  return out;
}

std::string CsvRow(const std::vector<std::string>& fields) {
  std::string out;
  for (size_t i = 0; i < fields.size(); ++i) {
    if (i > 0) out += ',';
    out += CsvField(fields[i]);
  }
  out += '\n';
  return out;
}

}  // namespace ogive::cli
