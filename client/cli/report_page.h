// The campaign report: one self-contained HTML page (inline CSS and SVG; no scripts, no external
// references) with the campaign's phase and status, a safety caution, plots of its progress (best
// outcome against trials, step size and axis ratio against generation, trial states, staleness of
// consumed outcomes), each parameter's distribution over the generations, a table of the best trials
// with their candidates, and the design. Pure: the protos and a time in, the page out; every piece of
// user text is escaped.
#ifndef OGIVE_CLIENT_CLI_REPORT_PAGE_H_
#define OGIVE_CLIENT_CLI_REPORT_PAGE_H_

#include <string>
#include <vector>

#include "absl/time/time.h"
#include "ogive/v1/service.pb.h"
#include "ogive/v1/campaign.pb.h"

namespace ogive::cli {

struct ReportInput {
  v1::CampaignView view;                           // with its design
  std::vector<v1::Trial> trials;                // every trial
  std::vector<v1::GenerationView> generations;  // every update, in generation order
  absl::Time generated_at;                      // shown in the header (UTC)
  std::string server;                           // where the data came from, shown in the header
};

// How many of the best trials the table lists.
inline constexpr size_t kReportBestTrials = 10;

// The page, as UTF-8 HTML.
std::string CampaignReportHtml(const ReportInput& input);

}  // namespace ogive::cli

#endif  // OGIVE_CLIENT_CLI_REPORT_PAGE_H_
