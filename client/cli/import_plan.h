// Planning `ogive import`: outcomes measured in a batch arrive as CSV rows (trial number, outcome,
// optional note). Every row is checked against the campaign before anything is sent, so that a file
// with a bad row imports nothing unless asked to skip bad rows, and a file imported twice changes
// nothing the second time (its rows are found already stored). Pure, unit-tested.
#ifndef OGIVE_CLIENT_CLI_IMPORT_PLAN_H_
#define OGIVE_CLIENT_CLI_IMPORT_PLAN_H_

#include <string>
#include <vector>

#include "client/cli/csv_reader.h"
#include "ogive/v1/service.pb.h"
#include "ogive/v1/campaign.pb.h"

namespace ogive::cli {

struct ImportRow {
  int line = 0;
  int64_t trial = 0;
  v1::Outcome outcome;  // with the row's note
};

struct BadRow {
  int line = 0;
  std::string reason;
};

struct ImportPlan {
  std::vector<ImportRow> to_report;       // new outcomes, in file order
  std::vector<ImportRow> already_stored;  // the same outcome is stored already (nothing to do)
  std::vector<BadRow> bad;                // in file order
  int without_outcome = 0;                // export rows of trials that have no outcome (skipped)
};

// Checks `records` against the campaign's design and its trials. Two layouts are read:
// - the short one: an optional header row naming the columns trial, outcome and note in any order and
//   case (without one the columns are trial, outcome[, note]); an outcome is a number (a score, on a
//   scored campaign), a label of the grade scale (any case; a typo gets the closest label suggested),
//   `infeasible` or `void`;
// - the records of `ogive campaign export --csv` and `ogive campaign trials --csv` (a header with
//   trial, outcome, score and grade columns, among others): outcome is the kind (score, grade,
//   infeasible, void, or empty for a trial without one, which is skipped), the value is in the score
//   or grade column. An export imported into its own campaign is therefore found stored already. Its
//   candidate columns must match the campaign's trial of that number (reals to 1e-9 relative), so an
//   export of another campaign is refused row by row instead of reporting onto the wrong trials.
// With `decimal_comma` (the file separates fields with ';' or tabs, as spreadsheet programs do where
// a comma is the decimal mark), a score may be written "3,25".
ImportPlan PlanImport(const std::vector<CsvRecord>& records, const v1::CampaignDesign& design,
                      const std::vector<v1::Trial>& trials, bool decimal_comma = false);

// The outcome as a short text for messages: "score 3.25", "grade good", "infeasible", "void".
std::string OutcomeSummary(const v1::Outcome& outcome);

}  // namespace ogive::cli

#endif  // OGIVE_CLIENT_CLI_IMPORT_PLAN_H_
