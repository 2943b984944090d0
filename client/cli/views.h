// What `ogive` prints for studies and trials: the study list, a study's summary, trial tables and
// CSV, and leased trials. Pure functions of the protos (and a time zone), so the layout is tested
// without a server.
#ifndef OGIVE_CLIENT_CLI_VIEWS_H_
#define OGIVE_CLIENT_CLI_VIEWS_H_

#include <optional>
#include <string>
#include <vector>

#include "absl/strings/string_view.h"
#include "absl/time/time.h"
#include "ogive/v1/service.pb.h"
#include "ogive/v1/study.pb.h"

namespace ogive::cli {

// The trial state named `name` ("leased", "reported", "lapsed", "voided"), or nullopt.
std::optional<v1::TrialState> TrialStateFromName(absl::string_view name);

// "score 3.25 (trial 12)", or "-" before the first informative outcome.
std::string BestText(const v1::StatusSummary& status);

// One row per study: name, phase (reason), generation, trials by state, best outcome.
std::string StudyListTable(const v1::ListStudiesResponse& studies);

// A readable summary of one study: objective, phase, counts, the best trial and the search
// distribution in user units.
std::string StudySummary(const v1::StudyView& view);

// "[#######.............]  45/120 (38%)": progress of `done` toward `total` (total > 0), `width`
// cells wide.
std::string ProgressBar(int64_t done, int64_t total, int width);

// One line per update for `ogive study watch` when standard output is not a terminal: time,
// phase, generation, trials by state, best outcome and progress toward the trial budget.
std::string WatchLine(const v1::StudyView& view, absl::TimeZone zone);

// The live screen of `ogive study watch` on a terminal: the summary and a progress bar.
std::string WatchScreen(const v1::StudyView& view, absl::TimeZone zone);

// Trials as an aligned table: number, state, generation, worker, outcome, late, use and one column
// per parameter of `design`.
std::string TrialsTable(const v1::StudyDesign& design, const std::vector<v1::Trial>& trials);

// Trials as CSV with a header row: number, state, generation, worker, outcome (its kind), score,
// grade, note, late, use, consumed_by, then one column per parameter (named after it).
std::string TrialsCsv(const v1::StudyDesign& design, const std::vector<v1::Trial>& trials);

// A trial just leased, for `ogive ask`: its number and deadline, then "name = value unit" lines.
std::string LeasedTrialText(const v1::StudyDesign& design, const v1::Trial& trial,
                            absl::TimeZone zone);

}  // namespace ogive::cli

#endif  // OGIVE_CLIENT_CLI_VIEWS_H_
