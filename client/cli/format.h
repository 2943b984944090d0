// Text building blocks of `ogive`'s output: numbers, the names of states and phases, outcomes,
// aligned tables and CSV (RFC 4180). Pure functions of their arguments.
#ifndef OGIVE_CLIENT_CLI_FORMAT_H_
#define OGIVE_CLIENT_CLI_FORMAT_H_

#include <string>
#include <vector>

#include "absl/strings/string_view.h"
#include "absl/time/time.h"
#include "ogive/v1/service.pb.h"
#include "ogive/v1/campaign.pb.h"

namespace ogive::cli {

// The shortest text that reads back as exactly `value` ("3.25", "1e-07", "0.1").
std::string FormatExact(double value);
// `value` to six significant digits, for tables and summaries.
std::string FormatShort(double value);

// Lower-case words of the vocabulary: "leased", "reported", "lapsed", "voided"; "pending",
// "consumed", "too_stale"; "open", "paused", "done"; "budget", "target", "converged", "stopped".
// The unspecified value gives "".
absl::string_view TrialStateName(v1::TrialState state);
absl::string_view OutcomeUseName(v1::OutcomeUse use);
absl::string_view PhaseName(v1::CampaignPhase phase);
absl::string_view DoneReasonName(v1::DoneReason reason);
// "open", "paused", "done (budget)".
std::string PhaseWithReason(const v1::StatusSummary& status);

// "score", "grade", "infeasible", "void", or "" when there is no outcome.
absl::string_view OutcomeKindName(const v1::Outcome& outcome);
// "score 3.25", "grade good", "infeasible", "void", or "" (no note; scores exact).
std::string OutcomeText(const v1::Outcome& outcome);

// A value as a person reads it: reals exactly, integers, flags "on"/"off", options by name.
std::string ValueText(const v1::Value& value);
// A value for machines (CSV): reals exactly, integers, flags "true"/"false", options by name.
std::string ValueData(const v1::Value& value);

// A Unix time in milliseconds as "2024-05-01 14:03:07 CEST" in `zone`.
std::string FormatUnixMs(int64_t unix_ms, absl::TimeZone zone);

// Rows of cells printed in aligned columns, two blanks apart, the header first. Columns listed in
// `right_aligned` (by index) are aligned right, for numbers.
class Table {
 public:
  explicit Table(std::vector<std::string> header, std::vector<bool> right_aligned = {});
  void AddRow(std::vector<std::string> row);
  // The table, one line per row, each ending in '\n'; trailing blanks are trimmed.
  std::string Render() const;

 private:
  std::vector<std::vector<std::string>> rows_;
  std::vector<bool> right_aligned_;
};

// One CSV field: as is when it needs no quoting, otherwise in double quotes with inner quotes
// doubled (RFC 4180: fields holding a comma, a quote, CR or LF are quoted).
std::string CsvField(absl::string_view field);
// Fields joined by commas, ended by "\n" (RFC 4180 says CRLF; every CSV reader takes LF, and shell
// tools do not trip over a CR in the last field).
std::string CsvRow(const std::vector<std::string>& fields);

}  // namespace ogive::cli

#endif  // OGIVE_CLIENT_CLI_FORMAT_H_
