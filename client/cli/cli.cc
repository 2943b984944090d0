#include "client/cli/cli.h"

#include <unistd.h>

#include <algorithm>
#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <map>
#include <memory>
#include <optional>

#include "absl/strings/ascii.h"
#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_join.h"
#include "absl/time/clock.h"
#include "client/cli/card.h"
#include "client/cli/csv_reader.h"
#include "client/cli/design_file.h"
#include "client/cli/grade_match.h"
#include "client/cli/import_plan.h"
#include "client/cli/format.h"
#include "client/cli/report_commands.h"
#include "client/cli/trial_export.h"
#include "client/cli/views.h"
#include "client/error_reason.h"
#include "client/ogive_client.h"
#include "google/protobuf/util/json_util.h"

namespace ogive::cli {
namespace {

constexpr char kSafetyNote[] =
    "Safety: candidates are suggestions of a search algorithm, not instructions. Check every\n"
    "candidate against your local safety rules and equipment limits before it drives equipment.\n";

const OptionSpec kGlobalOptions[] = {
    {"--server", "", "HOST:PORT", "the server (default $OGIVE_SERVER, else 127.0.0.1:7075)"},
    {"--timeout", "", "DURATION", "deadline of each call to the server (default 30s)"},
    {"--json", "", "", "print data as JSON instead of tables and text (trials as export records)"},
    {"--token-file", "", "PATH", "file holding the access token (default: $OGIVE_TOKEN)"},
    {"--tls", "", "", "use TLS, trusting the system's CA certificates (implied by --tls-*)"},
    {"--tls-ca", "", "PEM", "CA certificates that sign the server's (default $OGIVE_TLS_CA)"},
    {"--tls-cert", "", "PEM", "client certificate, for a server that asks (default $OGIVE_TLS_CERT)"},
    {"--tls-key", "", "PEM", "private key of --tls-cert (default $OGIVE_TLS_KEY)"},
    {"--tls-server-name", "", "NAME", "name in the server's certificate (default: its host; $OGIVE_TLS_SERVER_NAME)"},
    {"--help", "-h", "", "this help"},
};

// ---- Running commands ----

std::string Prefix(const Command& command) {
  return absl::StrCat("ogive ", absl::StrJoin(command.words, " "));
}

int UsageError(const Command& command, absl::string_view message) {
  std::fprintf(stderr, "%s: %s\n(see '%s --help')\n", Prefix(command).c_str(),
               std::string(message).c_str(), Prefix(command).c_str());
  return kExitUsage;
}

// "ALREADY_EXISTS (OUTCOME_CONFLICT)": a report's code and the server's reason for it.
std::string ResultCode(const v1::ReportResult& r) {
  return absl::StrCat(absl::StatusCodeToString(static_cast<absl::StatusCode>(r.code())),
                      r.reason().empty() ? "" : absl::StrCat(" (", r.reason(), ")"));
}

int ServerError(const Invocation& inv, const absl::Status& status) {
  // "ogive ask: FAILED_PRECONDITION (CAMPAIGN_PAUSED): campaign is paused; ...": the code and the
  // server's machine-readable reason for scripts, then the message for people.
  const std::optional<client::ErrorReason> why = client::ErrorReasonOf(status);
  std::string text = absl::StrCat(Prefix(*inv.command), ": ", absl::StatusCodeToString(status.code()),
                                  why.has_value() ? absl::StrCat(" (", why->reason, ")") : "", ": ",
                                  status.message());
  if (status.code() == absl::StatusCode::kUnavailable ||
      status.code() == absl::StatusCode::kDeadlineExceeded) {
    absl::StrAppend(&text, "\n(server ", inv.globals.server,
                    "; is ogived running there? Choose another with --server or $OGIVE_SERVER",
                    inv.globals.tls.on() ? ". With TLS: does --tls-ca sign its certificate, does the certificate "
                                           "name the host (else --tls-server-name), does it want --tls-cert?)"
                                         : ". If it serves TLS, give --tls-ca)");
  }
  std::fprintf(stderr, "%s\n", text.c_str());
  return kExitServerError;
}

void Print(absl::string_view text) {
  std::fwrite(text.data(), 1, text.size(), stdout);
  std::fflush(stdout);
}

std::string Json(const google::protobuf::Message& message) {
  std::string out;
  google::protobuf::util::JsonPrintOptions options;
  options.always_print_primitive_fields = true;  // scripts find 0, false and "" where they look
  options.preserve_proto_field_names = true;     // one JSON dialect: snake_case keys, as in exports
  if (!google::protobuf::util::MessageToJsonString(message, &out, options).ok()) return "{}";
  return out;
}

template <typename Messages>
std::string JsonArray(const Messages& messages) {
  std::string out = "[";
  bool first = true;
  for (const auto& m : messages) {
    absl::StrAppend(&out, first ? "" : ",", Json(m));
    first = false;
  }
  out += "]\n";
  return out;
}

absl::StatusOr<std::unique_ptr<client::Client>> Connect(const Invocation& inv) {
  client::ClientOptions options;
  options.call_timeout = absl::Seconds(inv.globals.timeout_seconds);
  if (!inv.globals.token_file.empty()) {
    std::FILE* file = std::fopen(inv.globals.token_file.c_str(), "r");
    if (file == nullptr) {
      return absl::InvalidArgumentError(
          absl::StrCat("--token-file: cannot read '", inv.globals.token_file, "'"));
    }
    char buffer[4096];
    const size_t n = std::fread(buffer, 1, sizeof buffer, file);
    std::fclose(file);
    options.token = std::string(absl::StripAsciiWhitespace(absl::string_view(buffer, n)));
  } else if (const char* token = std::getenv("OGIVE_TOKEN"); token != nullptr) {
    options.token = std::string(absl::StripAsciiWhitespace(token));
  }
  options.tls = inv.globals.tls;
  return client::Client::Open(inv.globals.server, std::move(options));
}

// Connects, or prints the usage error and returns nullptr with `*exit_code` set.
std::unique_ptr<client::Client> ConnectOrFail(const Invocation& inv, int* exit_code) {
  absl::StatusOr<std::unique_ptr<client::Client>> c = Connect(inv);
  if (!c.ok()) {
    *exit_code = UsageError(*inv.command, c.status().message());
    return nullptr;
  }
  return std::move(*c);
}

const std::string& Arg(const Invocation& inv, size_t i) { return inv.args.positional[i]; }

int RunCampaignCreate(const Invocation& inv) {
  absl::StatusOr<v1::CampaignDesign> design = ReadDesignFile(Arg(inv, 0));
  if (!design.ok()) return UsageError(*inv.command, design.status().message());
  int code = 0;
  std::unique_ptr<client::Client> c = ConnectOrFail(inv, &code);
  if (c == nullptr) return code;
  absl::StatusOr<v1::CampaignView> view = c->CreateCampaign(*design);
  if (!view.ok()) return ServerError(inv, view.status());
  if (inv.globals.json) {
    Print(Json(*view) + "\n");
  } else {
    Print(absl::StrCat("created campaign ", view->name(), " (population ",
                       view->status().population_size(), ")\n"));
  }
  return kExitOk;
}

int RunCampaignList(const Invocation& inv) {
  int code = 0;
  std::unique_ptr<client::Client> c = ConnectOrFail(inv, &code);
  if (c == nullptr) return code;
  absl::StatusOr<v1::ListCampaignsResponse> list = c->ListCampaigns();
  if (!list.ok()) return ServerError(inv, list.status());
  if (inv.globals.json) {
    Print(JsonArray(list->campaigns()));
  } else if (list->campaigns().empty()) {
    Print(absl::StrCat("no campaigns on ", inv.globals.server, "\n"));
  } else {
    Print(CampaignListTable(*list));
  }
  return kExitOk;
}

int RunCampaignShow(const Invocation& inv) {
  int code = 0;
  std::unique_ptr<client::Client> c = ConnectOrFail(inv, &code);
  if (c == nullptr) return code;
  absl::StatusOr<v1::CampaignView> view = c->GetCampaign(Arg(inv, 0));
  if (!view.ok()) return ServerError(inv, view.status());
  Print(inv.globals.json ? Json(*view) + "\n" : CampaignSummary(*view));
  return kExitOk;
}

int RunCampaignWatch(const Invocation& inv) {
  int code = 0;
  std::unique_ptr<client::Client> c = ConnectOrFail(inv, &code);
  if (c == nullptr) return code;
  const bool terminal = isatty(STDOUT_FILENO) == 1 && !inv.globals.json;
  const absl::TimeZone zone = absl::LocalTimeZone();
  v1::CampaignDesign design;  // the stream's later views are brief (no design)
  bool done = false;
  bool got_view = false;
  // A stream that breaks (the server restarts or drains, the network drops) is watched again with
  // backoff, and the screen says so; after kWatchPatience without a view the command gives up.
  constexpr absl::Duration kWatchPatience = absl::Minutes(5);
  absl::Duration backoff = absl::Milliseconds(250);
  absl::Time failing_since = absl::Now();
  for (;;) {
    got_view = false;
    absl::Status status = c->Watch(Arg(inv, 0), [&](const v1::CampaignView& update) {
      got_view = true;
      v1::CampaignView view = update;
      if (view.has_design()) {
        design = view.design();
      } else {
        *view.mutable_design() = design;
      }
      if (inv.globals.json) {
        Print(Json(update) + "\n");
      } else if (terminal) {
        Print("\x1b[H\x1b[2J" + WatchScreen(view, zone));  // home, clear screen, redraw
      } else {
        Print(WatchLine(view, zone));
      }
      done = view.status().phase() == v1::CAMPAIGN_PHASE_DONE;
      return !done;
    });
    if (done) return kExitOk;
    if (!status.ok() && status.code() != absl::StatusCode::kUnavailable) return ServerError(inv, status);
    const absl::Time now = absl::Now();
    if (got_view) {
      failing_since = now;
      backoff = absl::Milliseconds(250);
    }
    if (now - failing_since > kWatchPatience) {
      return ServerError(inv, status.ok() ? absl::UnavailableError("the server ended the stream") : status);
    }
    std::fprintf(stderr, "ogive campaign watch: the stream from %s ended (%s); watching again in %s\n",
                 inv.globals.server.c_str(),
                 status.ok() ? "closed by the server" : std::string(status.message()).c_str(),
                 absl::FormatDuration(backoff).c_str());
    absl::SleepFor(backoff);
    backoff = std::min(2 * backoff, absl::Seconds(10));
  }
}

int RunPhase(const Invocation& inv, v1::PhaseCommand command) {
  int code = 0;
  std::unique_ptr<client::Client> c = ConnectOrFail(inv, &code);
  if (c == nullptr) return code;
  absl::StatusOr<v1::CampaignView> view = c->SetPhase(Arg(inv, 0), command);
  if (!view.ok()) return ServerError(inv, view.status());
  if (inv.globals.json) {
    Print(Json(*view) + "\n");
  } else {
    const v1::StatusSummary& s = view->status();
    Print(absl::StrCat("campaign ", view->name(), ": ", PhaseWithReason(s),
                       s.phase_message().empty() ? "" : ": ", s.phase_message(), "\n"));
  }
  return kExitOk;
}

int RunCampaignPause(const Invocation& inv) { return RunPhase(inv, v1::PHASE_COMMAND_PAUSE); }
int RunCampaignResume(const Invocation& inv) { return RunPhase(inv, v1::PHASE_COMMAND_RESUME); }
int RunCampaignFinish(const Invocation& inv) { return RunPhase(inv, v1::PHASE_COMMAND_FINISH); }

int RunCampaignTrials(const Invocation& inv) {
  v1::TrialState state = v1::TRIAL_STATE_UNSPECIFIED;
  if (std::optional<std::string> name = inv.args.Get("--state"); name.has_value()) {
    std::optional<v1::TrialState> parsed = TrialStateFromName(*name);
    if (!parsed.has_value()) {
      return UsageError(
          *inv.command,
          absl::StrCat("--state: must be one of leased, reported, lapsed, voided; got '", *name,
                       "'"));
    }
    state = *parsed;
  }
  const bool csv = inv.args.Has("--csv");
  if (csv && inv.globals.json) {
    return UsageError(*inv.command, "--csv and --json: choose one output format");
  }
  int code = 0;
  std::unique_ptr<client::Client> c = ConnectOrFail(inv, &code);
  if (c == nullptr) return code;
  const std::string& campaign = Arg(inv, 0);
  absl::StatusOr<v1::CampaignView> view = c->GetCampaign(campaign);
  if (!view.ok()) return ServerError(inv, view.status());
  const v1::CampaignDesign& design = view->design();
  absl::StatusOr<std::vector<v1::Trial>> trials = c->ListAllTrials(campaign, state);
  if (!trials.ok()) return ServerError(inv, trials.status());
  // The records of `campaign export`, so that what one prints the other reads and `import` takes.
  if (inv.globals.json) {
    Print(TrialsExportJson(design, *trials));
  } else if (csv) {
    Print(TrialsExportCsv(design, *trials));
  } else if (trials->empty()) {
    Print(absl::StrCat("no ", state == v1::TRIAL_STATE_UNSPECIFIED ? "" : TrialStateName(state),
                       state == v1::TRIAL_STATE_UNSPECIFIED ? "" : " ", "trials in campaign ", campaign,
                       "\n"));
  } else {
    Print(TrialsTable(design, *trials));
  }
  return kExitOk;
}

double LeaseOption(const Invocation& inv, int* error_code) {
  std::optional<std::string> text = inv.args.Get("--lease");
  if (!text.has_value()) return 0;
  absl::StatusOr<double> seconds = ParsePositiveSeconds("--lease", *text);
  if (!seconds.ok()) {
    *error_code = UsageError(*inv.command, seconds.status().message());
    return 0;
  }
  return *seconds;
}

int RunAsk(const Invocation& inv) {
  int64_t count = 1;
  if (std::optional<std::string> n = inv.args.Get("-n"); n.has_value()) {
    absl::StatusOr<int64_t> parsed = ParseInteger("-n", *n, 1, 1 << 30);
    if (!parsed.ok()) return UsageError(*inv.command, parsed.status().message());
    count = *parsed;
  }
  int code = 0;
  const double lease = LeaseOption(inv, &code);
  if (code != 0) return code;
  const std::string worker = inv.args.Get("--worker").value_or(DefaultWorker());
  if (inv.args.Has("--card") && inv.globals.json) {
    return UsageError(*inv.command, "--card and --json: choose one output format");
  }
  std::unique_ptr<client::Client> c = ConnectOrFail(inv, &code);
  if (c == nullptr) return code;
  const std::string& campaign = Arg(inv, 0);
  absl::StatusOr<v1::CampaignView> view = c->GetCampaign(campaign);
  if (!view.ok()) return ServerError(inv, view.status());
  const v1::CampaignDesign& design = view->design();
  absl::StatusOr<v1::AskResponse> asked = c->Ask(campaign, static_cast<int>(count), worker, lease);
  if (!asked.ok()) return ServerError(inv, asked.status());
  if (inv.globals.json) {  // the trial records of `campaign export --json`
    Print(TrialsExportJson(design, {asked->trials().begin(), asked->trials().end()}));
  } else {
    const absl::TimeZone zone = absl::LocalTimeZone();
    for (const v1::Trial& t : asked->trials()) {
      Print(inv.args.Has("--card") ? TrialCard(campaign, design, t, zone) : LeasedTrialText(design, t, zone));
    }
  }
  if (asked->trials_size() < count) {
    std::fprintf(stderr,
                 "%s: the server handed out %d of %lld trials (the trial budget has room "
                 "for no more)\n",
                 Prefix(*inv.command).c_str(), asked->trials_size(), static_cast<long long>(count));
  }
  return kExitOk;
}

int RunTell(const Invocation& inv) {
  absl::StatusOr<int64_t> trial = ParseInteger("TRIAL", Arg(inv, 1), 1, INT64_MAX);
  if (!trial.ok()) return UsageError(*inv.command, trial.status().message());
  absl::StatusOr<v1::Outcome> outcome = OutcomeFromOptions(inv.args);
  if (!outcome.ok()) return UsageError(*inv.command, outcome.status().message());
  int code = 0;
  std::unique_ptr<client::Client> c = ConnectOrFail(inv, &code);
  if (c == nullptr) return code;
  if (outcome->has_grade()) {
    // Labels match in any case; a typo is refused here, with the closest label suggested.
    absl::StatusOr<v1::CampaignView> view = c->GetCampaign(Arg(inv, 0));
    if (!view.ok()) return ServerError(inv, view.status());
    if (view->design().objective().has_grade_scale()) {
      absl::StatusOr<std::string> grade = MatchGrade(outcome->grade(), view->design().objective().grade_scale(), "--grade");
      if (!grade.ok()) return UsageError(*inv.command, grade.status().message());
      outcome->set_grade(*grade);
    }
  }
  v1::Report report;
  report.set_trial(*trial);
  *report.mutable_outcome() = *outcome;
  absl::StatusOr<v1::TellResponse> told =
      c->Tell(Arg(inv, 0), {report}, inv.args.Get("--worker").value_or(DefaultWorker()));
  if (!told.ok()) return ServerError(inv, told.status());
  if (inv.globals.json) Print(Json(*told) + "\n");
  int exit_code = kExitOk;
  for (const v1::ReportResult& r : told->results()) {
    if (r.code() != 0) {
      std::fprintf(stderr, "%s: trial %lld: %s: %s\n", Prefix(*inv.command).c_str(),
                   static_cast<long long>(r.trial()), ResultCode(r).c_str(), r.message().c_str());
      exit_code = kExitServerError;
    } else if (!inv.globals.json) {
      Print(absl::StrCat("trial ", r.trial(), ": ",
                         r.duplicate() ? "already stored (duplicate)"
                         : r.late()    ? "stored (late)"
                                       : "stored",
                         "\n"));
    }
  }
  return exit_code;
}

int RunRenew(const Invocation& inv) {
  std::vector<int64_t> trials;
  for (size_t i = 1; i < inv.args.positional.size(); ++i) {
    absl::StatusOr<int64_t> t = ParseInteger("TRIAL", Arg(inv, i), 1, INT64_MAX);
    if (!t.ok()) return UsageError(*inv.command, t.status().message());
    trials.push_back(*t);
  }
  int code = 0;
  const double lease = LeaseOption(inv, &code);
  if (code != 0) return code;
  std::unique_ptr<client::Client> c = ConnectOrFail(inv, &code);
  if (c == nullptr) return code;
  const std::string& campaign = Arg(inv, 0);

  // Without --worker, each lease is renewed for the worker that holds it: the usual case is a
  // person who asked from one shell and renews from another (a different default worker name).
  std::map<std::string, std::vector<int64_t>> by_worker;
  if (std::optional<std::string> worker = inv.args.Get("--worker"); worker.has_value()) {
    by_worker[*worker] = trials;
  } else {
    std::map<int64_t, std::string> holder;
    for (v1::TrialState state : {v1::TRIAL_STATE_LEASED, v1::TRIAL_STATE_LAPSED}) {
      absl::StatusOr<std::vector<v1::Trial>> held = c->ListAllTrials(campaign, state);
      if (!held.ok()) return ServerError(inv, held.status());
      for (const v1::Trial& t : *held) holder[t.number()] = t.worker();
    }
    for (int64_t t : trials) {
      auto it = holder.find(t);
      by_worker[it != holder.end() ? it->second : DefaultWorker()].push_back(t);
    }
  }
  std::vector<v1::Trial> renewed;
  for (const auto& [worker, numbers] : by_worker) {
    absl::StatusOr<v1::RenewResponse> r = c->Renew(campaign, numbers, worker, lease);
    if (!r.ok()) return ServerError(inv, r.status());
    renewed.insert(renewed.end(), r->trials().begin(), r->trials().end());
  }
  if (inv.globals.json) {  // the trial records of `campaign export --json`
    absl::StatusOr<v1::CampaignView> view = c->GetCampaign(campaign);
    if (!view.ok()) return ServerError(inv, view.status());
    Print(TrialsExportJson(view->design(), renewed));
  } else {
    const absl::TimeZone zone = absl::LocalTimeZone();
    for (const v1::Trial& t : renewed) {
      Print(absl::StrCat("trial ", t.number(), ": lease until ",
                         FormatUnixMs(t.lease_deadline_unix_ms(), zone), " (worker ", t.worker(),
                         ")\n"));
    }
  }
  return kExitOk;
}

absl::StatusOr<std::string> ReadWholeFile(const std::string& path, absl::string_view what) {
  std::FILE* file = std::fopen(path.c_str(), "rb");
  if (file == nullptr) return absl::InvalidArgumentError(absl::StrCat(what, ": cannot read '", path, "'"));
  std::string text;
  char buffer[65536];
  size_t n = 0;
  while ((n = std::fread(buffer, 1, sizeof buffer, file)) > 0) text.append(buffer, n);
  std::fclose(file);
  return text;
}

int RunImport(const Invocation& inv) {
  const std::string& campaign = Arg(inv, 0);
  const std::string& path = Arg(inv, 1);
  absl::StatusOr<std::string> text = ReadWholeFile(path, "FILE");
  if (!text.ok()) return UsageError(*inv.command, text.status().message());
  // What spreadsheet programs write too: a UTF-8 byte-order mark, ';' or tab between fields (and
  // then a decimal comma in scores).
  const absl::string_view body = StripByteOrderMark(*text);
  const char separator = DetectSeparator(body);
  absl::StatusOr<std::vector<CsvRecord>> records = ParseCsv(body, separator);
  if (!records.ok()) {
    std::fprintf(stderr, "%s: %s:%s\nnothing imported\n", Prefix(*inv.command).c_str(), path.c_str(),
                 std::string(records.status().message()).c_str());
    return kExitServerError;
  }
  int code = 0;
  std::unique_ptr<client::Client> c = ConnectOrFail(inv, &code);
  if (c == nullptr) return code;
  absl::StatusOr<v1::CampaignView> view = c->GetCampaign(campaign);
  if (!view.ok()) return ServerError(inv, view.status());
  absl::StatusOr<std::vector<v1::Trial>> trials = c->ListAllTrials(campaign, v1::TRIAL_STATE_UNSPECIFIED);
  if (!trials.ok()) return ServerError(inv, trials.status());
  const ImportPlan plan = PlanImport(*records, view->design(), *trials, /*decimal_comma=*/separator != ',');
  for (const BadRow& bad : plan.bad) {
    std::fprintf(stderr, "%s:%d: %s\n", path.c_str(), bad.line, bad.reason.c_str());
  }
  const bool skip_bad = inv.args.Has("--skip-bad");
  if (!plan.bad.empty() && !skip_bad) {
    std::fprintf(stderr, "%s: %zu bad row%s; nothing imported (fix them, or pass --skip-bad to import the rest)\n",
                 Prefix(*inv.command).c_str(), plan.bad.size(), plan.bad.size() == 1 ? "" : "s");
    return kExitServerError;
  }
  const std::string worker = inv.args.Get("--worker").value_or(DefaultWorker());
  int stored = 0, late = 0;
  std::vector<std::string> refused;
  constexpr size_t kPerTell = 100;
  for (size_t begin = 0; begin < plan.to_report.size(); begin += kPerTell) {
    std::vector<v1::Report> reports;
    std::vector<int> lines;
    for (size_t i = begin; i < std::min(plan.to_report.size(), begin + kPerTell); ++i) {
      v1::Report& r = reports.emplace_back();
      r.set_trial(plan.to_report[i].trial);
      *r.mutable_outcome() = plan.to_report[i].outcome;
      lines.push_back(plan.to_report[i].line);
    }
    absl::StatusOr<v1::TellResponse> told = c->Tell(campaign, reports, worker);
    if (!told.ok()) {
      std::fprintf(stderr, "%s: %d outcomes stored before the error below; importing the file again stores the rest\n",
                   Prefix(*inv.command).c_str(), stored);
      return ServerError(inv, told.status());
    }
    for (int i = 0; i < told->results_size(); ++i) {
      const v1::ReportResult& r = told->results(i);
      if (r.code() != 0) {
        refused.push_back(absl::StrCat(path, ":", lines[static_cast<size_t>(i)], ": trial ", r.trial(), ": ",
                                       ResultCode(r), ": ", r.message()));
      } else {
        ++stored;
        if (r.late()) ++late;
      }
    }
  }
  for (const std::string& line : refused) std::fprintf(stderr, "%s\n", line.c_str());
  if (inv.globals.json) {
    Print(absl::StrCat("{\"stored\": ", stored, ", \"late\": ", late, ", \"already_stored\": ",
                       plan.already_stored.size(), ", \"without_outcome\": ", plan.without_outcome,
                       ", \"bad_rows\": ", plan.bad.size(), ", \"refused\": ", refused.size(), "}\n"));
  } else {
    Print(absl::StrCat("imported ", stored, " outcome", stored == 1 ? "" : "s", late > 0 ? absl::StrCat(" (", late, " late)") : "",
                       "; ", plan.already_stored.size(), " already stored",
                       plan.without_outcome > 0 ? absl::StrCat("; ", plan.without_outcome, " without an outcome") : "",
                       skip_bad ? absl::StrCat("; ", plan.bad.size(), " bad row", plan.bad.size() == 1 ? "" : "s", " skipped") : "",
                       "\n"));
  }
  return refused.empty() ? kExitOk : kExitServerError;
}

int RunWorkCommand(const Invocation& inv) {
  absl::StatusOr<WorkOptions> options = WorkOptionsFromArgs(inv.args, DefaultWorker());
  if (!options.ok()) return UsageError(*inv.command, options.status().message());
  const char* path = std::getenv("PATH");
  if (!FindExecutable(options->command[0], path != nullptr ? path : "/usr/bin:/bin")) {
    return UsageError(*inv.command, absl::StrCat("cannot run '", options->command[0], "': ",
                                                 absl::StrContains(options->command[0], '/')
                                                     ? "no such executable file"
                                                     : "no executable file of that name on $PATH"));
  }
  int code = 0;
  std::unique_ptr<client::Client> c = ConnectOrFail(inv, &code);
  if (c == nullptr) return code;
  return RunWork(*c, *options);
}

// ---- The command table ----

// What `ogive COMMAND --help` says besides the usage line and the options.
constexpr char kCampaignCreateHelp[] =
    R"(Creates a campaign from the CampaignDesign in FILE: protobuf text format, or JSON (the proto3
JSON mapping) when FILE ends in .json. Prints the campaign's name and population size.
Errors in the file are shown with their line and column.
)";

constexpr char kCampaignListHelp[] = R"(Lists every campaign on the server in name order.
)";

constexpr char kCampaignShowHelp[] =
    R"(Shows the campaign's objective, phase, generation, trial and outcome counts, the best trial
with its candidate, and the search distribution in the parameters' units: mean and spread
of each real and integer parameter, P(on) of each flag, the probabilities of each
categorical parameter's options; the step size and axis ratio; reports in the last hour
and the workers seen in it. --json prints the CampaignView.
)";

constexpr char kCampaignWatchHelp[] =
    R"(Follows the campaign live: on a terminal the screen is redrawn with the summary (as in
'ogive campaign show') and a progress bar toward the trial budget each time something
changes; otherwise one line per change (time, phase, generation, trials by state, best
outcome, budget used). --json prints each CampaignView as one line of JSON. Stops when the
campaign is done, or on Ctrl-C.
)";

constexpr char kCampaignPauseHelp[] =
    R"(Pauses the campaign: asks are refused until it is resumed; leased trials may still report.
)";

constexpr char kCampaignResumeHelp[] = R"(Resumes a paused campaign.
)";

constexpr char kCampaignFinishHelp[] =
    R"(Finishes the campaign: it becomes done (reason stopped) and hands out no more
candidates. This cannot be undone.
)";

constexpr char kCampaignTrialsHelp[] =
    R"(Lists the campaign's trials in number order: state, generation, worker, outcome, who
reported it (the label of the token used; '-' without tokens), whether it came late,
what the search made of it (pending, consumed, too_stale), and the candidate.
--csv and --json print the records of 'ogive campaign export' (one layout: 'ogive import'
reads them back, and importing them into the same campaign changes nothing).
)";

constexpr char kAskHelp[] =
    R"(Leases N trials of campaign NAME and prints each: its number, its lease deadline and its
candidate (name = value unit). Report each with 'ogive tell' before the lease runs out,
or extend it with 'ogive renew'. --card prints a card per trial for the bench instead: the
trial number in large digits, each parameter with its unit and description, and how to
report back; each card ends with a form feed, so printing starts each on a new page.
)";

constexpr char kTellHelp[] =
    R"(Reports the outcome of trial TRIAL of campaign NAME. Give exactly one of:
  --score X        a measured number (finite), ordered by the campaign's direction
  --grade LABEL    a label of the campaign's grade scale (any case; a typo is refused with
                   the closest label suggested)
  --infeasible     evaluated, but it broke a constraint (ranks below every score)
  --void           nothing was learned (the run never happened)
Prints 'stored', 'stored (late)' (the lease had lapsed) or 'already stored (duplicate)'.
)";

constexpr char kImportHelp[] =
    R"(Reports outcomes measured in a batch, read from FILE (CSV, RFC 4180). Each row holds a
trial number, an outcome and optionally a note: with a header row naming the columns
'trial', 'outcome' and 'note' (any order), or without one in that order. An outcome is a
number (a score), a label of the campaign's grade scale (any case), 'infeasible' or 'void'.
Every row is checked first; each bad row is listed as FILE:LINE: reason, and then nothing
is imported unless --skip-bad is given. Rows whose outcome is already stored are counted
and left alone, so importing the same file again changes nothing.
)";

constexpr char kRenewHelp[] =
    R"(Extends the leases of the given trials of campaign NAME. Without --worker each lease is
renewed for the worker that holds it. A lapsed trial that has not reported is leased
again.
)";

constexpr char kWorkHelp[] =
    R"(Runs PROGRAM (directly, not through a shell) for one trial after another, K at a time.
Each run sees the candidate in its environment:
  OGIVE_<NAME>=value     one per parameter; NAME upper-cased, '-' and '.' become '_';
                         reals exact (%.17g), integers, flags 1/0, options by name
  OGIVE_CAMPAIGN, OGIVE_TRIAL, OGIVE_CANDIDATE_FILE (a JSON object name -> value)
Standard input is /dev/null; standard output is copied through, and its last non-empty
line is the outcome: a number is a score; a label of the campaign's grade scale (any case) is
a grade; the word 'infeasible' is infeasible. Anything else, a non-zero exit status or
death by a signal reports void, with a note saying why and the last lines of its standard
error. The lease is renewed while
PROGRAM runs.

A failed run (non-zero exit, a signal, or longer than --trial-timeout: stopped with SIGTERM,
then SIGKILL) delays the next trial, 0.5 s doubling up to 60 s; after
--max-consecutive-failures of them in a row (10) it stops with exit 1.

Stops when the campaign is done (exit 0), after N trials started (exit 0), on a server
error (exit 1); waits while the campaign is paused, its trial budget is taken by outstanding
trials, the server restarts or the token's rate limit is reached. On SIGTERM or SIGINT it sends SIGTERM to
the running programs, reports their trials void and exits with 128 + the signal (143 for
SIGTERM). One line per trial goes to standard error: 'trial 12: score 3.25 (41.2 s)'.
)";

std::vector<Command> MakeCommands() {
  std::vector<Command> commands;
  commands.push_back({.words = {"campaign", "create"},
                      .synopsis = "FILE",
                      .summary = "create a campaign from a design file",
                      .details = kCampaignCreateHelp,
                      .min_positional = 1,
                      .max_positional = 1,
                      .run = RunCampaignCreate});
  commands.push_back({.words = {"campaign", "list"},
                      .synopsis = "",
                      .summary = "every campaign: phase, generation, trials by state, best outcome",
                      .details = kCampaignListHelp,
                      .run = RunCampaignList});
  commands.push_back({.words = {"campaign", "show"},
                      .synopsis = "NAME",
                      .summary = "one campaign: status, best trial, search distribution",
                      .details = kCampaignShowHelp,
                      .min_positional = 1,
                      .max_positional = 1,
                      .run = RunCampaignShow});
  commands.push_back({.words = {"campaign", "watch"},
                      .synopsis = "NAME",
                      .summary = "follow a campaign live (redraws on a terminal, a line per change otherwise)",
                      .details = kCampaignWatchHelp,
                      .min_positional = 1,
                      .max_positional = 1,
                      .run = RunCampaignWatch});
  commands.push_back({.words = {"campaign", "pause"},
                      .synopsis = "NAME",
                      .summary = "stop handing out candidates (reports are still taken)",
                      .details = kCampaignPauseHelp,
                      .min_positional = 1,
                      .max_positional = 1,
                      .run = RunCampaignPause});
  commands.push_back({.words = {"campaign", "resume"},
                      .synopsis = "NAME",
                      .summary = "hand out candidates again",
                      .details = kCampaignResumeHelp,
                      .min_positional = 1,
                      .max_positional = 1,
                      .run = RunCampaignResume});
  commands.push_back({.words = {"campaign", "finish"},
                      .synopsis = "NAME",
                      .summary = "end the campaign for good (done, reason stopped)",
                      .details = kCampaignFinishHelp,
                      .min_positional = 1,
                      .max_positional = 1,
                      .run = RunCampaignFinish});
  commands.push_back({.words = {"campaign", "trials"},
                      .synopsis = "NAME [--state STATE] [--csv]",
                      .summary = "a campaign's trials as a table, CSV or JSON",
                      .details = kCampaignTrialsHelp,
                      .options = {{"--state", "", "STATE",
                                   "only trials in this state: leased, reported, lapsed or voided"},
                                  {"--csv", "", "", "print CSV instead of a table"}},
                      .min_positional = 1,
                      .max_positional = 1,
                      .run = RunCampaignTrials});
  for (Command& c : ReportCommands()) commands.push_back(std::move(c));
  commands.push_back(
      {.words = {"ask"},
       .synopsis = "NAME [-n N] [--worker ID] [--lease DURATION]",
       .summary = "lease candidates to evaluate",
       .details = kAskHelp,
       .options = {{"-n", "", "N", "how many trials (default 1)"},
                   {"--worker", "", "ID",
                    "who evaluates them, shown in trial lists (default HOST:PID)"},
                   {"--lease", "", "DURATION", "lease length (default: the campaign's)"},
                   {"--card", "", "", "print a card per trial for the bench (large trial number, units, "
                                      "descriptions, how to report)"}},
       .min_positional = 1,
       .max_positional = 1,
       .run = RunAsk});
  commands.push_back(
      {.words = {"tell"},
       .synopsis = "NAME TRIAL (--score X | --grade LABEL | --infeasible | --void) [--note TEXT]",
       .summary = "report a trial's outcome",
       .details = kTellHelp,
       .options = {{"--score", "", "X", "a score"},
                   {"--grade", "", "LABEL", "a grade"},
                   {"--infeasible", "", "", "infeasible"},
                   {"--void", "", "", "void"},
                   {"--note", "", "TEXT", "free text stored with the outcome"},
                   {"--worker", "", "ID", "who reports, for the server's log (default HOST:PID)"}},
       .min_positional = 2,
       .max_positional = 2,
       .run = RunTell});
  commands.push_back({.words = {"import"},
                      .synopsis = "NAME FILE.csv [--skip-bad]",
                      .summary = "report a batch of measured outcomes from a CSV file",
                      .details = kImportHelp,
                      .options = {{"--skip-bad", "", "", "import the good rows even if some are bad"},
                                  {"--worker", "", "ID", "who reports, for the server's log (default HOST:PID)"}},
                      .min_positional = 2,
                      .max_positional = 2,
                      .run = RunImport});
  commands.push_back(
      {.words = {"renew"},
       .synopsis = "NAME TRIAL... [--lease DURATION] [--worker ID]",
       .summary = "extend leases",
       .details = kRenewHelp,
       .options = {{"--lease", "", "DURATION", "new lease length from now (default: the campaign's)"},
                   {"--worker", "", "ID", "the worker that holds the leases"}},
       .min_positional = 2,
       .max_positional = SIZE_MAX,
       .run = RunRenew});
  commands.push_back(
      {.words = {"work"},
       .synopsis = "NAME [--max-trials N] [--parallel K] [--lease DURATION] [--worker ID]\n"
                   "                  -- PROGRAM [ARGS...]",
       .summary = "the worker loop: ask, run PROGRAM, tell, repeat",
       .details = kWorkHelp,
       .options = {{"--max-trials", "", "N", "stop after starting N trials (default: no limit)"},
                   {"--parallel", "", "K", "run K trials at once (default 1)"},
                   {"--lease", "", "DURATION",
                    "lease length, renewed every third of it (default: the campaign's)"},
                   {"--worker", "", "ID", "worker name shown in trial lists (default HOST:PID)"},
                   {"--max-consecutive-failures", "", "N",
                    "stop (status 1) after N failed runs in a row; 0 = never (default 10)"},
                   {"--trial-timeout", "", "DURATION",
                    "stop a program running longer and report its trial void (default: none)"}},
       .min_positional = 1,
       .max_positional = 1,
       .takes_program = true,
       .prints_data = false,
       .run = RunWorkCommand});
  return commands;
}

bool IsGlobal(absl::string_view arg) { return FindOption(arg, kGlobalOptions) != nullptr; }

std::string CommandPrefix(absl::Span<const absl::string_view> words) {
  return words.empty() ? "ogive" : absl::StrCat("ogive ", absl::StrJoin(words, " "));
}

absl::Status Usage(absl::Span<const absl::string_view> words, absl::string_view message) {
  const std::string prefix = CommandPrefix(words);
  return absl::InvalidArgumentError(
      absl::StrCat(prefix, ": ", message, "\n(see '", prefix, " --help')"));
}

std::vector<OptionSpec> AllOptions(const Command* command) {
  std::vector<OptionSpec> all(std::begin(kGlobalOptions), std::end(kGlobalOptions));
  if (command != nullptr) all.insert(all.end(), command->options.begin(), command->options.end());
  return all;
}

void AppendOptions(std::string* out, absl::Span<const OptionSpec> options) {
  for (const OptionSpec& o : options) {
    std::string left =
        absl::StrCat("  ", o.short_name.empty() ? "" : absl::StrCat(o.short_name, ", "), o.name,
                     o.value_name.empty() ? "" : " ", o.value_name);
    if (left.size() < 24)
      left.resize(24, ' ');
    else
      left += "  ";
    absl::StrAppend(out, left, o.help, "\n");
  }
}

}  // namespace

const std::vector<Command>& Commands() {
  static const std::vector<Command>* const commands = new std::vector<Command>(MakeCommands());
  return *commands;
}

std::string HelpText(const Command* command, const std::vector<std::string>& group_words) {
  const std::vector<absl::string_view> group(group_words.begin(), group_words.end());
  std::string out;
  if (command != nullptr) {
    absl::StrAppend(&out, "usage: ", Prefix(*command), command->synopsis.empty() ? "" : " ",
                    command->synopsis, "\n\n", command->details);
    if (!command->options.empty()) {
      out += "\noptions:\n";
      AppendOptions(&out, command->options);
    }
    absl::StrAppend(&out, "\nglobal options: --server HOST:PORT, --timeout DURATION, ",
                    command->prints_data ? "--json, " : "",
                    "--token-file PATH, --tls-ca PEM, ...\n(see 'ogive --help')\n");
    if (command->words[0] == "ask" || command->words[0] == "work") {
      absl::StrAppend(&out, "\n", kSafetyNote);
    }
    return out;
  }
  if (!group.empty()) {
    absl::StrAppend(&out, "usage: ", CommandPrefix(group), " SUBCOMMAND ...\n\nsubcommands:\n");
  } else {
    out +=
        "usage: ogive [global options] COMMAND [options] [arguments]\n"
        "\n"
        "The command-line client of an ogive server: create and inspect campaigns, lease "
        "candidates,\n"
        "report outcomes, and run the worker loop on cluster nodes.\n"
        "\n"
        "commands:\n";
  }
  for (const Command& c : Commands()) {
    if (!group.empty() && c.words[0] != group[0]) continue;
    std::string left = absl::StrCat("  ", absl::StrJoin(c.words, " "));
    if (c.min_positional > 0) {
      absl::StrAppend(&left, " ", c.synopsis.substr(0, c.synopsis.find(" [")));
    }
    if (c.takes_program) left = "  work NAME -- PROGRAM...";
    if (absl::StartsWith(c.synopsis, "NAME TRIAL (")) left = "  tell NAME TRIAL OUTCOME";
    if (left.size() < 28)
      left.resize(28, ' ');
    else
      left += "  ";
    absl::StrAppend(&out, left, c.summary, "\n");
  }
  if (!group.empty()) {
    absl::StrAppend(&out, "\n'", CommandPrefix(group), " SUBCOMMAND --help' describes one.\n");
    return out;
  }
  out += "\nglobal options (anywhere on the line):\n";
  AppendOptions(&out, kGlobalOptions);
  out +=
      "\n'ogive COMMAND --help' describes a command; 'ogive --version' prints the version.\n"
      "\n"
      "exit status: 0 success; 1 the server refused or failed a call (its gRPC code and reason are\n"
      "printed); 2 a usage error; 'ogive work' stopped by SIGTERM exits 143 (SIGINT: 130).\n"
      "\n";
  out += kSafetyNote;
  return out;
}

absl::StatusOr<Invocation> ParseCommandLine(absl::Span<const std::string> args,
                                            const GetEnv& getenv) {
  Invocation inv;
  // Find the command's words among the arguments: global options (and their values) may come
  // before them; everything else that is not a word goes to the command's own parser.
  std::vector<absl::string_view> words;
  std::vector<std::string> rest;
  bool separator = false;
  for (size_t i = 0; i < args.size(); ++i) {
    const std::string& arg = args[i];
    if (separator || inv.command != nullptr) {
      rest.push_back(arg);
      continue;
    }
    if (arg == "--") {
      separator = true;
      rest.push_back(arg);
      continue;
    }
    if (arg.size() > 1 && arg[0] == '-') {
      if (!IsGlobal(arg)) {
        bool of_a_command = false;
        for (const Command& c : Commands()) of_a_command |= FindOption(arg, c.options) != nullptr;
        return Usage(words, absl::StrCat("unknown option '", arg.substr(0, arg.find('=')), "'",
                                         of_a_command ? " (a command's options go after it)" : ""));
      }
      rest.push_back(arg);
      const OptionSpec* spec = FindOption(arg, kGlobalOptions);
      if (!spec->value_name.empty() && arg.find('=') == std::string::npos && i + 1 < args.size()) {
        rest.push_back(args[++i]);
      }
      continue;
    }
    if (words.empty() && arg == "help") {  // `ogive help campaign create` reads as --help
      inv.help = true;
      continue;
    }
    words.push_back(arg);
    bool prefix_of_some = false;
    for (const Command& c : Commands()) {
      if (c.words.size() >= words.size() &&
          std::equal(words.begin(), words.end(), c.words.begin())) {
        prefix_of_some = true;
        if (c.words.size() == words.size()) inv.command = &c;
      }
    }
    if (!prefix_of_some) {
      words.pop_back();
      return Usage(words, absl::StrCat("unknown command '", arg, "'"));
    }
  }

  // --help wins over every other problem of the line.
  for (const std::string& arg : rest) {
    if (arg == "--") break;
    if (arg == "--help" || arg == "-h") inv.help = true;
  }
  if (inv.help) {
    if (inv.command == nullptr) {
      for (absl::string_view w : words) inv.group.emplace_back(w);
    }
    return inv;
  }
  if (inv.command == nullptr) {
    if (words.empty()) return Usage(words, "missing command");
    std::vector<std::string> subcommands;
    for (const Command& c : Commands()) {
      if (c.words[0] == words[0] && c.words.size() > 1) subcommands.emplace_back(c.words[1]);
    }
    return Usage(words, absl::StrCat("missing subcommand: ", absl::StrJoin(subcommands, ", ")));
  }

  const Command& command = *inv.command;
  const std::vector<OptionSpec> specs = AllOptions(&command);
  absl::StatusOr<ParsedArgs> parsed = ParseArgs(rest, specs);
  if (!parsed.ok()) return Usage(command.words, parsed.status().message());
  inv.args = std::move(*parsed);
  const ParsedArgs& a = inv.args;

  if (a.has_separator && !command.takes_program) {
    return Usage(command.words, "'--' is only for 'ogive work', which runs a program");
  }
  if (a.positional.size() < command.min_positional) {
    const absl::string_view required =
        command.synopsis.substr(0, command.synopsis.find_first_of("[(-"));
    return Usage(command.words,
                 absl::StrCat("missing argument: ", absl::StripAsciiWhitespace(required)));
  }
  if (a.positional.size() > command.max_positional) {
    return Usage(command.words,
                 absl::StrCat("unexpected argument '", a.positional[command.max_positional], "'",
                              command.takes_program ? " (the program goes after '--')" : ""));
  }

  // Global options.
  if (const char* server = getenv("OGIVE_SERVER"); server != nullptr && *server != '\0') {
    inv.globals.server = server;
  }
  if (std::optional<std::string> server = a.Get("--server"); server.has_value()) {
    if (server->empty() || server->find(':') == std::string::npos) {
      return Usage(
          command.words,
          absl::StrCat("--server: must be HOST:PORT, such as 127.0.0.1:7075; got '", *server, "'"));
    }
    inv.globals.server = *server;
  }
  if (std::optional<std::string> timeout = a.Get("--timeout"); timeout.has_value()) {
    absl::StatusOr<double> seconds = ParsePositiveSeconds("--timeout", *timeout);
    if (!seconds.ok()) return Usage(command.words, seconds.status().message());
    inv.globals.timeout_seconds = *seconds;
  }
  inv.globals.json = a.Has("--json");
  if (inv.globals.json && !command.prints_data) {
    return Usage(command.words,
                 absl::StrCat("--json does not apply: '", Prefix(command), "' prints a log"));
  }
  inv.globals.token_file = a.Get("--token-file").value_or("");
  // TLS: each option, else its environment variable.
  const auto option_or_env = [&](absl::string_view option, const char* env) {
    if (std::optional<std::string> value = a.Get(option); value.has_value()) return *value;
    const char* from_env = getenv(env);
    return std::string(from_env == nullptr ? "" : from_env);
  };
  client::ClientTls& tls = inv.globals.tls;
  tls.enabled = a.Has("--tls");
  tls.ca_path = option_or_env("--tls-ca", "OGIVE_TLS_CA");
  tls.cert_path = option_or_env("--tls-cert", "OGIVE_TLS_CERT");
  tls.key_path = option_or_env("--tls-key", "OGIVE_TLS_KEY");
  tls.server_name = option_or_env("--tls-server-name", "OGIVE_TLS_SERVER_NAME");
  if (tls.cert_path.empty() != tls.key_path.empty()) {
    return Usage(command.words, tls.cert_path.empty() ? "--tls-key: needs --tls-cert (or $OGIVE_TLS_CERT)"
                                                      : "--tls-cert: needs --tls-key (or $OGIVE_TLS_KEY)");
  }
  if (!tls.server_name.empty() && !tls.on()) {
    return Usage(command.words, "--tls-server-name: applies to TLS only; give --tls or --tls-ca too");
  }
  return inv;
}

absl::StatusOr<v1::Outcome> OutcomeFromOptions(const ParsedArgs& args) {
  std::vector<std::string> given;
  for (const char* option : {"--score", "--grade", "--infeasible", "--void"}) {
    if (args.Has(option)) given.emplace_back(option);
  }
  if (given.empty()) {
    return absl::InvalidArgumentError(
        "give the outcome: one of --score X, --grade LABEL, --infeasible or --void");
  }
  if (given.size() > 1) {
    return absl::InvalidArgumentError(
        absl::StrCat("give exactly one outcome, got ", absl::StrJoin(given, " and "),
                     " (one of --score X, --grade LABEL, --infeasible or --void)"));
  }
  v1::Outcome outcome;
  if (std::optional<std::string> score = args.Get("--score"); score.has_value()) {
    absl::StatusOr<double> value = ParseFiniteNumber("--score", *score);
    if (!value.ok()) return value.status();
    outcome.set_score(*value);
  } else if (std::optional<std::string> grade = args.Get("--grade"); grade.has_value()) {
    if (absl::StripAsciiWhitespace(*grade).empty()) {
      return absl::InvalidArgumentError(
          "--grade: must be a label of the campaign's grade scale, got ''");
    }
    outcome.set_grade(*grade);
  } else if (args.Has("--infeasible")) {
    outcome.mutable_infeasible();
  } else {
    outcome.mutable_void_();
  }
  outcome.set_note(args.Get("--note").value_or(""));
  return outcome;
}

absl::StatusOr<WorkOptions> WorkOptionsFromArgs(const ParsedArgs& args,
                                                const std::string& default_worker) {
  WorkOptions options;
  if (!args.positional.empty()) options.campaign = args.positional[0];
  if (!args.has_separator || args.after_separator.empty()) {
    return absl::InvalidArgumentError(
        "give the program to run after '--', e.g. ogive work NAME -- ./evaluate.sh --fast");
  }
  options.command = args.after_separator;
  if (options.command[0].empty()) {
    return absl::InvalidArgumentError("the program after '--' must not be an empty string");
  }
  if (std::optional<std::string> n = args.Get("--max-trials"); n.has_value()) {
    absl::StatusOr<int64_t> value = ParseInteger("--max-trials", *n, 1, INT64_MAX);
    if (!value.ok()) return value.status();
    options.max_trials = *value;
  }
  if (std::optional<std::string> k = args.Get("--parallel"); k.has_value()) {
    absl::StatusOr<int64_t> value = ParseInteger("--parallel", *k, 1, 1024);
    if (!value.ok()) return value.status();
    options.parallel = static_cast<int>(*value);
  }
  if (std::optional<std::string> lease = args.Get("--lease"); lease.has_value()) {
    absl::StatusOr<double> value = ParsePositiveSeconds("--lease", *lease);
    if (!value.ok()) return value.status();
    options.lease_seconds = *value;
  }
  if (std::optional<std::string> n = args.Get("--max-consecutive-failures"); n.has_value()) {
    absl::StatusOr<int64_t> value = ParseInteger("--max-consecutive-failures", *n, 0, 1000000);
    if (!value.ok()) return value.status();
    options.max_consecutive_failures = static_cast<int>(*value);
  }
  if (std::optional<std::string> timeout = args.Get("--trial-timeout"); timeout.has_value()) {
    absl::StatusOr<double> value = ParsePositiveSeconds("--trial-timeout", *timeout);
    if (!value.ok()) return value.status();
    options.trial_timeout = absl::Seconds(*value);
  }
  options.worker = args.Get("--worker").value_or(default_worker);
  if (options.worker.empty()) {
    return absl::InvalidArgumentError("--worker: must not be empty");
  }
  return options;
}

std::string DefaultWorker() {
  char host[256] = {0};
  if (gethostname(host, sizeof host - 1) != 0 || host[0] == '\0')
    std::snprintf(host, sizeof host, "localhost");
  return absl::StrCat(host, ":", getpid());
}

absl::StatusOr<std::unique_ptr<client::Client>> ClientFor(const Invocation& inv) { return Connect(inv); }
int CommandUsageError(const Command& command, absl::string_view message) { return UsageError(command, message); }
int CommandServerError(const Invocation& inv, const absl::Status& status) { return ServerError(inv, status); }

int Main(int argc, char** argv) {
  std::vector<std::string> args(argv + 1, argv + argc);
  absl::StatusOr<Invocation> inv =
      ParseCommandLine(args, [](const char* name) { return std::getenv(name); });
  if (!inv.ok()) {
    std::fprintf(stderr, "%s\n", std::string(inv.status().message()).c_str());
    return kExitUsage;
  }
  if (inv->help) {
    Print(HelpText(inv->command, inv->group));
    return kExitOk;
  }
  return inv->command->run(*inv);
}

}  // namespace ogive::cli
