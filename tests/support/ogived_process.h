// OgivedProcess: a real ogived child process for the process-level tests, on a loopback port that
// stays the same across restarts, so that clients reconnect to the restarted server. The one place
// that knows how tests start ogived and how their clients reach it (flags, credentials): adding a
// token or TLS to every such test is a change here.
//
// The test owns the process: Start() and Kill() are called from one thread (the one that created
// the object: the child gets SIGKILL if that thread ends, so nothing outlives a crashed test). The
// destructor kills a child that still runs. Clients made by NewClient() may be used from any thread.
#ifndef OGIVE_TESTS_SUPPORT_OGIVED_PROCESS_H_
#define OGIVE_TESTS_SUPPORT_OGIVED_PROCESS_H_

#include <sys/types.h>

#include <memory>
#include <string>
#include <vector>

#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "absl/time/time.h"
#include "client/ogive_client.h"

namespace ogive::testing {

struct OgivedOptions {
  std::string binary;                    // path to ogived
  std::string db;                        // --db
  int port = 0;                          // loopback port; 0: a free one, picked once
  std::vector<std::string> extra_flags;  // e.g. {"--sweep-interval", "0.2"}
  std::string log_path;                  // standard output and error are appended here
  absl::Duration start_timeout = absl::Seconds(30);
  // Runs ogived as this user and group (e.g. 65534, nobody) when >= 0; needs root.
  int uid = -1;
  int gid = -1;
};

class OgivedProcess {
 public:
  explicit OgivedProcess(OgivedOptions options);
  ~OgivedProcess();
  OgivedProcess(const OgivedProcess&) = delete;
  OgivedProcess& operator=(const OgivedProcess&) = delete;

  // Starts ogived and waits until it answers a call (or exits: FAILED_PRECONDITION with its exit
  // status; or start_timeout passes: DEADLINE_EXCEEDED). REQUIRES: not running.
  absl::Status Start();
  // Starts ogived without waiting for it (to kill it while it opens the database).
  absl::Status Spawn();
  // Waits until the running ogived answers a call.
  absl::Status WaitUntilServing(absl::Duration timeout);

  // Sends `signal` and waits until the process has exited; returns its wait status (as waitpid
  // gives it), or -1 when nothing ran.
  int Kill(int signal);
  // SIGKILL, as a crash would.
  int Crash() { return Kill(9); }
  // Waits up to `timeout` for the process to exit by itself; its wait status, or -1 if it still
  // runs (it is left running).
  int WaitForExit(absl::Duration timeout);

  bool running() const { return pid_ > 0; }
  pid_t pid() const { return pid_; }
  int starts() const { return starts_; }
  const std::string& target() const { return target_; }  // "127.0.0.1:<port>"
  const OgivedOptions& options() const { return options_; }

  // What clients of this server use: retries spanning a restart, the credentials of the test.
  client::ClientOptions ClientOptions() const;
  // A client on its own channel, which reconnects within ~100 ms of the server coming back (gRPC's
  // default reconnect backoff would wait up to two minutes).
  std::unique_ptr<client::Client> NewClient(client::ClientOptions options) const;
  std::unique_ptr<client::Client> NewClient() const { return NewClient(ClientOptions()); }

  // The global flags that point the `ogive` command at this server.
  std::vector<std::string> CliFlags() const;

  // The last `lines` lines of the log, for failure messages.
  std::string LogTail(int lines = 40) const;

 private:
  OgivedOptions options_;
  std::string target_;
  pid_t pid_ = -1;
  int starts_ = 0;
};

// A loopback TCP port that was free a moment ago.
absl::StatusOr<int> FreeLoopbackPort();

}  // namespace ogive::testing

#endif  // OGIVE_TESTS_SUPPORT_OGIVED_PROCESS_H_
