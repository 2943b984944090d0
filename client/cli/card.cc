#include "client/cli/card.h"

#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_join.h"
#include "client/cli/format.h"

namespace ogive::cli {
namespace {

// Our own 5x5 block glyphs for 0-9.
constexpr const char* kGlyphs[10][5] = {
    {" ### ", "#   #", "#   #", "#   #", " ### "},  // 0
    {"  #  ", " ##  ", "  #  ", "  #  ", " ### "},  // 1
    {" ### ", "#   #", "  ## ", " #   ", "#####"},  // 2
    {"#### ", "    #", " ### ", "    #", "#### "},  // 3
    {"#   #", "#   #", "#####", "    #", "    #"},  // 4
    {"#####", "#    ", "#### ", "    #", "#### "},  // 5
    {" ### ", "#    ", "#### ", "#   #", " ### "},  // 6
    {"#####", "    #", "   # ", "  #  ", "  #  "},  // 7
    {" ### ", "#   #", " ### ", "#   #", " ### "},  // 8
    {" ### ", "#   #", " ####", "    #", " ### "},  // 9
};

constexpr char kRule[] = "========================================================================\n";

std::string ReportHint(absl::string_view campaign, const v1::CampaignDesign& design, int64_t number) {
  const std::string tell = absl::StrCat("ogive tell ", campaign, " ", number);
  if (design.objective().has_grade_scale()) {
    return absl::StrCat("Report:  ", tell, " --grade LABEL\n", "         LABEL, worst first: ",
                        absl::StrJoin(design.objective().grade_scale().labels(), " < "), "\n",
                        "         or --infeasible (broke a constraint), --void (not measured)\n");
  }
  const char* direction =
      design.objective().direction() == v1::DIRECTION_HIGHER_IS_BETTER ? "higher is better" : "lower is better";
  return absl::StrCat("Report:  ", tell, " --score X   (", direction, ")\n",
                      "         or --infeasible (broke a constraint), --void (not measured)\n");
}

}  // namespace

std::string BlockDigits(int64_t number) {
  const std::string digits = absl::StrCat(number < 0 ? -number : number);
  std::string out;
  for (int row = 0; row < 5; ++row) {
    std::string line;
    for (char d : digits) absl::StrAppend(&line, kGlyphs[d - '0'][row], " ");
    while (!line.empty() && line.back() == ' ') line.pop_back();
    absl::StrAppend(&out, line, "\n");
  }
  return out;
}

std::string TrialCard(absl::string_view campaign, const v1::CampaignDesign& design, const v1::Trial& trial,
                      absl::TimeZone zone) {
  std::string out = kRule;
  absl::StrAppend(&out, "Campaign ", campaign, "          trial ", trial.number(), "   (generation ", trial.generation(),
                  ")\n\n");
  out += BlockDigits(trial.number());
  absl::StrAppend(&out, "\nLease until ", FormatUnixMs(trial.lease_deadline_unix_ms(), zone), "   worker ",
                  trial.worker().empty() ? "-" : trial.worker(), "\n");
  out += "------------------------------------------------------------------------\n";
  for (const v1::Parameter& p : design.parameters()) {
    auto it = trial.candidate().values().find(p.name());
    if (it == trial.candidate().values().end()) continue;
    std::string value = ValueText(it->second);
    if (!p.unit().empty()) absl::StrAppend(&value, " ", p.unit());
    absl::StrAppend(&out, "  ", p.name(), " = ", value, "\n");
    if (!p.description().empty()) absl::StrAppend(&out, "      ", p.description(), "\n");
  }
  out += "------------------------------------------------------------------------\n";
  out += ReportHint(campaign, design, trial.number());
  out += "\nCheck these settings against your local safety rules and equipment limits before use.\n";
  out += kRule;
  out += "\f";
  return out;
}

}  // namespace ogive::cli
