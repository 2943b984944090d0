// The metrics endpoint over loopback HTTP: GET /metrics returns the registry's current text with the
// exposition's content type, other paths are 404, a taken port or a bad address is an error, and
// Stop() returns promptly.
#include "server/metrics/metrics_http_server.h"

#include <memory>

#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "httplib.h"

namespace ogive::metrics {
namespace {

using ::testing::HasSubstr;

TEST(MetricsHttpServerTest, ServesTheCurrentExposition) {
  MetricRegistry registry;
  CounterFamily& tells = registry.AddCounter("ogive_tells_total", "Tells.", {"kind"});
  absl::StatusOr<std::unique_ptr<MetricsHttpServer>> server = MetricsHttpServer::Start("127.0.0.1:0", &registry);
  ASSERT_TRUE(server.ok()) << server.status();
  ASSERT_GT((*server)->port(), 0);

  httplib::Client client("127.0.0.1", (*server)->port());
  client.set_connection_timeout(5, 0);
  client.set_read_timeout(5, 0);
  tells.WithLabels({"score"}).Increment(3);
  httplib::Result first = client.Get("/metrics");
  ASSERT_TRUE(first) << httplib::to_string(first.error());
  EXPECT_EQ(first->status, 200);
  EXPECT_EQ(first->get_header_value("Content-Type"), "text/plain; version=0.0.4; charset=utf-8");
  EXPECT_THAT(first->body, HasSubstr("ogive_tells_total{kind=\"score\"} 3\n"));

  tells.WithLabels({"score"}).Increment();
  httplib::Result second = client.Get("/metrics");
  ASSERT_TRUE(second);
  EXPECT_THAT(second->body, HasSubstr("ogive_tells_total{kind=\"score\"} 4\n"));

  httplib::Result other = client.Get("/");
  ASSERT_TRUE(other);
  EXPECT_EQ(other->status, 404);
  (*server)->Stop();
  (*server)->Stop();  // twice is fine
}

TEST(MetricsHttpServerTest, TakenPortAndBadAddressesAreErrors) {
  MetricRegistry registry;
  absl::StatusOr<std::unique_ptr<MetricsHttpServer>> first = MetricsHttpServer::Start("127.0.0.1:0", &registry);
  ASSERT_TRUE(first.ok());
  const std::string taken = "127.0.0.1:" + std::to_string((*first)->port());
  EXPECT_EQ(MetricsHttpServer::Start(taken, &registry).status().code(), absl::StatusCode::kUnavailable);
  EXPECT_EQ(MetricsHttpServer::Start("127.0.0.1", &registry).status().code(), absl::StatusCode::kInvalidArgument);
  EXPECT_EQ(MetricsHttpServer::Start("127.0.0.1:http", &registry).status().code(),
            absl::StatusCode::kInvalidArgument);
  EXPECT_EQ(MetricsHttpServer::Start("127.0.0.1:70000", &registry).status().code(),
            absl::StatusCode::kInvalidArgument);
}

TEST(MetricsHttpServerTest, ServesOnIpv6LoopbackInBrackets) {
  MetricRegistry registry;
  absl::StatusOr<std::unique_ptr<MetricsHttpServer>> server = MetricsHttpServer::Start("[::1]:0", &registry);
  if (!server.ok()) GTEST_SKIP() << "no IPv6 loopback here: " << server.status();
  httplib::Client client("::1", (*server)->port());
  client.set_connection_timeout(5, 0);
  httplib::Result r = client.Get("/metrics");
  ASSERT_TRUE(r) << httplib::to_string(r.error());
  EXPECT_EQ(r->status, 200);
}

}  // namespace
}  // namespace ogive::metrics
