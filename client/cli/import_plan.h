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
};

// Checks `records` (an optional header row naming the columns trial, outcome and note in any order
// and case; without one the columns are trial, outcome[, note]) against the campaign's design and its
// trials. An outcome is a number (a score, on a scored campaign), a label of the grade scale (any
// case; a typo gets the closest label suggested), `infeasible` or `void`.
ImportPlan PlanImport(const std::vector<CsvRecord>& records, const v1::CampaignDesign& design,
                      const std::vector<v1::Trial>& trials);

// The outcome as a short text for messages: "score 3.25", "grade good", "infeasible", "void".
std::string OutcomeSummary(const v1::Outcome& outcome);

}  // namespace ogive::cli

#endif  // OGIVE_CLIENT_CLI_IMPORT_PLAN_H_
