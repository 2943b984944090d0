// What `ogive` prints for campaigns and trials: the campaign list, a campaign's summary, trial tables and
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
#include "ogive/v1/campaign.pb.h"

namespace ogive::cli {

// The trial state named `name` ("leased", "reported", "lapsed", "voided"), or nullopt.
std::optional<v1::TrialState> TrialStateFromName(absl::string_view name);

// "score 3.25 (trial 12)", or "-" before the first informative outcome.
std::string BestText(const v1::StatusSummary& status);

// One row per campaign: name, phase (reason), generation, trials by state, best outcome.
std::string CampaignListTable(const v1::ListCampaignsResponse& campaigns);

// A readable summary of one campaign: objective, phase, counts, the best trial and the search
// distribution in user units.
std::string CampaignSummary(const v1::CampaignView& view);

// "[#######.............]  45/120 (38%)": progress of `done` toward `total` (total > 0), `width`
// cells wide.
std::string ProgressBar(int64_t done, int64_t total, int width);

// One line per update for `ogive campaign watch` when standard output is not a terminal: time,
// phase, generation, trials by state, best outcome and progress toward the trial budget.
std::string WatchLine(const v1::CampaignView& view, absl::TimeZone zone);

// The live screen of `ogive campaign watch` on a terminal: the summary and a progress bar.
std::string WatchScreen(const v1::CampaignView& view, absl::TimeZone zone);

// Trials as an aligned table: number, state, generation, worker, outcome, late, use and one column
// per parameter of `design`.
std::string TrialsTable(const v1::CampaignDesign& design, const std::vector<v1::Trial>& trials);
// A trial just leased, for `ogive ask`: its number and deadline, then "name = value unit" lines.
std::string LeasedTrialText(const v1::CampaignDesign& design, const v1::Trial& trial,
                            absl::TimeZone zone);

}  // namespace ogive::cli

#endif  // OGIVE_CLIENT_CLI_VIEWS_H_
