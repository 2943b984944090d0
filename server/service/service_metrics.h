// ServiceMetrics: what ogived counts about its requests, its campaigns and its store, as Prometheus
// metrics in a MetricRegistry (docs/operations.md, "Metrics", lists them). Counters and histograms
// are updated as things happen: by the gRPC adapter once a call has its status (one place per
// method), by the campaign hosts once a change committed, and by the store after each transaction.
// Gauges of campaigns and of the store are collected at scrape time from the objects that hold them.
//
// Thread-safe. The metric registry outlives this object; so do the Registry and the store given to
// the Collect* calls, until the registry is no longer scraped.
#ifndef OGIVE_SERVER_SERVICE_SERVICE_METRICS_H_
#define OGIVE_SERVER_SERVICE_SERVICE_METRICS_H_

#include <string>

#include "absl/status/status.h"
#include "absl/time/time.h"
#include "server/metrics/metric_registry.h"
#include "server/service/change_tally.h"
#include "storage/sqlite_store.h"

namespace ogive::service {

class Registry;

class ServiceMetrics {
 public:
  // Registers every stored family in `registry`, and the process start time `started`.
  ServiceMetrics(metrics::MetricRegistry* registry, absl::Time started);

  // One finished call of `method` (the gRPC method name, e.g. "Ask") with `code`, `seconds` after
  // it arrived.
  void ObserveRequest(const std::string& method, absl::StatusCode code, double seconds);
  // A campaign change that committed.
  void ObserveCommitted(const ChangeTally& tally);
  // One write transaction of the store (SqliteStoreOptions::on_transaction).
  void ObserveTransaction(const storage::SqliteTransactionReport& report);

  // Registers the gauges collected from `campaigns` at scrape time: campaigns by phase, trials by state
  // and open leases per campaign, and each campaign's generation.
  void CollectCampaigns(const Registry* campaigns);
  // Registers the store's counters, queue and size, collected at scrape time.
  void CollectStore(storage::SqliteStore* store);

 private:
  metrics::MetricRegistry* const registry_;
  metrics::CounterFamily& requests_;
  metrics::HistogramFamily& request_seconds_;
  metrics::CounterFamily& tells_;
  metrics::Counter& lapses_;
  metrics::Counter& generations_;
  metrics::Counter& restarts_;
  metrics::Histogram& commit_seconds_;
  metrics::Histogram& writes_per_transaction_;
};

}  // namespace ogive::service

#endif  // OGIVE_SERVER_SERVICE_SERVICE_METRICS_H_
