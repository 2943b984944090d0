// The crash loop: worker threads ask and tell against a real ogived while a supervisor SIGKILLs it
// at random moments and restarts it on the same file and port.
//
//   ogive-crash-loop --ogived PATH [--cycles 20] [--workers 24] [--seed 1] [--dimension 8]
//                    [--time-limit-seconds 170] [--min-up-ms 100] [--max-up-ms 900] [--keep]
//
// Each worker has its own client and connection. It asks for one or two trials, "evaluates" them
// (the sphere of tests/support/bbob.h, minus its optimum, after a short seeded pause), and tells
// them, two at once in reverse order now and then; it abandons a few trials without telling
// (their leases lapse) and tells a few acknowledged ones again (they must come back as
// duplicates). It retries a tell until it is acknowledged, and records every acknowledged
// (trial, score) in a journal. The client library retries UNAVAILABLE during restarts, an Ask with
// the same request id.
//
// Now and then a restarted server is killed again a few milliseconds into its start (while SQLite
// recovers the log and the campaign loads). After every kill, with the server down, the file is read
// directly (tests/support/db_inspector.h) and must pass PRAGMA integrity_check and the checks of
// durability_checks.h against the journal. After every restart, the server's answers must hold
// everything the file held and every acknowledged outcome. After the last cycle the server runs on without kills until the campaign's
// best score reaches the target; then, with the workers stopped and every lease run out, the
// server's view must equal the file trial by trial, a SIGTERM must stop it with status 0 at once,
// and the checks pass once more.
//
// Bounded in time: a watchdog kills ogived and exits with status 3 after --time-limit-seconds.
// Exit status 0 when every check passed, 1 otherwise, 2 for bad flags.
#include <signal.h>
#include <stdlib.h>
#include <sys/wait.h>
#include <unistd.h>

#include <atomic>
#include <cmath>
#include <cstdint>
#include <cstdio>
#include <filesystem>
#include <map>
#include <memory>
#include <random>
#include <string>
#include <thread>
#include <utility>
#include <vector>

#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "absl/synchronization/mutex.h"
#include "absl/synchronization/notification.h"
#include "absl/time/clock.h"
#include "absl/time/time.h"
#include "client/ogive_client.h"
#include "tests/fault/durability_checks.h"
#include "tests/support/bbob.h"
#include "tests/support/db_inspector.h"
#include "tests/support/ogived_process.h"

namespace ogive::testing {
namespace {

constexpr char kCampaign[] = "crash-sphere";
// The target the campaign must reach once the kills are over: score = f(x) - f_opt of the sphere, so
// 0 at the optimum. The design has no target (the campaign would be done and idle for the remaining
// cycles); it restarts with a doubled population when it converges, so a long run keeps working.
constexpr double kTarget = 1e-10;

struct Flags {
  std::string ogived;
  int cycles = 20;
  int workers = 24;
  uint64_t seed = 1;
  int dimension = 8;
  double time_limit_seconds = 170;
  int min_up_ms = 100;
  int max_up_ms = 900;
  bool keep = false;
};

[[noreturn]] void Usage(const std::string& problem) {
  std::fprintf(stderr,
               "ogive-crash-loop: %s\nusage: ogive-crash-loop --ogived PATH [--cycles N] "
               "[--workers N] [--seed N] [--dimension N] [--time-limit-seconds S] "
               "[--min-up-ms N] [--max-up-ms N] [--keep]\n",
               problem.c_str());
  std::exit(2);
}

Flags ParseFlags(int argc, char** argv) {
  Flags flags;
  for (int i = 1; i < argc; ++i) {
    const std::string name = argv[i];
    if (name == "--keep") {
      flags.keep = true;
      continue;
    }
    if (i + 1 >= argc) Usage(name + " needs a value");
    const std::string value = argv[++i];
    auto integer = [&](int& out, int low) {
      if (!absl::SimpleAtoi(value, &out) || out < low) {
        Usage(absl::StrCat(name, ": must be an integer >= ", low, ", got '", value, "'"));
      }
    };
    if (name == "--ogived") {
      flags.ogived = value;
    } else if (name == "--cycles") {
      integer(flags.cycles, 1);
    } else if (name == "--workers") {
      integer(flags.workers, 1);
    } else if (name == "--dimension") {
      integer(flags.dimension, 1);
    } else if (name == "--min-up-ms") {
      integer(flags.min_up_ms, 0);
    } else if (name == "--max-up-ms") {
      integer(flags.max_up_ms, 1);
    } else if (name == "--seed") {
      if (!absl::SimpleAtoi(value, &flags.seed)) Usage("--seed: must be an unsigned integer");
    } else if (name == "--time-limit-seconds") {
      if (!absl::SimpleAtod(value, &flags.time_limit_seconds) || !(flags.time_limit_seconds > 0)) {
        Usage("--time-limit-seconds: must be a positive number");
      }
    } else {
      Usage("unknown flag " + name);
    }
  }
  if (flags.ogived.empty()) Usage("--ogived is required");
  if (flags.max_up_ms < flags.min_up_ms) Usage("--max-up-ms must be >= --min-up-ms");
  return flags;
}

// Findings of every check, from every thread.
class Findings {
 public:
  void Add(const std::string& where, const std::vector<std::string>& found) {
    absl::MutexLock lock(&mu_);
    for (const std::string& f : found) lines_.push_back(absl::StrCat(where, ": ", f));
  }
  void Add(const std::string& where, const std::string& found) { Add(where, std::vector{found}); }
  bool empty() const {
    absl::MutexLock lock(&mu_);
    return lines_.empty();
  }
  void Print() const {
    absl::MutexLock lock(&mu_);
    for (const std::string& line : lines_) std::fprintf(stderr, "FAIL %s\n", line.c_str());
  }

 private:
  mutable absl::Mutex mu_;
  std::vector<std::string> lines_ ABSL_GUARDED_BY(mu_);
};

// Counters the workers share, for the summary and the progress checks.
struct Counters {
  std::atomic<int64_t> asks{0}, tells{0}, duplicates_seen{0}, duplicate_checks{0}, abandoned{0},
      late{0}, unavailable{0}, done_refusals{0};
};

v1::CampaignDesign Design(const Flags& flags) {
  v1::CampaignDesign design;
  design.set_name(kCampaign);
  for (int i = 0; i < flags.dimension; ++i) {
    v1::Parameter* p = design.add_parameters();
    p->set_name(absl::StrCat("x", i));
    p->mutable_real()->set_low(-5);
    p->mutable_real()->set_high(5);
  }
  design.mutable_objective()->set_direction(v1::DIRECTION_LOWER_IS_BETTER);
  design.set_expected_workers(flags.workers);
  design.set_seed(flags.seed);
  design.set_restarts(true);
  design.set_lease_seconds(3);
  return design;
}

// One worker thread's loop; see the top of this file.
class Worker {
 public:
  Worker(int index, const Flags& flags, std::unique_ptr<client::Client> client, AckJournal* journal,
         Counters* counters, Findings* findings, const std::atomic<bool>* stop)
      : name_(absl::StrFormat("w%02d", index)),
        client_(std::move(client)),
        rng_(flags.seed * 7919 + static_cast<uint64_t>(index)),
        sphere_(BbobFunction::Create(1, flags.dimension, flags.seed)),
        dimension_(flags.dimension),
        journal_(journal),
        counters_(counters),
        findings_(findings),
        stop_(stop) {}

  void Run() {
    std::uniform_real_distribution<double> unit(0.0, 1.0);
    while (!stop_->load()) {
      const int count = unit(rng_) < 0.2 ? 2 : 1;
      absl::StatusOr<v1::AskResponse> asked = client_->Ask(kCampaign, count, name_);
      if (!asked.ok()) {
        if (asked.status().code() == absl::StatusCode::kUnavailable) {
          ++counters_->unavailable;
        } else if (asked.status().code() == absl::StatusCode::kFailedPrecondition) {
          ++counters_->done_refusals;  // done (the target was met) or the budget is taken
        } else {
          findings_->Add(name_, absl::StrCat("Ask: ", asked.status().ToString()));
        }
        absl::SleepFor(absl::Milliseconds(20));
        continue;
      }
      ++counters_->asks;
      std::vector<v1::Report> reports;
      for (const v1::Trial& trial : asked->trials()) {
        absl::SleepFor(absl::Microseconds(static_cast<int64_t>(unit(rng_) * 4000)));  // evaluating
        if (unit(rng_) < 0.02) {
          ++counters_->abandoned;  // the worker "dies" with this trial: its lease lapses
          continue;
        }
        v1::Report& report = reports.emplace_back();
        report.set_trial(trial.number());
        report.mutable_outcome()->set_score(Score(trial.candidate()));
      }
      if (reports.size() == 2 && unit(rng_) < 0.5) std::swap(reports[0], reports[1]);
      if (reports.size() == 2 && unit(rng_) < 0.5) {
        TellUntilAcknowledged({reports[0]});  // one at a time, in reverse order now and then
        TellUntilAcknowledged({reports[1]});
      } else if (!reports.empty()) {
        TellUntilAcknowledged(reports);
      }
      if (!mine_.empty() && unit(rng_) < 0.02) TellAgain();
    }
  }

 private:
  double Score(const v1::Candidate& candidate) {
    Eigen::VectorXd x(dimension_);
    for (int i = 0; i < dimension_; ++i) x[i] = candidate.values().at(absl::StrCat("x", i)).real();
    return sphere_(x) - sphere_.f_opt();
  }

  // Tells `reports` until acknowledged (or the loop stops); journals what was acknowledged.
  void TellUntilAcknowledged(const std::vector<v1::Report>& reports) {
    while (!stop_->load()) {
      absl::StatusOr<v1::TellResponse> told = client_->Tell(kCampaign, reports, name_);
      if (!told.ok()) {
        if (told.status().code() == absl::StatusCode::kUnavailable) {
          ++counters_->unavailable;
          absl::SleepFor(absl::Milliseconds(20));
          continue;
        }
        findings_->Add(name_, absl::StrCat("Tell: ", told.status().ToString()));
        return;
      }
      if (told->results_size() != static_cast<int>(reports.size())) {
        findings_->Add(name_, absl::StrCat("Tell: ", told->results_size(), " results for ",
                                           reports.size(), " reports"));
        return;
      }
      for (int i = 0; i < told->results_size(); ++i) {
        const v1::ReportResult& result = told->results(i);
        const v1::Report& report = reports[static_cast<size_t>(i)];
        if (result.code() != 0 || result.trial() != report.trial()) {
          findings_->Add(name_, absl::StrCat("Tell of trial ", report.trial(), ": code ",
                                             result.code(), " ", result.message()));
          continue;
        }
        // A duplicate here means an earlier attempt was applied but its reply was lost.
        if (result.duplicate()) ++counters_->duplicates_seen;
        if (result.late()) ++counters_->late;
        ++counters_->tells;
        if (!journal_->Add(report.trial(), report.outcome().score())) {
          findings_->Add(name_, absl::StrCat("trial ", report.trial(),
                                             " acknowledged twice with different scores"));
        }
        mine_.push_back({report.trial(), report.outcome().score()});
      }
      return;
    }
  }

  // Tells an acknowledged trial again: it must be a duplicate, applied once.
  void TellAgain() {
    const auto& [trial, score] = mine_[std::uniform_int_distribution<size_t>(0, mine_.size() - 1)(rng_)];
    v1::Report report;
    report.set_trial(trial);
    report.mutable_outcome()->set_score(score);
    while (!stop_->load()) {
      absl::StatusOr<v1::TellResponse> told = client_->Tell(kCampaign, {report}, name_);
      if (!told.ok() && told.status().code() == absl::StatusCode::kUnavailable) {
        absl::SleepFor(absl::Milliseconds(20));
        continue;
      }
      ++counters_->duplicate_checks;
      if (!told.ok() || told->results_size() != 1 || told->results(0).code() != 0 ||
          !told->results(0).duplicate()) {
        findings_->Add(name_, absl::StrCat("telling acknowledged trial ", trial, " again: ",
                                           told.ok() ? told->DebugString() : told.status().ToString(),
                                           " (expected a duplicate)"));
      }
      return;
    }
  }

  const std::string name_;
  std::unique_ptr<client::Client> client_;
  std::mt19937_64 rng_;
  const BbobFunction sphere_;
  const int dimension_;
  AckJournal* const journal_;
  Counters* const counters_;
  Findings* const findings_;
  const std::atomic<bool>* const stop_;
  std::vector<std::pair<int64_t, double>> mine_;  // this worker's acknowledged tells
};

// Reads the campaign from the file and checks it against the journal; returns what it read.
StoredCampaignState CheckFile(const std::string& db, const std::string& where,
                           const std::map<int64_t, double>& journal, Findings& findings) {
  absl::StatusOr<DbInspector> inspector = DbInspector::Open(db);
  if (!inspector.ok()) {
    findings.Add(where, inspector.status().ToString());
    return {};
  }
  absl::StatusOr<std::string> integrity = inspector->IntegrityCheck();
  if (!integrity.ok() || *integrity != "ok") {
    findings.Add(where, absl::StrCat("integrity_check: ",
                                     integrity.ok() ? *integrity : integrity.status().ToString()));
  }
  absl::StatusOr<StoredCampaignState> stored = inspector->ReadCampaign(kCampaign);
  if (!stored.ok()) {
    findings.Add(where, stored.status().ToString());
    return {};
  }
  findings.Add(where, CheckStoredCampaign(*stored, journal));
  return *std::move(stored);
}

// The server's view and every trial, read through one client.
bool ReadServed(client::Client& reader, v1::CampaignView& view, std::vector<v1::Trial>& trials,
                const std::string& where, Findings& findings) {
  absl::StatusOr<v1::CampaignView> got = reader.GetCampaign(kCampaign);
  absl::StatusOr<std::vector<v1::Trial>> listed = reader.ListAllTrials(kCampaign);
  if (!got.ok() || !listed.ok()) {
    findings.Add(where, absl::StrCat("reads: ", got.status().ToString(), " ", listed.status().ToString()));
    return false;
  }
  view = *std::move(got);
  trials = *std::move(listed);
  return true;
}

int Run(const Flags& flags) {
  const absl::Time started = absl::Now();
  std::string dir = (std::getenv("TMPDIR") != nullptr ? std::string(std::getenv("TMPDIR")) : "/tmp") +
                    "/ogive-crash-loop.XXXXXX";
  if (mkdtemp(dir.data()) == nullptr) {
    std::perror("mkdtemp");
    return 1;
  }
  OgivedOptions options;
  options.binary = flags.ogived;
  options.db = dir + "/ogive.db";
  options.log_path = dir + "/ogived.log";
  options.extra_flags = {"--sweep-interval", "0.2"};
  OgivedProcess server(options);

  // The watchdog: nothing outlives the time limit.
  std::atomic<pid_t> server_pid{-1};
  absl::Notification finished;
  std::thread watchdog([&] {
    if (finished.WaitForNotificationWithTimeout(absl::Seconds(flags.time_limit_seconds))) return;
    std::fprintf(stderr, "FAIL ogive-crash-loop: the time limit of %.0f s ran out; data in %s\n",
                 flags.time_limit_seconds, dir.c_str());
    if (const pid_t pid = server_pid.load(); pid > 0) kill(pid, SIGKILL);
    std::fflush(nullptr);
    _exit(3);
  });

  Findings findings;
  AckJournal journal;
  Counters counters;
  std::atomic<bool> stop{false};
  std::mt19937_64 rng(flags.seed);

  auto start_server = [&](const std::string& where) {
    absl::Status started_ok = server.Start();
    server_pid = server.pid();
    if (!started_ok.ok()) findings.Add(where, absl::StrCat("start: ", started_ok.ToString()));
    return started_ok.ok();
  };

  std::printf("ogive-crash-loop: %d cycles, %d workers, dimension %d, seed %llu, in %s\n",
              flags.cycles, flags.workers, flags.dimension,
              static_cast<unsigned long long>(flags.seed), dir.c_str());
  if (!start_server("first start")) {
    findings.Print();
    finished.Notify();
    watchdog.join();
    return 1;
  }
  std::unique_ptr<client::Client> reader = server.NewClient();
  if (absl::StatusOr<v1::CampaignView> created = reader->CreateCampaign(Design(flags)); !created.ok()) {
    findings.Add("create", created.status().ToString());
  }

  std::vector<std::unique_ptr<Worker>> workers;
  std::vector<std::thread> threads;
  for (int i = 0; i < flags.workers; ++i) {
    workers.push_back(std::make_unique<Worker>(i, flags, server.NewClient(), &journal, &counters,
                                               &findings, &stop));
  }
  for (auto& w : workers) threads.emplace_back([&w] { w->Run(); });

  std::uniform_int_distribution<int> up_ms(flags.min_up_ms, flags.max_up_ms);
  int cycles_with_progress = 0;
  int64_t last_acked = 0;
  for (int cycle = 1; cycle <= flags.cycles && findings.empty(); ++cycle) {
    const std::string where = absl::StrCat("cycle ", cycle);
    const int up = up_ms(rng);
    absl::SleepFor(absl::Milliseconds(up));
    server.Crash();
    server_pid = -1;
    // Every tell acknowledged so far was acknowledged before the kill: it must be on disk.
    const std::map<int64_t, double> acked = journal.Snapshot();
    const StoredCampaignState stored = CheckFile(options.db, where, acked, findings);
    if (static_cast<int64_t>(acked.size()) > last_acked) ++cycles_with_progress;
    last_acked = static_cast<int64_t>(acked.size());
    std::printf("cycle %2d: killed after %4d ms; on disk %5zu trials, %4zu generations, %5zu "
                "acknowledged outcomes, all checks %s\n",
                cycle, up, stored.trials.size(), stored.generations.size(), acked.size(),
                findings.empty() ? "pass" : "FAIL");
    std::fflush(stdout);
    // Now and then the restarted server dies again while it opens the file and loads the campaign.
    if (std::uniform_real_distribution<double>(0, 1)(rng) < 0.2) {
      const int delay_ms = std::uniform_int_distribution<int>(0, 30)(rng);
      if (absl::Status spawned = server.Spawn(); !spawned.ok()) {
        findings.Add(where, absl::StrCat("spawn: ", spawned.ToString()));
        break;
      }
      server_pid = server.pid();
      absl::SleepFor(absl::Milliseconds(delay_ms));
      server.Crash();
      server_pid = -1;
      CheckFile(options.db, absl::StrCat(where, ", killed while starting"), acked, findings);
      std::printf("          killed again %d ms into its start\n", delay_ms);
    }
    const absl::Time restart_began = absl::Now();
    if (!start_server(absl::StrCat(where, ", restart"))) break;
    std::printf("          restarted in %lld ms\n",
                static_cast<long long>(absl::ToInt64Milliseconds(absl::Now() - restart_began)));
    // Journal first: whatever it holds was acknowledged before the reads below began.
    const std::map<int64_t, double> acked_before_reads = journal.Snapshot();
    v1::CampaignView view;
    std::vector<v1::Trial> trials;
    if (ReadServed(*reader, view, trials, where, findings)) {
      findings.Add(absl::StrCat(where, ", after the restart"),
                   CheckServedCampaign(view, trials, stored, acked_before_reads));
    }
  }
  if (cycles_with_progress < (flags.cycles + 1) / 2) {
    findings.Add("progress", absl::StrCat("only ", cycles_with_progress, " of ", flags.cycles,
                                          " cycles saw new acknowledged tells"));
  }

  // No more kills: the campaign goes on to the target.
  const absl::Time cycles_ended = absl::Now();
  bool reached = false;
  double best = INFINITY;
  const absl::Time converge_deadline =
      started + absl::Seconds(flags.time_limit_seconds) - absl::Seconds(15);
  while (findings.empty() && server.running() && absl::Now() < converge_deadline) {
    absl::StatusOr<v1::CampaignView> view = reader->GetCampaign(kCampaign);
    if (view.ok()) {
      if (view->status().has_best()) best = view->status().best().outcome().score();
      if (best <= kTarget) {
        reached = true;
        break;
      }
      if (view->status().phase() != v1::CAMPAIGN_PHASE_OPEN) {
        findings.Add("convergence", absl::StrCat("the campaign stopped short of the target: ",
                                                 view->status().ShortDebugString()));
        break;
      }
    }
    absl::SleepFor(absl::Milliseconds(100));
  }
  if (!reached && findings.empty()) {
    findings.Add("convergence", absl::StrCat("the target ", kTarget, " was not met in time; best ", best));
  }
  const absl::Time converged = absl::Now();
  stop = true;
  for (std::thread& t : threads) t.join();

  // Idle now: memory equals the file; a clean stop; the file passes once more after a restart.
  // Quiet first: the sweeper would lapse leases between reading the server and reading the file.
  const absl::Time quiet_deadline = absl::Now() + absl::Seconds(15);
  while (server.running() && absl::Now() < quiet_deadline) {
    absl::StatusOr<v1::CampaignView> view = reader->GetCampaign(kCampaign);
    if (view.ok() && view->status().leased() == 0) break;
    absl::SleepFor(absl::Milliseconds(200));
  }
  if (server.running()) {
    v1::CampaignView view;
    std::vector<v1::Trial> trials;
    const StoredCampaignState stored = CheckFile(options.db, "at the end", journal.Snapshot(), findings);
    if (ReadServed(*reader, view, trials, "at the end", findings)) {
      findings.Add("at the end, served against the file", CheckServedEqualsStored(view, trials, stored));
    }
    const absl::Time term_sent = absl::Now();
    const int wstatus = server.Kill(SIGTERM);
    server_pid = -1;
    const absl::Duration stopping = absl::Now() - term_sent;
    std::printf("SIGTERM: ogived exited after %lld ms\n",
                static_cast<long long>(absl::ToInt64Milliseconds(stopping)));
    // The workers' connections are still open, idle: they must not hold up the stop.
    if (stopping > absl::Seconds(3)) {
      findings.Add("SIGTERM", absl::StrCat("ogived took ", absl::FormatDuration(stopping), " to stop"));
    }
    if (!WIFEXITED(wstatus) || WEXITSTATUS(wstatus) != 0) {
      findings.Add("SIGTERM", absl::StrCat("ogived ended with wait status ", wstatus));
    }
    const StoredCampaignState after = CheckFile(options.db, "after SIGTERM", journal.Snapshot(), findings);
    if (start_server("last restart") && ReadServed(*reader, view, trials, "last restart", findings)) {
      findings.Add("last restart, served against the file", CheckServedEqualsStored(view, trials, after));
    }
    server.Kill(SIGTERM);
    server_pid = -1;
  }
  finished.Notify();
  watchdog.join();

  std::printf("timing: %.1f s of kill cycles, %.1f s more to the target, %.1f s of final checks\n",
              absl::ToDoubleSeconds(cycles_ended - started),
              absl::ToDoubleSeconds(converged - cycles_ended),
              absl::ToDoubleSeconds(absl::Now() - converged));
  std::printf("summary: %d starts, %lld asks, %lld tells acknowledged (%lld trials), %lld came back "
              "as duplicates of a lost reply, %lld duplicate tells checked, %lld late, %lld "
              "abandoned, %lld unavailable after retries, best %.3g, target %s\n",
              server.starts(), static_cast<long long>(counters.asks.load()),
              static_cast<long long>(counters.tells.load()), static_cast<long long>(journal.size()),
              static_cast<long long>(counters.duplicates_seen.load()),
              static_cast<long long>(counters.duplicate_checks.load()),
              static_cast<long long>(counters.late.load()),
              static_cast<long long>(counters.abandoned.load()),
              static_cast<long long>(counters.unavailable.load()), best, reached ? "met" : "NOT met");
  if (!findings.empty()) {
    findings.Print();
    std::fprintf(stderr, "ogived's log ends:\n%s\ndata kept in %s\n", server.LogTail().c_str(),
                 dir.c_str());
    return 1;
  }
  if (!flags.keep) {
    std::error_code error;
    std::filesystem::remove_all(dir, error);
  }
  std::printf("PASS\n");
  return 0;
}

}  // namespace
}  // namespace ogive::testing

int main(int argc, char** argv) {
  signal(SIGPIPE, SIG_IGN);
  return ogive::testing::Run(ogive::testing::ParseFlags(argc, argv));
}
