// ogived: the ogive server. Serves many studies over gRPC from one SQLite file.
//
//   ogived [--db PATH] [--listen ADDRESS] [--max-message-bytes N] [--sweep-interval-seconds S]
//          [--read-only] ...
//
// On start it restores every stored study exactly. On SIGTERM or SIGINT it reports NOT_SERVING on the
// health service, refuses new calls (UNAVAILABLE), lets in-flight calls finish (their commits
// included, for at most 10 s), closes its connections and exits 0.
#include <signal.h>
#include <unistd.h>

#include <atomic>
#include <cerrno>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <memory>
#include <string>
#include <thread>

#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "absl/synchronization/mutex.h"
#include "absl/synchronization/notification.h"
#include "absl/time/clock.h"
#include "grpcpp/ext/proto_server_reflection_plugin.h"
#include "grpcpp/grpcpp.h"
#include "grpcpp/health_check_service_interface.h"
#include "server/service/grpc_service.h"
#include "server/service/log.h"
#include "server/service/registry.h"
#include "storage/sqlite_store.h"

namespace {

constexpr char kUsage[] =
    "usage: ogived [options]\n"
    "\n"
    "Serves ogive studies over gRPC from one SQLite database file.\n"
    "\n"
    "options:\n"
    "  --db PATH                   database file (default ./ogive.db; created if missing)\n"
    "  --listen ADDRESS            host:port to listen on (default 127.0.0.1:7075)\n"
    "  --max-message-bytes N       largest request accepted (default 4194304)\n"
    "  --sweep-interval-seconds S  how often expired leases are lapsed (default 1)\n"
    "  --max-ask-count N           trials per Ask (default 1000)\n"
    "  --max-reports-per-tell N    reports per Tell (default 1000)\n"
    "  --max-studies N             studies per server (default 10000)\n"
    "  --allow-insecure-remote     listen on a non-loopback address without TLS (plain text!)\n"
    "  --read-only                 serve a database file that cannot be written: reads only,\n"
    "                              every write is refused (FAILED_PRECONDITION), no lease sweeps\n"
    "  --help                      this text\n"
    "\n"
    "Candidates are suggestions: check them against your local safety rules before they drive\n"
    "equipment.\n";

struct Flags {
  std::string db = "ogive.db";
  std::string listen = "127.0.0.1:7075";
  double sweep_interval_seconds = 1.0;
  bool allow_insecure_remote = false;
  bool read_only = false;
  ogive::service::ServiceLimits limits;
};

[[noreturn]] void Fail(const std::string& message) {
  std::fprintf(stderr, "ogived: %s\n", message.c_str());
  std::exit(2);
}

Flags ParseFlags(int argc, char** argv) {
  Flags flags;
  for (int i = 1; i < argc; ++i) {
    const std::string arg = argv[i];
    if (arg == "--help" || arg == "-h") {
      std::fputs(kUsage, stdout);
      std::exit(0);
    }
    if (arg == "--allow-insecure-remote") {
      flags.allow_insecure_remote = true;
      continue;
    }
    if (arg == "--read-only") {
      flags.read_only = true;
      continue;
    }
    const size_t eq = arg.find('=');
    const std::string name = arg.substr(0, eq);
    std::string value;
    if (eq != std::string::npos) {
      value = arg.substr(eq + 1);
    } else if (i + 1 < argc) {
      value = argv[++i];
    } else {
      Fail(absl::StrCat(name, ": needs a value (see --help)"));
    }
    auto integer = [&](int* out) {
      if (!absl::SimpleAtoi(value, out) || *out < 1) Fail(absl::StrCat(name, ": must be a positive integer, got '", value, "'"));
    };
    if (name == "--db") {
      flags.db = value;
    } else if (name == "--listen") {
      flags.listen = value;
    } else if (name == "--max-message-bytes") {
      integer(&flags.limits.max_message_bytes);
    } else if (name == "--max-ask-count") {
      integer(&flags.limits.max_ask_count);
    } else if (name == "--max-reports-per-tell") {
      integer(&flags.limits.max_reports_per_tell);
    } else if (name == "--max-studies") {
      integer(&flags.limits.max_studies);
    } else if (name == "--sweep-interval-seconds") {
      if (!absl::SimpleAtod(value, &flags.sweep_interval_seconds) || !(flags.sweep_interval_seconds > 0)) {
        Fail(absl::StrCat(name, ": must be a positive number of seconds, got '", value, "'"));
      }
    } else {
      Fail(absl::StrCat("unknown option '", name, "' (see --help)"));
    }
  }
  if (absl::Status s = flags.limits.Validate(); !s.ok()) Fail(std::string(s.message()));
  const bool loopback = flags.listen.rfind("127.", 0) == 0 || flags.listen.rfind("localhost:", 0) == 0 ||
                        flags.listen.rfind("[::1]:", 0) == 0;
  if (!loopback && !flags.allow_insecure_remote) {
    Fail(absl::StrCat("--listen ", flags.listen,
                      ": without TLS ogived listens on loopback only (127.0.0.1, [::1], localhost); pass "
                      "--allow-insecure-remote to serve other hosts in plain text"));
  }
  return flags;
}

// The signal handler only writes a byte; the main thread does the rest.
int signal_pipe[2];
void OnSignal(int) {
  const char byte = 1;
  [[maybe_unused]] ssize_t ignored = write(signal_pipe[1], &byte, 1);
}

}  // namespace

int main(int argc, char** argv) {
  const Flags flags = ParseFlags(argc, argv);
  // Lock-order checking is for tests; in the server it costs a graph update on every lock.
  absl::SetMutexDeadlockDetectionMode(absl::OnDeadlockCycle::kIgnore);
  using ogive::service::LogLine;

  ogive::storage::SqliteStore::Options store_options;
  store_options.read_only = flags.read_only;
  absl::StatusOr<std::unique_ptr<ogive::storage::SqliteStore>> store =
      ogive::storage::SqliteStore::Open(flags.db, store_options);
  if (!store.ok()) {
    const bool not_writable =
        !flags.read_only && store.status().message().find("not writable") != std::string::npos;
    Fail(absl::StrCat("cannot open database '", flags.db, "': ", store.status().message(),
                      not_writable ? " (ogived --read-only serves it for reading)" : ""));
  }
  ogive::service::Registry registry(store->get(), flags.limits);
  if (absl::Status s = registry.LoadAll(); !s.ok()) Fail(absl::StrCat("cannot restore studies: ", s.message()));
  LogLine({{"event", "start"}, {"db", flags.db}, {"studies", absl::StrCat(registry.All().size())},
           {"mode", flags.read_only ? "read-only" : "read-write"}});

  ogive::service::OgiveService service(&registry, [] { return absl::Now(); });
  grpc::EnableDefaultHealthCheckService(true);
  grpc::reflection::InitProtoReflectionServerBuilderPlugin();
  grpc::ServerBuilder builder;
  int port = 0;
  builder.AddListeningPort(flags.listen, grpc::InsecureServerCredentials(), &port);
  builder.SetMaxReceiveMessageSize(flags.limits.max_message_bytes);
  // A port already in use is an error, not a port to share with another server.
  builder.AddChannelArgument(GRPC_ARG_ALLOW_REUSEPORT, 0);
  // Handlers block until their commit, so many run at once. Let the sync server keep its threads as
  // pollers instead of exiting and re-creating them (thread creation showed in profiles under 64
  // clients; the measured gain was within noise).
  builder.SetSyncServerOption(grpc::ServerBuilder::SyncServerOption::MIN_POLLERS, 4);
  builder.SetSyncServerOption(grpc::ServerBuilder::SyncServerOption::MAX_POLLERS, 512);
  builder.RegisterService(&service);
  std::unique_ptr<grpc::Server> server = builder.BuildAndStart();
  if (server == nullptr || port == 0) Fail(absl::StrCat("cannot listen on '", flags.listen, "'"));
  server->GetHealthCheckService()->SetServingStatus(true);
  LogLine({{"event", "listening"}, {"address", flags.listen}, {"port", absl::StrCat(port)}});

  if (pipe(signal_pipe) != 0) Fail("pipe failed");
  struct sigaction action;
  std::memset(&action, 0, sizeof action);
  action.sa_handler = OnSignal;
  sigaction(SIGTERM, &action, nullptr);
  sigaction(SIGINT, &action, nullptr);

  absl::Notification stop_sweeping;
  std::thread sweeper([&] {
    if (flags.read_only) return;  // lapses are writes
    while (!stop_sweeping.WaitForNotificationWithTimeout(absl::Seconds(flags.sweep_interval_seconds))) {
      for (const auto& host : registry.All()) {
        absl::StatusOr<int> lapsed = host->Sweep(absl::Now());
        if (!lapsed.ok()) {
          LogLine({{"event", "sweep"}, {"study", host->name()}, {"code", absl::StatusCodeToString(lapsed.status().code())},
                   {"detail", std::string(lapsed.status().message())}});
        } else if (*lapsed > 0) {
          LogLine({{"event", "sweep"}, {"study", host->name()}, {"lapsed", absl::StrCat(*lapsed)}});
        }
      }
    }
  });

  char byte;
  while (read(signal_pipe[0], &byte, 1) < 0 && errno == EINTR) {
  }
  LogLine({{"event", "draining"}});
  server->GetHealthCheckService()->SetServingStatus(false);
  service.StopWatches();
  // Let the calls in flight finish (their commits included) while new ones are refused, then close
  // every connection: gRPC's own shutdown would also wait, up to its deadline, for idle clients to
  // close theirs, and a blocking client that is not in a call notices only every few seconds.
  if (!service.Drain(absl::Seconds(10))) {
    LogLine({{"event", "draining"}, {"detail", "calls still running after 10 s are cancelled"}});
  }
  server->Shutdown(std::chrono::system_clock::now() + std::chrono::milliseconds(200));
  stop_sweeping.Notify();
  sweeper.join();
  store->reset();  // drains the writer: every acknowledged write is committed
  LogLine({{"event", "stopped"}});
  return 0;
}
