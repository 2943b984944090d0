// ogived: the ogive server. Serves many campaigns over gRPC from one SQLite file.
//
//   ogived [--db PATH] [--listen ADDRESS] [--tls-cert PEM --tls-key PEM [--tls-client-ca PEM]]
//          [--metrics-listen ADDRESS] [--max-... N] [--sweep-interval DURATION] [--read-only]   (see --help)
//   ogived backup --db PATH --to FILE   (a consistent copy of a live database; backup_command.h)
//   ogived token create|list|revoke --db PATH ...   (token_command.h)
//
// Every call needs a bearer token of the right role (authorizer.h) unless started with --no-auth,
// which is allowed on loopback addresses only. The health service answers without a token; server
// reflection is off unless --reflection is given.
//
// On start it restores every stored campaign exactly. On SIGTERM or SIGINT it reports NOT_SERVING on the
// health service, refuses new calls (UNAVAILABLE), lets in-flight calls finish (their commits
// included, for at most 10 s), closes its connections and exits 0.
#include <pthread.h>
#include <signal.h>
#include <unistd.h>

#include <atomic>
#include <cerrno>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <memory>
#include <optional>
#include <string>
#include <thread>

#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "absl/synchronization/mutex.h"
#include "absl/synchronization/notification.h"
#include "absl/time/clock.h"
#include "google/protobuf/stubs/logging.h"
#include "grpc/support/log.h"
#include "grpcpp/ext/proto_server_reflection_plugin.h"
#include "grpcpp/grpcpp.h"
#include "grpcpp/health_check_service_interface.h"
#include "server/admin_socket.h"
#include "server/base/duration_text.h"
#include "server/base/reason.h"
#include "server/backup_command.h"
#include "server/metrics/metric_registry.h"
#include "server/metrics/metrics_http_server.h"
#include "server/service/authorizer.h"
#include "server/service/grpc_service.h"
#include "server/service/log.h"
#include "server/service/registry.h"
#include "server/service/request_body.h"
#include "server/service/service_metrics.h"
#include "server/service/token_admin.h"
#include "server/service/token_admin_service.h"
#include "server/service/transport.h"
#include "server/token_command.h"
#include "server/without_reflection.h"
#include "storage/sqlite_store.h"

namespace {

constexpr char kUsage[] =
    "usage: ogived [options]\n"
    "       ogived backup --db PATH --to FILE   (copy a live database safely; see ogived backup --help)\n"
    "\n"
    "Serves ogive campaigns over gRPC from one SQLite database file.\n"
    "\n"
    "options:\n"
    "  --db PATH                   database file (default ./ogive.db; created if missing)\n"
    "  --listen ADDRESS            host:port to listen on (default 127.0.0.1:7075)\n"
    "  --sweep-interval DURATION   how often expired leases are lapsed (default 1s; durations take\n"
    "                              90s, 15m, 2h, 2d or a number of seconds)\n"
    "  --tls-cert PEM              serve TLS with this certificate chain (server's certificate first)\n"
    "  --tls-key PEM               the private key of --tls-cert (unencrypted PEM)\n"
    "  --tls-client-ca PEM         require client certificates signed by these CAs (mutual TLS)\n"
    "  --metrics-listen ADDRESS    serve Prometheus metrics over HTTP on host:port at /metrics\n"
    "                              (default: off; plain HTTP, loopback only unless\n"
    "                              --allow-insecure-remote)\n"
    "  --allow-insecure-remote     listen on a non-loopback address without TLS (plain text!)\n"
    "  --max-requests-per-second-per-token R\n"
    "                              requests one token may send per second, in bursts of up to\n"
    "                              2R (default 1000; 0 = no limit); beyond: RESOURCE_EXHAUSTED\n"
    "  --no-auth                   accept calls without a token (loopback addresses only; for\n"
    "                              development): no roles, no audit labels, no rate limit\n"
    "  --reflection                serve gRPC server reflection (open to anyone who can connect;\n"
    "                              it shows the service's schema, no data)\n"
    "  --read-only                 serve a database file that cannot be written: reads only,\n"
    "                              every write is refused (FAILED_PRECONDITION), no lease sweeps\n"
    "  --help                      this text\n"
    "  --version                   the version of ogived and of its database schema\n"
    "\n"
    "Without --tls-cert ogived listens on loopback addresses only, unless --allow-insecure-remote.\n"
    "\n"
    "Every call needs 'authorization: Bearer <token>' with a token of the right role, unless\n"
    "--no-auth. Tokens: ogived token create|list|revoke --db PATH (see 'ogived token --help').\n"
    "The gRPC health service answers without a token.\n"
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
  bool read_only = false;
  ogive::service::ServiceLimits limits;
  bool no_auth = false;
  bool reflection = false;
  ogive::service::AuthOptions auth;
};

[[noreturn]] void Fail(const std::string& message) {
  ogive::service::FlushLog();  // the log lines so far come before the reason for stopping
  std::fprintf(stderr, "ogived: %s\n", message.c_str());
  std::exit(2);
}

// An option that takes a value, and what it does with it (Fail() on a bad one).
struct ValueOption {
  const char* name;
  void (*set)(Flags& flags, const std::string& value);
};

// Every option with a value but the limits (ogive::service::LimitFlags(), tried after these).
constexpr ValueOption kValueOptions[] = {
    {"--db", [](Flags& f, const std::string& v) { f.db = v; }},
    {"--listen", [](Flags& f, const std::string& v) { f.listen = v; }},
    {"--metrics-listen",
     [](Flags& f, const std::string& v) {
       if (v.empty()) Fail("--metrics-listen: needs host:port (e.g. 127.0.0.1:7076)");
       f.metrics_listen = v;
     }},
    {"--tls-cert", [](Flags& f, const std::string& v) { f.transport.tls_cert_path = v; }},
    {"--tls-key", [](Flags& f, const std::string& v) { f.transport.tls_key_path = v; }},
    {"--tls-client-ca", [](Flags& f, const std::string& v) { f.transport.tls_client_ca_path = v; }},
    {"--max-requests-per-second-per-token",
     [](Flags& f, const std::string& v) {
       double& rate = f.auth.max_requests_per_second_per_token;
       if (!absl::SimpleAtod(v, &rate) || !std::isfinite(rate) || rate < 0) {
         Fail(absl::StrCat("--max-requests-per-second-per-token: must be 0 (no limit) or a positive number, got '",
                           v, "'"));
       }
     }},
    {"--sweep-interval",
     [](Flags& f, const std::string& v) {
       absl::StatusOr<absl::Duration> interval = ogive::ParseDurationText("--sweep-interval", v);
       if (!interval.ok()) Fail(std::string(interval.status().message()));
       f.sweep_interval_seconds = absl::ToDoubleSeconds(*interval);
     }},
};

// The option of kValueOptions named `name`, or nullptr.
const ValueOption* FindValueOption(const std::string& name) {
  for (const ValueOption& option : kValueOptions) {
    if (name == option.name) return &option;
  }
  return nullptr;
}

bool IsLimitFlag(const std::string& name) {
  ogive::service::ServiceLimits scratch;
  return !absl::IsNotFound(ogive::service::SetLimitFromFlag(scratch, name, ""));
}

Flags ParseFlags(int argc, char** argv) {
  Flags flags;
  for (int i = 1; i < argc; ++i) {
    const std::string arg = argv[i];
    if (arg == "--help" || arg == "-h") {
      std::fputs(absl::StrCat(kUsage, ogive::service::LimitFlagsHelp(), kSafety).c_str(), stdout);
      std::exit(0);
    }
    if (arg == "--version") {
      std::printf("ogived %s (database schema version %lld)\n", OGIVE_VERSION,
                  static_cast<long long>(ogive::storage::SqliteStore::schema_version()));
      std::exit(0);
    }
    if (arg == "--allow-insecure-remote") {
      flags.transport.allow_insecure_remote = true;
      continue;
    }
    if (arg == "--no-auth") {
      flags.no_auth = true;
      continue;
    }
    if (arg == "--reflection") {
      flags.reflection = true;
      continue;
    }
    if (arg == "--read-only") {
      flags.read_only = true;
      continue;
    }
    const size_t eq = arg.find('=');
    const std::string name = arg.substr(0, eq);
    const ValueOption* option = FindValueOption(name);
    if (option == nullptr && !IsLimitFlag(name)) {
      Fail(absl::StrCat(arg.rfind("-", 0) == 0 ? "unknown option '" : "unexpected argument '", name,
                        "' (see --help)"));
    }
    std::string value;
    if (eq != std::string::npos) {
      value = arg.substr(eq + 1);
    } else if (i + 1 < argc) {
      value = argv[++i];
    } else {
      Fail(absl::StrCat(name, ": needs a value (see --help)"));
    }
    if (option != nullptr) {
      option->set(flags, value);
    } else if (absl::Status s = ogive::service::SetLimitFromFlag(flags.limits, name, value); !s.ok()) {
      Fail(std::string(s.message()));
    }
  }
  if (absl::Status s = flags.limits.Validate(); !s.ok()) Fail(std::string(s.message()));
  if (flags.no_auth && !ogive::service::IsLoopbackAddress(flags.listen)) {
    Fail(absl::StrCat("--no-auth: allowed only on a loopback address (127.0.0.1, [::1], localhost), not on ",
                      flags.listen, "; create tokens with 'ogived token create'"));
  }
  flags.auth.require_tokens = !flags.no_auth;
  return flags;
}

// The signal handler only writes a byte; the main thread does the rest.
int signal_pipe[2];
void OnSignal(int) {
  const char byte = 1;
  [[maybe_unused]] ssize_t ignored = write(signal_pipe[1], &byte, 1);
}

// The gRPC and protobuf libraries' own messages, as lines of the server's log (same format, values
// escaped and cut like every other), instead of their own formats on standard error.
void LogGrpcMessage(gpr_log_func_args* args) {
  const char* severity = args->severity == GPR_LOG_SEVERITY_ERROR  ? "error"
                         : args->severity == GPR_LOG_SEVERITY_INFO ? "info"
                                                                   : "debug";
  ogive::service::LogLine({{"event", "grpc"},
                           {"severity", severity},
                           {"source", absl::StrCat(args->file == nullptr ? "" : args->file, ":", args->line)},
                           {"detail", args->message == nullptr ? "" : args->message}});
}

void LogProtobufMessage(google::protobuf::LogLevel level, const char* file, int line, const std::string& message) {
  const char* severity = level >= google::protobuf::LOGLEVEL_ERROR     ? "error"
                         : level == google::protobuf::LOGLEVEL_WARNING ? "warning"
                                                                       : "info";
  ogive::service::LogLine({{"event", "protobuf"},
                           {"severity", severity},
                           {"source", absl::StrCat(file == nullptr ? "" : file, ":", line)},
                           {"detail", message}});
}

}  // namespace

int main(int argc, char** argv) {
  if (argc > 1 && std::string(argv[1]) == "token") return ogive::RunTokenCommand(argc - 1, argv + 1);
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
  gpr_set_log_function(LogGrpcMessage);
  google::protobuf::SetLogHandler(LogProtobufMessage);
  using ogive::service::LogLine;

  // Counted whether or not they are served: the cost is a few atomic adds per request. Declared
  // before the store, whose writer thread reports each transaction to them until it stops.
  ogive::metrics::MetricRegistry metric_registry;
  ogive::service::ServiceMetrics metrics(&metric_registry, absl::Now());
  ogive::storage::SqliteStore::Options store_options;
  store_options.read_only = flags.read_only;
  store_options.on_transaction = [&metrics](const ogive::storage::SqliteTransactionReport& report) {
    metrics.ObserveTransaction(report);
  };
  absl::StatusOr<std::unique_ptr<ogive::storage::SqliteStore>> store =
      ogive::storage::SqliteStore::Open(flags.db, store_options);
  if (!store.ok()) {
    const std::optional<ogive::Reason> why = ogive::ReasonOf(store.status());
    const bool not_writable = !flags.read_only && why.has_value() && why->reason == ogive::reason::kReadOnly;
    Fail(absl::StrCat("cannot open database '", flags.db, "': ", store.status().message(),
                      not_writable ? " (ogived --read-only serves it for reading)" : ""));
  }
  auto registry = std::make_unique<ogive::service::Registry>(store->get(), flags.limits, &metrics);
  if (absl::Status s = registry->LoadAll(); !s.ok()) Fail(absl::StrCat("cannot restore campaigns: ", s.message()));
  LogLine({{"event", "start"}, {"db", flags.db}, {"campaigns", absl::StrCat(registry->All().size())},
           {"mode", flags.read_only ? "read-only" : "read-write"}});
  metrics.CollectCampaigns(registry.get());
  metrics.CollectStore(store->get());

  absl::StatusOr<std::unique_ptr<ogive::service::Authorizer>> authorizer =
      ogive::service::Authorizer::Create(store->get(), flags.auth, [] { return absl::Now(); });
  if (!authorizer.ok()) Fail(absl::StrCat("cannot read the tokens: ", authorizer.status().message()));
  if (flags.no_auth) {
    LogLine({{"event", "auth"}, {"mode", "off"},
             {"detail", "--no-auth: every call is accepted without a token (loopback only)"}});
  } else {
    const int valid = (*authorizer)->valid_tokens();
    LogLine({{"event", "auth"}, {"mode", "tokens"}, {"valid_tokens", absl::StrCat(valid)},
             {"max_requests_per_second_per_token", absl::StrCat(flags.auth.max_requests_per_second_per_token)},
             {"detail", valid > 0 ? "" : absl::StrCat("no valid token yet: every call is refused until one is made "
                                                      "with 'ogived token create --db ", flags.db, " ...'")}});
  }
  ogive::service::TokenAdmin token_admin(store->get(), [] { return absl::Now(); },
                                         [&authorizer] { (void)(*authorizer)->Reload(); });
  ogive::service::TokenAdminService token_admin_service(&token_admin);
  absl::StatusOr<std::unique_ptr<grpc::Server>> admin_socket = ogive::StartAdminSocket(flags.db, &token_admin_service);
  if (admin_socket.ok()) {
    LogLine({{"event", "admin_socket"}, {"path", ogive::AdminSocketPath(flags.db)}});
  } else {
    LogLine({{"event", "admin_socket"}, {"code", absl::StatusCodeToString(admin_socket.status().code())},
             {"detail", absl::StrCat(admin_socket.status().message(),
                                     "; 'ogived token' works only while this server is stopped")}});
  }

  ogive::service::OgiveService service(registry.get(), authorizer->get(), [] { return absl::Now(); }, &metrics);
  grpc::EnableDefaultHealthCheckService(true);
  if (flags.reflection) grpc::reflection::InitProtoReflectionServerBuilderPlugin();
  grpc::ServerBuilder builder;
  if (!flags.reflection) builder.SetOption(std::make_unique<ogive::WithoutReflection>());
  int port = 0;
  builder.AddListeningPort(flags.listen, transport->credentials, &port);
  builder.SetMaxReceiveMessageSize(ogive::service::TransportReceiveLimit(flags.limits));
  // A port already in use is an error, not a port to share with another server.
  builder.AddChannelArgument(GRPC_ARG_ALLOW_REUSEPORT, 0);
  // The synchronous methods (all but Ask and Tell) block until their commit, so several may run at
  // once. Let the sync server keep its threads as pollers instead of exiting and re-creating them.
  builder.SetSyncServerOption(grpc::ServerBuilder::SyncServerOption::MIN_POLLERS, 4);
  builder.SetSyncServerOption(grpc::ServerBuilder::SyncServerOption::MAX_POLLERS, 512);
  // ogived serves no channelz service, so the per-call channelz counters would be kept for nobody.
  builder.AddChannelArgument(GRPC_ARG_ENABLE_CHANNELZ, 0);
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
    pthread_setname_np(pthread_self(), "ogive-sweeper");
    if (flags.read_only) return;  // lapses are writes
    while (!stop_sweeping.WaitForNotificationWithTimeout(absl::Seconds(flags.sweep_interval_seconds))) {
      for (const auto& host : registry->All()) {
        absl::StatusOr<int> lapsed = host->Sweep(absl::Now());
        if (!lapsed.ok()) {
          LogLine({{"event", "sweep"}, {"campaign", host->name()}, {"code", absl::StatusCodeToString(lapsed.status().code())},
                   {"detail", std::string(lapsed.status().message())}});
        } else if (*lapsed > 0) {
          LogLine({{"event", "sweep"}, {"campaign", host->name()}, {"lapsed", absl::StrCat(*lapsed)}});
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
  if (admin_socket.ok()) {
    (*admin_socket)->Shutdown(std::chrono::system_clock::now() + std::chrono::seconds(2));
    admin_socket->reset();
    ::unlink(ogive::AdminSocketPath(flags.db).c_str());
  }
  if (metrics_server != nullptr) metrics_server->Stop();  // its collectors read the store
  registry.reset();  // its reply thread waits on the store's commits, so it goes first
  const ogive::storage::SqliteStore::Stats stats = (*store)->stats();
  store->reset();  // drains the writer: every acknowledged write is committed
  LogLine({{"event", "stopped"}, {"transactions", absl::StrCat(stats.transactions)},
           {"writes", absl::StrCat(stats.committed_writes)},
           {"writes_per_transaction", absl::StrFormat("%.2f", stats.commits_per_transaction())},
           {"group_commit_waits", absl::StrCat(stats.group_commit_waits)}});
  return 0;
}
