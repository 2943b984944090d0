// `ogive work`: the worker loop that runs on cluster nodes. It asks the server for one trial per
// free slot, runs the evaluation program for each (no shell: the program and its arguments as
// given), keeps the lease alive while it runs, reads the outcome from the program's last line of
// standard output and tells it, until the campaign is done, a trial limit is reached, or the scheduler
// stops the job with SIGTERM.
//
// The program sees the candidate as environment variables (OGIVE_<NAME>=value, see candidate_env.h)
// plus OGIVE_CAMPAIGN, OGIVE_TRIAL and OGIVE_CANDIDATE_FILE (a JSON file {name: value}, removed
// afterwards). It runs in its own process group with standard input from /dev/null; its standard
// output is copied to ours, its standard error too, and the last lines of its standard error go into
// the note of a failed run.
//
// Not thread-safe, and it owns the process's SIGTERM, SIGINT and SIGCHLD handlers while it runs:
// call it once, from main.
#ifndef OGIVE_CLIENT_CLI_WORK_H_
#define OGIVE_CLIENT_CLI_WORK_H_

#include <cstdint>
#include <string>
#include <vector>

#include "absl/time/time.h"
#include "client/ogive_client.h"

namespace ogive::cli {

struct WorkOptions {
  std::string campaign;
  std::vector<std::string> command;  // the program and its arguments; not empty
  std::string worker;                // who asks, shown in trial lists; not empty
  int64_t max_trials = 0;            // stop after starting this many trials; 0 = no limit
  int parallel = 1;                  // trials run at once (slots), >= 1
  double lease_seconds = 0;          // lease asked for and renewed; 0 = the campaign's default
  absl::Duration retry_interval = absl::Seconds(5);  // asking again while the campaign is paused
  absl::Duration stop_grace = absl::Seconds(10);     // after SIGTERM, before SIGKILL
  // A program that fails (exits non-zero, is killed, or runs out of time) this many times in a row
  // stops the loop with status 1; 0 = never. Between failures the loop waits, doubling from
  // first_failure_backoff up to max_failure_backoff, so a broken program does not burn trials.
  int max_consecutive_failures = 10;
  absl::Duration first_failure_backoff = absl::Milliseconds(500);
  absl::Duration max_failure_backoff = absl::Seconds(60);
  // A program still running this long after it started is stopped (SIGTERM to its process group,
  // SIGKILL after stop_grace) and its trial reported void; InfiniteDuration() = no limit.
  absl::Duration trial_timeout = absl::InfiniteDuration();
};

// Runs the loop and returns the process exit status: 0 when the campaign is done or --max-trials is
// reached, 1 on a server error (printed with its code) or after max_consecutive_failures failed
// programs in a row, 2 if the campaign cannot be run this way (a
// parameter name that collides in the environment, a program that cannot be found), 128 + the
// signal number after SIGTERM (143) or SIGINT (130), having voided every trial that was running.
int RunWork(client::Client& client, const WorkOptions& options);

// "exited with status 3", "was killed by signal 9 (SIGKILL)" for a waitpid status; "" for a clean
// exit.
std::string DescribeFailure(int wait_status);

// True if `program` names an executable file: a path with a '/', or a file found on `path` (a
// colon-separated list of directories, as $PATH).
bool FindExecutable(const std::string& program, const std::string& path);

}  // namespace ogive::cli

#endif  // OGIVE_CLIENT_CLI_WORK_H_
