#include "server/metrics/metrics_http_server.h"

#include <chrono>

#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "absl/time/clock.h"
#include "absl/time/time.h"
#include "httplib.h"

namespace ogive::metrics {

absl::StatusOr<std::unique_ptr<MetricsHttpServer>> MetricsHttpServer::Start(const std::string& address,
                                                                             const MetricRegistry* registry) {
  const size_t colon = address.rfind(':');
  int port = -1;
  if (colon == std::string::npos || !absl::SimpleAtoi(address.substr(colon + 1), &port) || port < 0 || port > 65535) {
    return absl::InvalidArgumentError(
        absl::StrCat("--metrics-listen: expected host:port (e.g. 127.0.0.1:7076), got '", address, "'"));
  }
  std::string host = address.substr(0, colon);
  if (host.size() >= 2 && host.front() == '[' && host.back() == ']') host = host.substr(1, host.size() - 2);
  if (host.empty()) host = "0.0.0.0";

  std::unique_ptr<MetricsHttpServer> self(new MetricsHttpServer());
  self->server_ = std::make_unique<httplib::Server>();
  httplib::Server& server = *self->server_;
  // Scrapes are small and rare: two answering threads, short timeouts, no request bodies.
  server.new_task_queue = [] { return new httplib::ThreadPool(2); };
  server.set_read_timeout(5, 0);
  server.set_write_timeout(5, 0);
  server.set_keep_alive_timeout(5);
  server.set_payload_max_length(1 << 16);
  // cpp-httplib's default options add SO_REUSEPORT, which would let a second server share the port
  // and take half the scrapes. SO_REUSEADDR alone lets a restart bind at once.
  server.set_socket_options([](socket_t sock) {
    const int yes = 1;
    setsockopt(sock, SOL_SOCKET, SO_REUSEADDR, &yes, sizeof yes);
  });
  server.Get("/metrics", [registry](const httplib::Request&, httplib::Response& response) {
    response.set_content(registry->ExpositionText(), kContentType);
  });

  if (port == 0) {
    port = server.bind_to_any_port(host);
    if (port < 0) port = 0;
  } else if (!server.bind_to_port(host, port)) {
    port = 0;
  }
  if (port == 0) {
    return absl::UnavailableError(absl::StrCat("--metrics-listen: cannot listen on '", address, "'"));
  }
  self->port_ = port;
  self->thread_ = std::thread([&server] { server.listen_after_bind(); });
  // stop() does nothing until the accept loop runs; wait for it so that Stop() never misses it.
  const absl::Time deadline = absl::Now() + absl::Seconds(10);
  while (!server.is_running() && absl::Now() < deadline) absl::SleepFor(absl::Milliseconds(1));
  return self;
}

void MetricsHttpServer::Stop() {
  if (!thread_.joinable()) return;
  server_->stop();  // Start() waited for the accept loop to run

  thread_.join();
}

MetricsHttpServer::~MetricsHttpServer() { Stop(); }

}  // namespace ogive::metrics
