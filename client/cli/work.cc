#include "client/cli/work.h"

#include <fcntl.h>
#include <poll.h>
#include <signal.h>
#include <spawn.h>
#include <sys/stat.h>
#include <sys/types.h>
#include <sys/wait.h>
#include <unistd.h>

#include <algorithm>
#include <cerrno>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <memory>
#include <optional>
#include <set>

#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "absl/strings/str_join.h"
#include "absl/strings/str_split.h"
#include "absl/time/clock.h"
#include "client/cli/candidate_env.h"
#include "client/cli/format.h"
#include "client/cli/outcome_line.h"
#include "client/error_reason.h"
#include "server/base/reason.h"

extern char** environ;

namespace ogive::cli {
namespace {

// ---- Signals ----
//
// The handler only writes the signal number into a pipe (the self-pipe trick); the loop polls the
// pipe with the children's output and does all the work.

int signal_pipe[2] = {-1, -1};

void OnSignal(int signal_number) {
  const int saved_errno = errno;
  const unsigned char byte = static_cast<unsigned char>(signal_number);
  [[maybe_unused]] const ssize_t ignored = write(signal_pipe[1], &byte, 1);
  errno = saved_errno;
}

bool InstallSignalHandlers(std::string* error) {
  if (pipe2(signal_pipe, O_CLOEXEC | O_NONBLOCK) != 0) {
    *error = absl::StrCat("cannot create a pipe: ", std::strerror(errno));
    return false;
  }
  struct sigaction action;
  std::memset(&action, 0, sizeof action);
  action.sa_handler = OnSignal;
  sigemptyset(&action.sa_mask);
  action.sa_flags = SA_RESTART;
  sigaction(SIGTERM, &action, nullptr);
  sigaction(SIGINT, &action, nullptr);
  action.sa_flags = SA_RESTART | SA_NOCLDSTOP;
  sigaction(SIGCHLD, &action, nullptr);
  signal(SIGPIPE, SIG_IGN);  // a closed stdout must not kill the worker; writes fail instead
  return true;
}

// Reads what the handler wrote; returns SIGTERM or SIGINT if one of them arrived, else 0.
int TakeStopSignal() {
  int stop = 0;
  unsigned char bytes[64];
  ssize_t n;
  while ((n = read(signal_pipe[0], bytes, sizeof bytes)) > 0) {
    for (ssize_t i = 0; i < n; ++i) {
      if (bytes[i] == SIGTERM || bytes[i] == SIGINT) stop = stop == 0 ? bytes[i] : stop;
    }
  }
  return stop;
}

std::string SignalName(int signal_number) {
  const char* abbreviation = sigabbrev_np(signal_number);
  return abbreviation != nullptr ? absl::StrCat("SIG", abbreviation)
                                 : absl::StrCat("signal ", signal_number);
}

// ---- One running evaluation ----

struct Running {
  v1::Trial trial;
  pid_t pid = -1;
  int out_fd = -1;  // read end of the program's stdout; -1 once closed
  int err_fd = -1;  // read end of the program's stderr; -1 once closed
  std::string err_tail;  // the last kErrorTailBytes of its stderr, for the note of a failed run
  LastLine last_line;
  std::string echo;  // output not yet copied to our stdout (an unfinished line)
  absl::Time started;
  std::string candidate_file;  // removed when the trial ends
  std::unique_ptr<client::LeaseRenewer> renewer;
  bool exited = false;
  int wait_status = 0;
  absl::Time ended = absl::InfiniteFuture();  // when the program exited
  absl::Time stopped_at = absl::InfiniteFuture();  // when --trial-timeout sent SIGTERM

  // How long the program ran (so far).
  absl::Duration RunTime() const { return std::min(ended, absl::Now()) - started; }
};

// Copies complete lines of the program's output to our stdout, so that parallel programs interleave
// by lines, not characters.
void Echo(Running& r, absl::string_view chunk, bool flush_all) {
  absl::StrAppend(&r.echo, chunk);
  const size_t end = flush_all ? r.echo.size() : r.echo.rfind('\n') + 1;  // npos + 1 == 0
  if (end == 0) return;
  std::fwrite(r.echo.data(), 1, end, stdout);
  std::fflush(stdout);
  r.echo.erase(0, end);
}

// Passes each chunk `fd` has now to `take` (the fd is non-blocking); at end of file (or an error that
// ends the stream alike) closes it and sets it to -1.
template <typename Take>
void ReadAvailable(int& fd, Take take) {
  char buffer[1 << 14];
  while (fd >= 0) {
    const ssize_t n = read(fd, buffer, sizeof buffer);
    if (n > 0) {
      take(absl::string_view(buffer, static_cast<size_t>(n)));
    } else if (n < 0 && errno == EINTR) {
      continue;
    } else if (n < 0 && (errno == EAGAIN || errno == EWOULDBLOCK)) {
      return;
    } else {
      close(fd);
      fd = -1;
    }
  }
}

// The program's standard output: its last line kept, copied to ours line by line.
void ReadOutput(Running& r) {
  ReadAvailable(r.out_fd, [&r](absl::string_view chunk) {
    r.last_line.Feed(chunk);
    Echo(r, chunk, false);
  });
  if (r.out_fd < 0) Echo(r, "", true);
}

// Bytes of the program's standard error kept for the note of a failed run.
constexpr size_t kErrorTailBytes = 2048;

// The program's standard error: copied to ours, its tail kept.
void ReadErrors(Running& r) {
  ReadAvailable(r.err_fd, [&r](absl::string_view chunk) {
    std::fwrite(chunk.data(), 1, chunk.size(), stderr);
    std::fflush(stderr);
    r.err_tail.append(chunk.data(), chunk.size());
    if (r.err_tail.size() > kErrorTailBytes) r.err_tail.erase(0, r.err_tail.size() - kErrorTailBytes);
  });
}

void CloseOutput(Running& r) {
  if (r.out_fd >= 0) {
    close(r.out_fd);
    r.out_fd = -1;
  }
  if (r.err_fd >= 0) {
    close(r.err_fd);
    r.err_fd = -1;
  }
  Echo(r, "", true);
}

// The last lines of what the program wrote to standard error (at most five, as one line separated by
// " | "), or "".
std::string ErrorTail(const Running& r) {
  std::vector<absl::string_view> lines = absl::StrSplit(r.err_tail, '\n', absl::SkipWhitespace());
  if (lines.size() > 5) lines.erase(lines.begin(), lines.end() - 5);
  return absl::StrJoin(lines, " | ");
}

std::string TempDirectory() {
  const char* dir = std::getenv("TMPDIR");
  return dir != nullptr && *dir != '\0' ? dir : "/tmp";
}

// Writes the candidate file; returns its path, or "" with `error` set.
std::string WriteCandidateFile(const std::string& contents, std::string* error) {
  std::string path = absl::StrCat(TempDirectory(), "/ogive-candidate-XXXXXX.json");
  const int fd = mkstemps(path.data(), 5);
  if (fd < 0) {
    *error = absl::StrCat("cannot create the candidate file ", path, ": ", std::strerror(errno));
    return "";
  }
  size_t written = 0;
  while (written < contents.size()) {
    const ssize_t n = write(fd, contents.data() + written, contents.size() - written);
    if (n < 0 && errno == EINTR) continue;
    if (n <= 0) {
      *error = absl::StrCat("cannot write the candidate file ", path, ": ", std::strerror(errno));
      close(fd);
      unlink(path.c_str());
      return "";
    }
    written += static_cast<size_t>(n);
  }
  close(fd);
  return path;
}

// The environment of the program: ours, with the trial's variables set (replacing any inherited
// variables of the same names).
std::vector<std::string> ChildEnvironment(
    const std::vector<std::pair<std::string, std::string>>& set) {
  std::set<std::string, std::less<>> names;
  for (const auto& [name, value] : set) names.insert(name);
  std::vector<std::string> env;
  for (char** e = environ; *e != nullptr; ++e) {
    const absl::string_view entry(*e);
    if (names.count(entry.substr(0, entry.find('='))) == 0) env.emplace_back(entry);
  }
  for (const auto& [name, value] : set) env.push_back(absl::StrCat(name, "=", value));
  return env;
}

// Starts the program for `r.trial`; on failure returns false with `error` set.
bool Spawn(const WorkOptions& options, const v1::CampaignDesign& design, Running& r,
           std::string* error) {
  r.candidate_file = WriteCandidateFile(CandidateJson(design, r.trial.candidate()), error);
  if (r.candidate_file.empty()) return false;

  std::vector<std::pair<std::string, std::string>> vars = CandidateEnv(design, r.trial.candidate());
  vars.emplace_back(kCampaignVariable, options.campaign);
  vars.emplace_back(kTrialVariable, absl::StrCat(r.trial.number()));
  vars.emplace_back(kCandidateFileVariable, r.candidate_file);
  const std::vector<std::string> env = ChildEnvironment(vars);
  std::vector<char*> envp;
  for (const std::string& e : env) envp.push_back(const_cast<char*>(e.c_str()));
  envp.push_back(nullptr);
  std::vector<char*> argv;
  for (const std::string& a : options.command) argv.push_back(const_cast<char*>(a.c_str()));
  argv.push_back(nullptr);

  int out[2];
  if (pipe2(out, O_CLOEXEC) != 0) {
    *error = absl::StrCat("cannot create a pipe: ", std::strerror(errno));
    return false;
  }
  int err[2];
  if (pipe2(err, O_CLOEXEC) != 0) {
    *error = absl::StrCat("cannot create a pipe: ", std::strerror(errno));
    close(out[0]);
    close(out[1]);
    return false;
  }
  posix_spawn_file_actions_t actions;
  posix_spawn_file_actions_init(&actions);
  posix_spawn_file_actions_addopen(&actions, STDIN_FILENO, "/dev/null", O_RDONLY, 0);
  posix_spawn_file_actions_adddup2(&actions, out[1], STDOUT_FILENO);  // dup2 clears O_CLOEXEC
  posix_spawn_file_actions_adddup2(&actions, err[1], STDERR_FILENO);
  posix_spawnattr_t attributes;
  posix_spawnattr_init(&attributes);
  // Its own process group, so that SIGTERM reaches whatever the program starts, and the terminal's
  // Ctrl-C reaches only us (we forward it as SIGTERM).
  posix_spawnattr_setpgroup(&attributes, 0);
  sigset_t none;
  sigemptyset(&none);
  posix_spawnattr_setsigmask(&attributes, &none);
  sigset_t defaults;  // dispositions we (or gRPC) changed, back to their defaults for the program
  sigemptyset(&defaults);
  for (int s : {SIGTERM, SIGINT, SIGCHLD, SIGPIPE, SIGHUP, SIGQUIT, SIGUSR1, SIGUSR2, SIGALRM}) {
    sigaddset(&defaults, s);
  }
  posix_spawnattr_setsigdefault(&attributes, &defaults);
  posix_spawnattr_setflags(&attributes,
                           POSIX_SPAWN_SETPGROUP | POSIX_SPAWN_SETSIGMASK | POSIX_SPAWN_SETSIGDEF);
  const int result = posix_spawnp(&r.pid, argv[0], &actions, &attributes, argv.data(), envp.data());
  posix_spawn_file_actions_destroy(&actions);
  posix_spawnattr_destroy(&attributes);
  close(out[1]);
  close(err[1]);
  if (result != 0) {
    close(out[0]);
    close(err[0]);
    *error = absl::StrCat("cannot run '", options.command[0], "': ", std::strerror(result));
    return false;
  }
  fcntl(out[0], F_SETFL, fcntl(out[0], F_GETFL) | O_NONBLOCK);
  fcntl(err[0], F_SETFL, fcntl(err[0], F_GETFL) | O_NONBLOCK);
  r.out_fd = out[0];
  r.err_fd = err[0];
  r.started = absl::Now();
  return true;
}

void SignalGroup(const Running& r, int signal_number) {
  if (r.exited) return;
  if (kill(-r.pid, signal_number) != 0) kill(r.pid, signal_number);
}

// Reaps `r` if it has exited; returns whether it has.
bool Reap(Running& r) {
  if (r.exited) return true;
  int status = 0;
  pid_t pid;
  while ((pid = waitpid(r.pid, &status, WNOHANG)) < 0 && errno == EINTR) {
  }
  if (pid == r.pid) {
    r.exited = true;
    r.wait_status = status;
    r.ended = absl::Now();
  } else if (pid < 0) {  // not our child any more (cannot happen); treat it as gone
    r.exited = true;
    r.wait_status = 0;
  }
  return r.exited;
}

std::string Seconds(absl::Duration d) {
  return absl::StrFormat("%.1f s", absl::ToDoubleSeconds(d));
}

std::string ErrorText(const absl::Status& status) {
  return absl::StrCat(absl::StatusCodeToString(status.code()), ": ", status.message());
}

// The outcome of a finished program.
v1::Outcome OutcomeOf(const Running& r, const v1::Objective& objective, absl::Duration trial_timeout) {
  const std::string failure = DescribeFailure(r.wait_status);
  if (failure.empty() && r.stopped_at == absl::InfiniteFuture()) {
    return ParseOutcomeLine(r.last_line.Get(), objective);
  }
  v1::Outcome outcome;
  outcome.mutable_void_();
  std::string note = r.stopped_at != absl::InfiniteFuture()
                         ? absl::StrCat("the program ran longer than --trial-timeout ",
                                        absl::FormatDuration(trial_timeout), " and was stopped")
                         : absl::StrCat("the program ", failure);
  const std::string last = r.last_line.Get();
  if (!last.empty()) absl::StrAppend(&note, "; its last line of output: ", QuoteForNote(last));
  const std::string errors = ErrorTail(r);
  if (!errors.empty()) absl::StrAppend(&note, "; its standard error ended with: ", QuoteForNote(errors, 500));
  outcome.set_note(std::move(note));
  return outcome;
}

// "trial 12: score 3.25 (41.2 s)", "trial 13: void: the program exited with status 3 (0.2 s)".
std::string TrialLogLine(const v1::Trial& trial, const v1::Outcome& outcome,
                         const std::string& elapsed) {
  std::string line = absl::StrCat("trial ", trial.number(), ": ", OutcomeText(outcome));
  if (outcome.has_void_() && !outcome.note().empty()) absl::StrAppend(&line, ": ", outcome.note());
  absl::StrAppend(&line, " (", elapsed, ")");
  return line;
}

class WorkLoop {
 public:
  WorkLoop(client::Client& client, const WorkOptions& options)
      : client_(client), options_(options) {}

  int Run();

 private:
  enum class Stop { kNone, kDone, kMaxTrials, kFatal };

  void Log(const std::string& line) { std::fprintf(stderr, "%s\n", line.c_str()); }
  void AskForTrials();
  void HandleAskRefusal(const absl::Status& status);
  void Start(const v1::Trial& trial);
  // Notes a SIGTERM or SIGINT that arrived; returns the first one so far, or 0.
  int StopSignal();
  void WaitForEvents();
  // Whether a call that failed with `status` should be tried again later: UNAVAILABLE (a server
  // restarting) for up to kUnavailablePatience. Prints the first failure.
  bool Patient(const absl::Status& status, absl::string_view what);
  void Finish(Running& r);
  // Stops programs that ran past --trial-timeout: SIGTERM first, SIGKILL after the grace period.
  void EnforceTrialTimeout();
  // Counts a failed program (or resets the count after a good one); stops the loop past the limit.
  void CountFailure(const Running& r, const v1::Outcome& outcome);
  void Tell(const std::vector<std::pair<const Running*, v1::Outcome>>& reports);
  int Shutdown(int signal_number);
  double RenewIntervalSeconds(const v1::Trial& trial) const;

  client::Client& client_;
  const WorkOptions& options_;
  v1::CampaignDesign design_;
  std::vector<std::unique_ptr<Running>> running_;
  int64_t started_ = 0;
  Stop stop_ = Stop::kNone;
  std::string stop_message_;
  int exit_code_ = 0;
  absl::Time retry_at_ = absl::InfinitePast();
  std::string waiting_message_;  // printed once per stretch of waiting
  int stop_signal_ = 0;
  absl::Time unavailable_since_ = absl::InfiniteFuture();
  int consecutive_failures_ = 0;
};

// How long the loop waits for an unreachable server (beyond the client's own retries) before it
// gives up: long enough for the server to restart.
constexpr absl::Duration kUnavailablePatience = absl::Minutes(2);

int WorkLoop::StopSignal() {
  if (const int s = TakeStopSignal(); s != 0 && stop_signal_ == 0) stop_signal_ = s;
  return stop_signal_;
}

bool WorkLoop::Patient(const absl::Status& status, absl::string_view what) {
  // The server restarts or drains (a call it cut short ends CANCELLED), or the token's request rate
  // is spent: all pass.
  if (status.code() != absl::StatusCode::kUnavailable && status.code() != absl::StatusCode::kCancelled &&
      !client::HasReason(status, reason::kRateLimited)) {
    return false;
  }
  const absl::Time now = absl::Now();
  if (unavailable_since_ == absl::InfiniteFuture()) {
    unavailable_since_ = now;
    Log(absl::StrCat("ogive work: ", what, ": ", ErrorText(status), "; trying again for up to ",
                     absl::FormatDuration(kUnavailablePatience)));
  }
  return now - unavailable_since_ < kUnavailablePatience;
}

int WorkLoop::Run() {
  absl::StatusOr<v1::CampaignView> view = client_.GetCampaign(options_.campaign);
  // A farm that starts at once may find the server restarting or its shared token's rate spent.
  while (!view.ok() && Patient(view.status(), "reading the campaign")) {
    absl::SleepFor(std::min(options_.retry_interval, absl::Seconds(1)));
    view = client_.GetCampaign(options_.campaign);
  }
  unavailable_since_ = absl::InfiniteFuture();
  if (!view.ok()) {
    Log(absl::StrCat("ogive work: ", ErrorText(view.status())));
    return 1;
  }
  design_ = view->design();
  if (absl::Status s = CheckEnvNames(design_); !s.ok()) {
    Log(absl::StrCat("ogive work: campaign '", options_.campaign, "': ", s.message()));
    return 2;
  }
  std::string error;
  if (!InstallSignalHandlers(&error)) {
    Log(absl::StrCat("ogive work: ", error));
    return 1;
  }
  Log(absl::StrCat("ogive work: campaign ", options_.campaign, ", worker ", options_.worker, ", ",
                   options_.parallel, options_.parallel == 1 ? " slot" : " slots",
                   options_.max_trials > 0
                       ? absl::StrCat(", at most ", options_.max_trials,
                                      options_.max_trials == 1 ? " trial" : " trials")
                       : std::string(),
                   ": ", absl::StrJoin(options_.command, " ")));

  while (true) {
    if (StopSignal() == 0 && stop_ == Stop::kNone) AskForTrials();
    if (StopSignal() != 0) return Shutdown(stop_signal_);
    if (running_.empty() && stop_ != Stop::kNone) break;
    WaitForEvents();
    if (StopSignal() != 0) return Shutdown(stop_signal_);
    EnforceTrialTimeout();
    for (auto& r : running_) {
      if (r->out_fd >= 0) ReadOutput(*r);
      if (r->err_fd >= 0) ReadErrors(*r);
      if (Reap(*r)) {
        // The program is gone; a process it left behind may still hold the pipes open, so take what
        // is there and stop reading.
        ReadOutput(*r);
        ReadErrors(*r);
        CloseOutput(*r);
      }
    }
    for (size_t i = 0; i < running_.size();) {
      if (running_[i]->exited && running_[i]->out_fd < 0) {
        Finish(*running_[i]);
        running_.erase(running_.begin() + static_cast<std::ptrdiff_t>(i));
      } else {
        ++i;
      }
    }
  }
  if (!stop_message_.empty()) Log(absl::StrCat("ogive work: ", stop_message_));
  return exit_code_;
}

void WorkLoop::AskForTrials() {
  if (absl::Now() < retry_at_) return;
  if (options_.max_trials > 0 && started_ >= options_.max_trials) {
    stop_ = Stop::kMaxTrials;
    stop_message_ = absl::StrCat("started ", started_, started_ == 1 ? " trial" : " trials",
                                 " (--max-trials ", options_.max_trials, "); stopping");
    return;
  }
  int64_t count = options_.parallel - static_cast<int64_t>(running_.size());
  if (options_.max_trials > 0) count = std::min(count, options_.max_trials - started_);
  if (count <= 0) return;
  absl::StatusOr<v1::AskResponse> asked =
      client_.Ask(options_.campaign, static_cast<int>(count), options_.worker, options_.lease_seconds);
  if (!asked.ok()) {
    HandleAskRefusal(asked.status());
    return;
  }
  waiting_message_.clear();
  unavailable_since_ = absl::InfiniteFuture();
  if (asked->trials().empty()) retry_at_ = absl::Now() + options_.retry_interval;
  for (const v1::Trial& trial : asked->trials()) Start(trial);
}

void WorkLoop::HandleAskRefusal(const absl::Status& status) {
  if (Patient(status, "asking for trials")) {
    const std::optional<client::ErrorReason> why = client::ErrorReasonOf(status);
    retry_at_ = absl::Now() + std::max(options_.retry_interval,
                                       why.has_value() ? why->retry_delay.value_or(absl::ZeroDuration())
                                                       : absl::ZeroDuration());
    return;
  }
  // The reason decides, never the wording: done ends the loop; paused, a trial budget taken up by
  // outstanding trials, or a rate limit mean asking again later; anything else is fatal.
  const std::optional<client::ErrorReason> why = client::ErrorReasonOf(status);
  const std::string why_not = why.has_value() ? why->reason : "";
  if (why_not != reason::kCampaignDone && why_not != reason::kCampaignPaused &&
      why_not != reason::kBudgetCommitted && why_not != reason::kRateLimited) {
    Log(absl::StrCat("ogive work: asking for trials failed: ", ErrorText(status)));
    stop_ = Stop::kFatal;
    exit_code_ = 1;
    return;
  }
  if (why_not == reason::kCampaignDone) {
    stop_ = Stop::kDone;
    // For the log: the phase as the campaign's view shows it, else the reason's metadata.
    std::string done_text = "done";
    if (auto it = why->metadata.find("done_reason"); it != why->metadata.end() && !it->second.empty()) {
      done_text = absl::StrCat("done (", it->second, ")");
    }
    if (absl::StatusOr<v1::CampaignView> view = client_.GetCampaign(options_.campaign); view.ok()) {
      done_text = PhaseWithReason(view->status());
      if (!view->status().phase_message().empty()) absl::StrAppend(&done_text, ": ", view->status().phase_message());
    }
    stop_message_ = absl::StrCat("campaign ", options_.campaign, " is ", done_text, "; stopping");
    if (!running_.empty()) {
      Log(absl::StrCat("ogive work: campaign ", options_.campaign, " is done; waiting for ",
                       running_.size(),
                       running_.size() == 1 ? " running trial" : " running trials"));
    }
    return;
  }
  const std::string message =
      why_not == reason::kCampaignPaused
          ? absl::StrCat("campaign ", options_.campaign, " is paused; asking again every ",
                         absl::FormatDuration(options_.retry_interval), " until it is resumed")
          : absl::StrCat("waiting: ", status.message());
  if (message != waiting_message_) Log(absl::StrCat("ogive work: ", message));
  waiting_message_ = message;
  absl::Duration wait = options_.retry_interval;
  if (why->retry_delay.has_value()) wait = std::max(wait, *why->retry_delay);
  retry_at_ = absl::Now() + wait;
}

double WorkLoop::RenewIntervalSeconds(const v1::Trial& trial) const {
  double lease = options_.lease_seconds > 0 ? options_.lease_seconds : design_.lease_seconds();
  if (lease <= 0) {
    // The server's default lease: read it off the deadline it gave (clocks may differ a little; a
    // third of the lease leaves room for that).
    lease = static_cast<double>(trial.lease_deadline_unix_ms() - absl::ToUnixMillis(absl::Now())) /
            1000;
    if (lease <= 0) lease = 3600;
  }
  return std::max(lease / 3, 0.5);
}

void WorkLoop::Start(const v1::Trial& trial) {
  ++started_;
  auto r = std::make_unique<Running>();
  r->trial = trial;
  std::string error;
  if (!Spawn(options_, design_, *r, &error)) {
    Log(absl::StrCat("ogive work: ", error));
    v1::Outcome outcome;
    outcome.mutable_void_();
    outcome.set_note(absl::StrCat("the worker could not start the program: ", error));
    r->started = absl::Now();
    Tell({{r.get(), outcome}});
    if (!r->candidate_file.empty()) unlink(r->candidate_file.c_str());
    stop_ = Stop::kFatal;
    exit_code_ = 1;
    return;
  }
  r->renewer = std::make_unique<client::LeaseRenewer>(
      &client_, options_.campaign, std::vector<int64_t>{trial.number()}, options_.worker,
      options_.lease_seconds, absl::Seconds(RenewIntervalSeconds(trial)));
  running_.push_back(std::move(r));
}

void WorkLoop::WaitForEvents() {
  std::vector<pollfd> fds;
  fds.push_back({signal_pipe[0], POLLIN, 0});
  for (const auto& r : running_) {
    if (r->out_fd >= 0) fds.push_back({r->out_fd, POLLIN, 0});
    if (r->err_fd >= 0) fds.push_back({r->err_fd, POLLIN, 0});
  }
  // Wake at least once a second, so that a child whose exit we somehow missed is still reaped, and
  // in time for the next trial timeout.
  absl::Duration timeout = absl::Seconds(1);
  if (options_.trial_timeout != absl::InfiniteDuration()) {
    for (const auto& r : running_) {
      const absl::Time due = r->stopped_at == absl::InfiniteFuture() ? r->started + options_.trial_timeout
                                                                      : r->stopped_at + options_.stop_grace;
      timeout = std::min(timeout, std::max(due - absl::Now(), absl::ZeroDuration()));
    }
  }
  if (stop_ == Stop::kNone && retry_at_ > absl::Now()) {
    timeout = std::min(timeout, retry_at_ - absl::Now());
  }
  const int ms = static_cast<int>(std::max<int64_t>(absl::ToInt64Milliseconds(timeout), 1));
  if (poll(fds.data(), fds.size(), ms) < 0 && errno != EINTR) {
    Log(absl::StrCat("ogive work: poll failed: ", std::strerror(errno)));
  }
}

void WorkLoop::Finish(Running& r) {
  r.renewer.reset();
  const v1::Outcome outcome = OutcomeOf(r, design_.objective(), options_.trial_timeout);
  Tell({{&r, outcome}});
  unlink(r.candidate_file.c_str());
  CountFailure(r, outcome);
}

void WorkLoop::EnforceTrialTimeout() {
  if (options_.trial_timeout == absl::InfiniteDuration()) return;
  const absl::Time now = absl::Now();
  for (auto& r : running_) {
    if (r->exited) continue;
    if (r->stopped_at == absl::InfiniteFuture() && now - r->started >= options_.trial_timeout) {
      Log(absl::StrCat("ogive work: trial ", r->trial.number(), ": the program ran longer than --trial-timeout ",
                       absl::FormatDuration(options_.trial_timeout), "; stopping it"));
      r->stopped_at = now;
      SignalGroup(*r, SIGTERM);
    } else if (r->stopped_at != absl::InfiniteFuture() && now - r->stopped_at >= options_.stop_grace) {
      SignalGroup(*r, SIGKILL);
    }
  }
}

void WorkLoop::CountFailure(const Running& r, const v1::Outcome& outcome) {
  const bool failed = outcome.has_void_() && (!DescribeFailure(r.wait_status).empty() ||
                                              r.stopped_at != absl::InfiniteFuture());
  if (!failed) {
    consecutive_failures_ = 0;
    return;
  }
  ++consecutive_failures_;
  if (options_.max_consecutive_failures > 0 && consecutive_failures_ >= options_.max_consecutive_failures &&
      stop_ == Stop::kNone) {
    stop_ = Stop::kFatal;
    exit_code_ = 1;
    stop_message_ = absl::StrCat("the program failed ", consecutive_failures_,
                                 " times in a row (--max-consecutive-failures ", options_.max_consecutive_failures,
                                 "; the last: ", outcome.note(), "); stopping. Fix the program and start again.");
    return;
  }
  // Wait before the next trial, doubling with each failure in a row.
  absl::Duration wait = options_.first_failure_backoff;
  for (int k = 1; k < consecutive_failures_ && wait < options_.max_failure_backoff; ++k) wait *= 2;
  wait = std::min(wait, options_.max_failure_backoff);
  retry_at_ = std::max(retry_at_, absl::Now() + wait);
  Log(absl::StrCat("ogive work: ", consecutive_failures_, consecutive_failures_ == 1 ? " failure" : " failures",
                   " in a row; the next trial starts in ", absl::FormatDuration(wait)));
}

void WorkLoop::Tell(const std::vector<std::pair<const Running*, v1::Outcome>>& reports) {
  std::vector<v1::Report> request;
  for (const auto& [r, outcome] : reports) {
    v1::Report report;
    report.set_trial(r->trial.number());
    *report.mutable_outcome() = outcome;
    request.push_back(std::move(report));
  }
  absl::StatusOr<v1::TellResponse> told = client_.Tell(options_.campaign, request, options_.worker);
  // An outcome is worth waiting for: retry while the server restarts (Tell is idempotent), unless
  // the worker is being stopped.
  while (!told.ok() && Patient(told.status(), "reporting") && StopSignal() == 0) {
    pollfd fd = {signal_pipe[0], POLLIN, 0};
    poll(&fd, 1, static_cast<int>(absl::ToInt64Milliseconds(options_.retry_interval)));
    if (StopSignal() != 0) break;
    told = client_.Tell(options_.campaign, request, options_.worker);
  }
  if (told.ok()) unavailable_since_ = absl::InfiniteFuture();
  for (size_t i = 0; i < reports.size(); ++i) {
    const auto& [r, outcome] = reports[i];
    std::string line = TrialLogLine(r->trial, outcome, Seconds(r->RunTime()));
    if (!told.ok()) {
      absl::StrAppend(&line, "; NOT stored: ", ErrorText(told.status()));
    } else if (static_cast<int>(i) < told->results_size()) {
      const v1::ReportResult& result = told->results(static_cast<int>(i));
      if (result.code() != 0) {
        absl::StrAppend(&line, "; NOT stored: ",
                        absl::StatusCodeToString(static_cast<absl::StatusCode>(result.code())),
                        result.reason().empty() ? "" : absl::StrCat(" (", result.reason(), ")"), ": ",
                        result.message());
      } else if (result.duplicate()) {
        absl::StrAppend(&line, "; already stored (duplicate)");
      } else if (result.late()) {
        absl::StrAppend(&line, "; stored (late)");
      }
    }
    Log(line);
  }
  if (!told.ok()) {
    stop_ = Stop::kFatal;
    exit_code_ = 1;
  }
}

int WorkLoop::Shutdown(int signal_number) {
  const std::string name = SignalName(signal_number);
  Log(absl::StrCat("ogive work: ", name, " received; stopping ", running_.size(),
                   running_.size() == 1 ? " running trial" : " running trials"));
  for (auto& r : running_) {
    SignalGroup(*r, SIGTERM);
    r->renewer.reset();
  }
  if (!running_.empty()) {
    std::vector<std::pair<const Running*, v1::Outcome>> reports;
    for (const auto& r : running_) {
      v1::Outcome outcome;
      outcome.mutable_void_();
      outcome.set_note(absl::StrCat("worker stopped by ", name));
      reports.emplace_back(r.get(), std::move(outcome));
    }
    Tell(reports);
  }
  // Give the programs a moment to clean up; a second signal cuts it short.
  const absl::Time deadline = absl::Now() + options_.stop_grace;
  while (absl::Now() < deadline) {
    bool all_gone = true;
    for (auto& r : running_) all_gone &= Reap(*r);
    if (all_gone) break;
    pollfd fd = {signal_pipe[0], POLLIN, 0};
    poll(&fd, 1, 50);
    if (TakeStopSignal() != 0) break;  // a second signal: no more waiting
  }
  for (auto& r : running_) {
    if (!Reap(*r)) {
      SignalGroup(*r, SIGKILL);
      while (waitpid(r->pid, nullptr, 0) < 0 && errno == EINTR) {
      }
      r->exited = true;
    }
    ReadOutput(*r);
    ReadErrors(*r);
    CloseOutput(*r);
    unlink(r->candidate_file.c_str());
  }
  running_.clear();
  return 128 + signal_number;
}

}  // namespace

std::string DescribeFailure(int wait_status) {
  if (WIFEXITED(wait_status)) {
    const int code = WEXITSTATUS(wait_status);
    return code == 0 ? "" : absl::StrCat("exited with status ", code);
  }
  if (WIFSIGNALED(wait_status)) {
    const int s = WTERMSIG(wait_status);
    return absl::StrCat("was killed by signal ", s, " (", SignalName(s), ")");
  }
  return absl::StrCat("ended with wait status ", wait_status);
}

bool FindExecutable(const std::string& program, const std::string& path) {
  auto executable = [](const std::string& file) {
    struct stat st;
    return stat(file.c_str(), &st) == 0 && S_ISREG(st.st_mode) && access(file.c_str(), X_OK) == 0;
  };
  if (program.empty()) return false;
  if (program.find('/') != std::string::npos) return executable(program);
  for (absl::string_view dir : absl::StrSplit(path, ':')) {
    // An empty entry means the current directory, as the shell reads $PATH.
    if (executable(absl::StrCat(dir.empty() ? "." : dir, "/", program))) return true;
  }
  return false;
}

int RunWork(client::Client& client, const WorkOptions& options) {
  return WorkLoop(client, options).Run();
}

}  // namespace ogive::cli
