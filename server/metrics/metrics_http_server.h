// MetricsHttpServer: serves a MetricRegistry's exposition on `GET /metrics` over plain HTTP, for
// Prometheus to scrape (Content-Type `text/plain; version=0.0.4; charset=utf-8`). Every other path
// is 404. Built on cpp-httplib (Debian's libcpp-httplib-dev), a small, well-kept HTTP server, rather
// than one of our own.
//
// Owns its listening socket and its threads (one accepting, two answering); the registry outlives it.
// Thread-safe. Stop() (or the destructor) closes the socket and waits for the threads.
#ifndef OGIVE_SERVER_METRICS_METRICS_HTTP_SERVER_H_
#define OGIVE_SERVER_METRICS_METRICS_HTTP_SERVER_H_

#include <memory>
#include <string>
#include <thread>

#include "absl/status/statusor.h"
#include "server/metrics/metric_registry.h"

namespace httplib {
class Server;
}  // namespace httplib

namespace ogive::metrics {

class MetricsHttpServer {
 public:
  // The content type of the exposition.
  static constexpr char kContentType[] = "text/plain; version=0.0.4; charset=utf-8";

  // Listens on `address` ("host:port", "[::1]:port"; port 0 picks a free one) and serves until
  // stopped. INVALID_ARGUMENT for an address without a port; UNAVAILABLE when it cannot be bound
  // (in use, not an address of this host).
  static absl::StatusOr<std::unique_ptr<MetricsHttpServer>> Start(const std::string& address,
                                                                  const MetricRegistry* registry);
  ~MetricsHttpServer();
  MetricsHttpServer(const MetricsHttpServer&) = delete;
  MetricsHttpServer& operator=(const MetricsHttpServer&) = delete;

  int port() const { return port_; }
  void Stop();

 private:
  MetricsHttpServer() = default;

  std::unique_ptr<httplib::Server> server_;
  std::thread thread_;
  int port_ = 0;
};

}  // namespace ogive::metrics

#endif  // OGIVE_SERVER_METRICS_METRICS_HTTP_SERVER_H_
