#include "client/cli/report_commands.h"

#include <unistd.h>

#include <cerrno>
#include <cstdio>
#include <cstring>
#include <memory>

#include "absl/strings/str_cat.h"
#include "absl/time/clock.h"
#include "client/cli/report_page.h"
#include "client/cli/trial_export.h"
#include "client/ogive_client.h"

namespace ogive::cli {
namespace {

constexpr char kReportHelp[] =
    R"(Writes one self-contained HTML page about campaign NAME to FILE: its phase and status, plots
of the best outcome against trials, the step size and axis ratio against generation, the
trials' states, the staleness of consumed outcomes and each parameter's distribution over
the generations (mean +/- 2 spreads within its bounds, or stacked probabilities), a table of
the best trials with their candidates, and the design. The page has no scripts and loads
nothing: open it in any browser, mail it, or print it. Without -o the page goes to NAME.html
in the current directory; '-o -' writes it to standard output.
)";

constexpr char kExportHelp[] =
    R"(Prints every trial of campaign NAME, in trial-number order, with its state, outcome (kind,
score, grade label), note, candidate (one column per parameter, the unit in the header),
the generation it came from and the one that consumed it, use, late, worker, who reported
it, when (ISO 8601, UTC) and its lease deadline.
  --csv    CSV per RFC 4180: a header row, CRLF line ends, fields with commas, quotes or
           line breaks in double quotes
  --json   a JSON array of objects (null for what a trial does not have)
-o FILE writes to FILE instead of standard output.
)";

void Print(absl::string_view text) {
  std::fwrite(text.data(), 1, text.size(), stdout);
  std::fflush(stdout);
}

// Writes to FILE (or standard output for "-"); prints nothing else on success.
int Emit(const Invocation& inv, const std::string& path, const std::string& contents) {
  if (path == "-") {
    Print(contents);
    return kExitOk;
  }
  if (absl::Status s = WriteFileAtomically(path, contents); !s.ok()) {
    return CommandUsageError(*inv.command, s.message());
  }
  return kExitOk;
}

int RunCampaignReport(const Invocation& inv) {
  const std::string path = inv.args.Get("--output").value_or(absl::StrCat(inv.args.positional[0], ".html"));
  if (path.empty()) return CommandUsageError(*inv.command, "-o: give the file to write, e.g. -o report.html");
  absl::StatusOr<std::unique_ptr<client::Client>> c = ClientFor(inv);
  if (!c.ok()) return CommandUsageError(*inv.command, c.status().message());
  const std::string& campaign = inv.args.positional[0];
  ReportInput input;
  absl::StatusOr<v1::CampaignView> view = (*c)->GetCampaign(campaign);
  if (!view.ok()) return CommandServerError(inv, view.status());
  input.view = *std::move(view);
  absl::StatusOr<std::vector<v1::Trial>> trials = (*c)->ListAllTrials(campaign);
  if (!trials.ok()) return CommandServerError(inv, trials.status());
  input.trials = *std::move(trials);
  absl::StatusOr<std::vector<v1::GenerationView>> generations = (*c)->ListAllGenerations(campaign);
  if (!generations.ok()) return CommandServerError(inv, generations.status());
  input.generations = *std::move(generations);
  input.generated_at = absl::Now();
  input.server = inv.globals.server;
  const int code = Emit(inv, path, CampaignReportHtml(input));
  if (code == kExitOk && path != "-") {
    std::fprintf(stderr, "wrote the report of campaign %s (%zu trials, %zu generations) to %s\n", campaign.c_str(),
                 input.trials.size(), input.generations.size(), path.c_str());
  }
  return code;
}

int RunCampaignExport(const Invocation& inv) {
  const bool csv = inv.args.Has("--csv");
  const bool json = inv.globals.json;
  if (csv == json) {
    return CommandUsageError(*inv.command, csv ? "--csv and --json: choose one format"
                                               : "give the format: --csv or --json");
  }
  absl::StatusOr<std::unique_ptr<client::Client>> c = ClientFor(inv);
  if (!c.ok()) return CommandUsageError(*inv.command, c.status().message());
  const std::string& campaign = inv.args.positional[0];
  absl::StatusOr<v1::CampaignView> view = (*c)->GetCampaign(campaign);
  if (!view.ok()) return CommandServerError(inv, view.status());
  absl::StatusOr<std::vector<v1::Trial>> trials = (*c)->ListAllTrials(campaign);
  if (!trials.ok()) return CommandServerError(inv, trials.status());
  const std::string contents =
      csv ? TrialsExportCsv(view->design(), *trials) : TrialsExportJson(view->design(), *trials);
  return Emit(inv, inv.args.Get("--output").value_or("-"), contents);
}

}  // namespace

absl::Status WriteFileAtomically(const std::string& path, const std::string& contents) {
  const std::string temporary = absl::StrCat(path, ".tmp.", getpid());
  const auto failure = [&](absl::string_view what) {
    const int error = errno;
    std::remove(temporary.c_str());
    return absl::InvalidArgumentError(absl::StrCat("-o '", path, "': cannot ", what, ": ", std::strerror(error)));
  };
  std::FILE* file = std::fopen(temporary.c_str(), "wb");
  if (file == nullptr) return failure("create it");
  const bool written = std::fwrite(contents.data(), 1, contents.size(), file) == contents.size();
  const bool flushed = std::fflush(file) == 0 && fsync(fileno(file)) == 0;
  if (std::fclose(file) != 0 || !written || !flushed) return failure("write it");
  if (std::rename(temporary.c_str(), path.c_str()) != 0) return failure("rename the written file to it");
  return absl::OkStatus();
}

std::vector<Command> ReportCommands() {
  std::vector<Command> commands;
  commands.push_back({.words = {"campaign", "report"},
                      .synopsis = "NAME [-o FILE.html]",
                      .summary = "write an HTML page with plots of a campaign's progress",
                      .details = kReportHelp,
                      .options = {{"--output", "-o", "FILE", "the HTML file to write (default NAME.html; '-' for standard output)"}},
                      .min_positional = 1,
                      .max_positional = 1,
                      .prints_data = false,
                      .run = RunCampaignReport});
  commands.push_back({.words = {"campaign", "export"},
                      .synopsis = "NAME [-o FILE] (--csv | --json)",
                      .summary = "every trial with values, outcome, who reported it and when",
                      .details = kExportHelp,
                      .options = {{"--csv", "", "", "CSV (RFC 4180) instead of JSON"},
                                  {"--output", "-o", "FILE", "write to FILE instead of standard output"}},
                      .min_positional = 1,
                      .max_positional = 1,
                      .run = RunCampaignExport});
  return commands;
}

}  // namespace ogive::cli
