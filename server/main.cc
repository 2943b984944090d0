// ogived: the ogive server. Serves many studies over gRPC from one SQLite file.
//
//   ogived [--db PATH] [--listen ADDRESS] [--tls-cert PEM --tls-key PEM [--tls-client-ca PEM]]
//          [--metrics-listen ADDRESS] [--max-... N] [--sweep-interval-seconds S]   (see --help)
//   ogived backup --db PATH --to FILE   (a consistent copy of a live database; backup_command.h)
//
// On start it restores every stored study exactly. On SIGTERM or SIGINT it reports NOT_SERVING on the
// health service, stops accepting calls, lets in-flight calls finish (their commits included) and
// exits 0.
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
#include "absl/strings/str_format.h"
#include "absl/synchronization/mutex.h"
#include "absl/synchronization/notification.h"
#include "absl/time/clock.h"
#include "grpcpp/ext/proto_server_reflection_plugin.h"
#include "grpcpp/grpcpp.h"
#include "grpcpp/health_check_service_interface.h"
#include "server/backup_command.h"
#include "server/metrics/metric_registry.h"
#include "server/metrics/metrics_http_server.h"
#include "server/service/grpc_service.h"
#include "server/service/log.h"
#include "server/service/registry.h"
#include "server/service/service_metrics.h"
#include "server/service/transport.h"
#include "storage/sqlite_store.h"

namespace {

constexpr char kUsage[] =
    "usage: ogived [options]\n"
    "       ogived backup --db PATH --to FILE   (copy a live database safely; see ogived backup --help)\n"
    "\n"
    "Serves ogive studies over gRPC from one SQLite database file.\n"
    "\n"
    "options:\n"
    "  --db PATH                   database file (default ./ogive.db; created if missing)\n"
    "  --listen ADDRESS            host:port to listen on (default 127.0.0.1:7075)\n"
    "  --sweep-interval-seconds S  how often expired leases are lapsed (default 1)\n"
    "  --tls-cert PEM              serve TLS with this certificate chain (server's certificate first)\n"
    "  --tls-key PEM               the private key of --tls-cert (unencrypted PEM)\n"
    "  --tls-client-ca PEM         require client certificates signed by these CAs (mutual TLS)\n"
    "  --metrics-listen ADDRESS    serve Prometheus metrics over HTTP on host:port at /metrics\n"
    "                              (default: off; plain HTTP, loopback only unless\n"
    "                              --allow-insecure-remote)\n"
    "  --allow-insecure-remote     listen on a non-loopback address without TLS (plain text!)\n"
    "  --help                      this text\n"
    "\n"
    "Without --tls-cert ogived listens on loopback addresses only, unless --allow-insecure-remote.\n"
    "\n"
    "limits (beyond them a request gets RESOURCE_EXHAUSTED or INVALID_ARGUMENT):\n";

constexpr char kSafety[] =
    "\n"
    "Candidates are suggestions: bounds are hard, but check every candidate against your local\n"
    "safety rules and codes before it drives equipment.\n";

struct Flags {
  std::string db = "ogive.db";
  std::string listen = "127.0.0.1:7075";
  std::string metrics_listen;  // empty: no metrics endpoint
  double sweep_interval_seconds = 1.0;
  ogive::service::TransportFlags transport;
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
      std::fputs(absl::StrCat(kUsage, ogive::service::LimitFlagsHelp(), kSafety).c_str(), stdout);
      std::exit(0);
    }
    if (arg == "--allow-insecure-remote") {
      flags.transport.allow_insecure_remote = true;
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
    if (name == "--db") {
      flags.db = value;
    } else if (name == "--listen") {
      flags.listen = value;
    } else if (name == "--metrics-listen") {
      if (value.empty()) Fail("--metrics-listen: needs host:port (e.g. 127.0.0.1:7076)");
      flags.metrics_listen = value;
    } else if (name == "--tls-cert") {
      flags.transport.tls_cert_path = value;
    } else if (name == "--tls-key") {
      flags.transport.tls_key_path = value;
    } else if (name == "--tls-client-ca") {
      flags.transport.tls_client_ca_path = value;
    } else if (absl::Status s = ogive::service::SetLimitFromFlag(flags.limits, name, value); !absl::IsNotFound(s)) {
      if (!s.ok()) Fail(std::string(s.message()));
    } else if (name == "--sweep-interval-seconds") {
      if (!absl::SimpleAtod(value, &flags.sweep_interval_seconds) || !(flags.sweep_interval_seconds > 0)) {
        Fail(absl::StrCat(name, ": must be a positive number of seconds, got '", value, "'"));
      }
    } else {
      Fail(absl::StrCat("unknown option '", name, "' (see --help)"));
    }
  }
  if (absl::Status s = flags.limits.Validate(); !s.ok()) Fail(std::string(s.message()));
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
  if (argc >= 2 && std::strcmp(argv[1], "backup") == 0) return ogive::RunBackupCommand(argc - 2, argv + 2);
  const Flags flags = ParseFlags(argc, argv);
  // Certificates are checked before the database is opened: a bad file fails fast, naming its flag.
  absl::StatusOr<ogive::service::Transport> transport = ogive::service::ChooseTransport(flags.listen, flags.transport);
  if (!transport.ok()) Fail(std::string(transport.status().message()));
  // The metrics endpoint is plain HTTP: the same loopback rule as a plaintext gRPC port.
  if (!flags.metrics_listen.empty() && !ogive::service::IsLoopbackAddress(flags.metrics_listen) &&
      !flags.transport.allow_insecure_remote) {
    Fail(absl::StrCat("--metrics-listen '", flags.metrics_listen,
                      "': metrics are plain HTTP; a non-loopback address needs --allow-insecure-remote"));
  }
  // Lock-order checking is for tests; in the server it costs a graph update on every lock.
  absl::SetMutexDeadlockDetectionMode(absl::OnDeadlockCycle::kIgnore);
  using ogive::service::LogLine;

  // Counted whether or not they are served: the cost is a few atomic adds per request. Declared
  // before the store, whose writer thread reports each transaction to them until it stops.
  ogive::metrics::MetricRegistry metric_registry;
  ogive::service::ServiceMetrics metrics(&metric_registry, absl::Now());
  ogive::storage::SqliteStore::Options store_options;
  store_options.on_transaction = [&metrics](const ogive::storage::SqliteTransactionReport& report) {
    metrics.ObserveTransaction(report);
  };
  absl::StatusOr<std::unique_ptr<ogive::storage::SqliteStore>> store =
      ogive::storage::SqliteStore::Open(flags.db, store_options);
  if (!store.ok()) Fail(absl::StrCat("cannot open database '", flags.db, "': ", store.status().message()));
  ogive::service::Registry registry(store->get(), flags.limits, &metrics);
  if (absl::Status s = registry.LoadAll(); !s.ok()) Fail(absl::StrCat("cannot restore studies: ", s.message()));
  LogLine({{"event", "start"}, {"db", flags.db}, {"studies", absl::StrCat(registry.All().size())}});
  metrics.CollectStudies(&registry);
  metrics.CollectStore(store->get());

  ogive::service::OgiveService service(&registry, [] { return absl::Now(); }, &metrics);
  grpc::EnableDefaultHealthCheckService(true);
  grpc::reflection::InitProtoReflectionServerBuilderPlugin();
  grpc::ServerBuilder builder;
  int port = 0;
  builder.AddListeningPort(flags.listen, transport->credentials, &port);
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
  const std::string tls_mode(ogive::service::TransportModeName(transport->mode));
  LogLine({{"event", "listening"}, {"address", flags.listen}, {"port", absl::StrCat(port)}, {"tls", tls_mode}});
  if (transport->mode == ogive::service::TransportMode::kPlainLoopback) {
    LogLine({{"event", "insecure"}, {"tls", tls_mode},
             {"detail", "no TLS: listening on loopback only; give --tls-cert and --tls-key to serve other hosts"}});
  } else if (transport->mode == ogive::service::TransportMode::kPlainRemote) {
    LogLine({{"event", "insecure"}, {"tls", tls_mode},
             {"detail", "no TLS on a non-loopback address (--allow-insecure-remote): requests and results cross "
                        "the network in plain text"}});
  }

  std::unique_ptr<ogive::metrics::MetricsHttpServer> metrics_server;
  if (!flags.metrics_listen.empty()) {
    absl::StatusOr<std::unique_ptr<ogive::metrics::MetricsHttpServer>> started =
        ogive::metrics::MetricsHttpServer::Start(flags.metrics_listen, &metric_registry);
    if (!started.ok()) {
      server->Shutdown();
      Fail(std::string(started.status().message()));
    }
    metrics_server = *std::move(started);
    LogLine({{"event", "metrics_listening"}, {"address", flags.metrics_listen},
             {"port", absl::StrCat(metrics_server->port())}, {"path", "/metrics"}});
  }

  if (pipe(signal_pipe) != 0) Fail("pipe failed");
  struct sigaction action;
  std::memset(&action, 0, sizeof action);
  action.sa_handler = OnSignal;
  sigaction(SIGTERM, &action, nullptr);
  sigaction(SIGINT, &action, nullptr);

  absl::Notification stop_sweeping;
  std::thread sweeper([&] {
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
  server->Shutdown(std::chrono::system_clock::now() + std::chrono::seconds(10));
  stop_sweeping.Notify();
  sweeper.join();
  if (metrics_server != nullptr) metrics_server->Stop();  // its collectors read the store
  const ogive::storage::SqliteStore::Stats stats = (*store)->stats();
  store->reset();  // drains the writer: every acknowledged write is committed
  LogLine({{"event", "stopped"}, {"transactions", absl::StrCat(stats.transactions)},
           {"writes", absl::StrCat(stats.committed_writes)},
           {"writes_per_transaction", absl::StrFormat("%.2f", stats.commits_per_transaction())},
           {"group_commit_waits", absl::StrCat(stats.group_commit_waits)}});
  return 0;
}
