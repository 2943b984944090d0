#include "tests/support/ogived_process.h"

#include <arpa/inet.h>
#include <fcntl.h>
#include <grp.h>
#include <netinet/in.h>
#include <signal.h>
#include <sys/prctl.h>
#include <sys/socket.h>
#include <sys/wait.h>
#include <unistd.h>

#include <cerrno>
#include <cstring>
#include <fstream>
#include <sstream>
#include <utility>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_join.h"
#include "absl/strings/str_split.h"
#include "absl/time/clock.h"
#include "grpcpp/grpcpp.h"

namespace ogive::testing {

absl::StatusOr<int> FreeLoopbackPort() {
  const int fd = socket(AF_INET, SOCK_STREAM | SOCK_CLOEXEC, 0);
  if (fd < 0) return absl::UnavailableError(absl::StrCat("socket: ", std::strerror(errno)));
  sockaddr_in address{};
  address.sin_family = AF_INET;
  address.sin_addr.s_addr = htonl(INADDR_LOOPBACK);
  address.sin_port = 0;
  socklen_t size = sizeof address;
  if (bind(fd, reinterpret_cast<sockaddr*>(&address), sizeof address) != 0 ||
      getsockname(fd, reinterpret_cast<sockaddr*>(&address), &size) != 0) {
    const int error = errno;
    close(fd);
    return absl::UnavailableError(absl::StrCat("bind to a loopback port: ", std::strerror(error)));
  }
  close(fd);
  return static_cast<int>(ntohs(address.sin_port));
}

OgivedProcess::OgivedProcess(OgivedOptions options) : options_(std::move(options)) {}

OgivedProcess::~OgivedProcess() {
  if (running()) Kill(SIGKILL);
}

absl::Status OgivedProcess::Spawn() {
  if (running()) return absl::FailedPreconditionError("ogived is already running");
  if (options_.port == 0) {
    absl::StatusOr<int> port = FreeLoopbackPort();
    if (!port.ok()) return port.status();
    options_.port = *port;
  }
  target_ = absl::StrCat("127.0.0.1:", options_.port);
  // Durability is tested without tokens (loopback only); auth_test and ogived_auth_test check them.
  std::vector<std::string> args = {options_.binary, "--db", options_.db, "--listen", target_, "--no-auth"};
  args.insert(args.end(), options_.extra_flags.begin(), options_.extra_flags.end());
  std::vector<char*> argv;
  for (std::string& arg : args) argv.push_back(arg.data());
  argv.push_back(nullptr);

  const std::string log = options_.log_path.empty() ? "/dev/null" : options_.log_path;
  const int log_fd = open(log.c_str(), O_WRONLY | O_CREAT | O_APPEND | O_CLOEXEC, 0644);
  if (log_fd < 0) {
    return absl::UnavailableError(absl::StrCat("open ", log, ": ", std::strerror(errno)));
  }
  const pid_t parent = getpid();
  const int uid = options_.uid;
  const int gid = options_.gid;
  const pid_t pid = fork();
  if (pid < 0) {
    close(log_fd);
    return absl::UnavailableError(absl::StrCat("fork: ", std::strerror(errno)));
  }
  if (pid == 0) {
    // Only async-signal-safe calls until exec: the parent has threads.
    prctl(PR_SET_PDEATHSIG, SIGKILL);
    if (getppid() != parent) _exit(127);
    dup2(log_fd, STDOUT_FILENO);
    dup2(log_fd, STDERR_FILENO);
    if (gid >= 0 && (setgroups(0, nullptr) != 0 || setgid(static_cast<gid_t>(gid)) != 0)) _exit(126);
    if (uid >= 0 && setuid(static_cast<uid_t>(uid)) != 0) _exit(126);
    execv(argv[0], argv.data());
    _exit(127);
  }
  close(log_fd);
  pid_ = pid;
  ++starts_;
  return absl::OkStatus();
}

absl::Status OgivedProcess::WaitUntilServing(absl::Duration timeout) {
  client::ClientOptions probe_options = ClientOptions();
  // Each probe call retries for ~1 s (its retries wait for the connection, see Client::Call).
  probe_options.call_timeout = absl::Milliseconds(500);
  probe_options.max_attempts = 10;
  probe_options.first_backoff = absl::Milliseconds(20);
  probe_options.max_backoff = absl::Milliseconds(100);
  std::unique_ptr<client::Client> probe = NewClient(probe_options);
  const absl::Time deadline = absl::Now() + timeout;
  while (true) {
    if (!running()) return absl::FailedPreconditionError("ogived is not running");
    int wstatus = 0;
    if (waitpid(pid_, &wstatus, WNOHANG) == pid_) {
      pid_ = -1;
      return absl::FailedPreconditionError(absl::StrCat(
          "ogived exited at start with wait status ", wstatus,
          WIFEXITED(wstatus) ? absl::StrCat(" (exit code ", WEXITSTATUS(wstatus), ")") : "",
          "; its log ends:\n", LogTail()));
    }
    absl::StatusOr<v1::ListCampaignsResponse> listed = probe->ListCampaigns();
    if (listed.ok() || listed.status().code() != absl::StatusCode::kUnavailable) {
      return absl::OkStatus();  // it answers (whatever the answer)
    }
    if (absl::Now() > deadline) {
      return absl::DeadlineExceededError(
          absl::StrCat("ogived does not answer on ", target_, " after ",
                       absl::FormatDuration(timeout), "; its log ends:\n", LogTail()));
    }
  }
}

absl::Status OgivedProcess::Start() {
  if (absl::Status s = Spawn(); !s.ok()) return s;
  return WaitUntilServing(options_.start_timeout);
}

int OgivedProcess::Kill(int signal) {
  if (!running()) return -1;
  kill(pid_, signal);
  int wstatus = 0;
  while (waitpid(pid_, &wstatus, 0) < 0 && errno == EINTR) {
  }
  pid_ = -1;
  return wstatus;
}

int OgivedProcess::WaitForExit(absl::Duration timeout) {
  if (!running()) return -1;
  const absl::Time deadline = absl::Now() + timeout;
  while (true) {
    int wstatus = 0;
    if (waitpid(pid_, &wstatus, WNOHANG) == pid_) {
      pid_ = -1;
      return wstatus;
    }
    if (absl::Now() > deadline) return -1;
    absl::SleepFor(absl::Milliseconds(10));
  }
}

client::ClientOptions OgivedProcess::ClientOptions() const {
  client::ClientOptions options;
  options.call_timeout = absl::Seconds(10);
  // ~12 s of retries: longer than a restart takes.
  options.max_attempts = 40;
  options.first_backoff = absl::Milliseconds(20);
  options.max_backoff = absl::Milliseconds(300);
  return options;
}

std::unique_ptr<client::Client> OgivedProcess::NewClient(client::ClientOptions options) const {
  grpc::ChannelArguments args;
  args.SetMaxReceiveMessageSize(options.max_message_bytes);
  args.SetMaxSendMessageSize(options.max_message_bytes);
  // Not GRPC_ARG_MIN_RECONNECT_BACKOFF_MS: gRPC takes it as the connection attempt's timeout, and
  // a handshake cut short after 100 ms on a loaded machine kept clients out for seconds.
  args.SetInt(GRPC_ARG_INITIAL_RECONNECT_BACKOFF_MS, 50);
  args.SetInt(GRPC_ARG_MAX_RECONNECT_BACKOFF_MS, 100);
  args.SetInt(GRPC_ARG_USE_LOCAL_SUBCHANNEL_POOL, 1);  // a connection of its own, like a worker
  // The target is an "ipv4:" address, not a name: the default resolver re-resolves a name at most
  // every 30 s, and until it does a channel does not reconnect to a restarted server.
  return std::make_unique<client::Client>(
      grpc::CreateCustomChannel("ipv4:" + target_, grpc::InsecureChannelCredentials(), args),
      std::move(options));
}

std::vector<std::string> OgivedProcess::CliFlags() const { return {"--server", target_}; }

std::string OgivedProcess::LogTail(int lines) const {
  std::ifstream in(options_.log_path);
  std::stringstream all;
  all << in.rdbuf();
  std::vector<std::string> split = absl::StrSplit(all.str(), '\n');
  if (static_cast<int>(split.size()) > lines) {
    split.erase(split.begin(), split.end() - lines);
  }
  return absl::StrJoin(split, "\n");
}

}  // namespace ogive::testing
