// MetricRegistry: every metric one ogived exports, and their exposition at scrape time. Two kinds of
// family: stored ones (counters, gauges, histograms updated as things happen) and collected ones,
// whose samples a callback computes when scraped (trials by state, store size: values that already
// live elsewhere and would only be copied).
//
// Families are registered at start-up; names are checked then (a bad or repeated name is a bug and
// aborts). Thread-safe: registration, updates and scrapes may run on any thread. Owns its families;
// callbacks must stay callable for the registry's lifetime and must not call back into it.
#ifndef OGIVE_SERVER_METRICS_METRIC_REGISTRY_H_
#define OGIVE_SERVER_METRICS_METRIC_REGISTRY_H_

#include <functional>
#include <memory>
#include <string>
#include <vector>

#include "absl/base/thread_annotations.h"
#include "absl/container/flat_hash_set.h"
#include "absl/synchronization/mutex.h"
#include "server/metrics/exposition.h"
#include "server/metrics/family.h"

namespace ogive::metrics {

class MetricRegistry {
 public:
  // Appends the samples of a collected family (Sample::suffix "" unless a histogram).
  using Callback = std::function<void(std::vector<Sample>&)>;

  MetricRegistry() = default;
  MetricRegistry(const MetricRegistry&) = delete;
  MetricRegistry& operator=(const MetricRegistry&) = delete;

  // REQUIRES (for all of these): a valid, unused metric name; valid label names, "le" excepted for
  // histograms. Counter names should end in _total and every name should carry its unit.
  CounterFamily& AddCounter(const std::string& name, const std::string& help, std::vector<std::string> label_names);
  GaugeFamily& AddGauge(const std::string& name, const std::string& help, std::vector<std::string> label_names);
  // REQUIRES: `upper_bounds` strictly increasing and finite.
  HistogramFamily& AddHistogram(const std::string& name, const std::string& help, std::vector<std::string> label_names,
                                std::vector<double> upper_bounds);
  void AddCollected(const std::string& name, const std::string& help, MetricType type, Callback callback);

  // Every family, in registration order.
  std::vector<FamilySnapshot> Collect() const;
  // Collect() in the text exposition format (exposition.h).
  std::string ExpositionText() const { return WriteText(Collect()); }

 private:
  struct Entry {
    std::unique_ptr<CounterFamily> counter;
    std::unique_ptr<GaugeFamily> gauge;
    std::unique_ptr<HistogramFamily> histogram;
    std::string name, help;  // of a collected family
    MetricType type = MetricType::kGauge;
    Callback callback;
  };
  void Reserve(const std::string& name, const std::vector<std::string>& label_names, bool histogram)
      ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);

  mutable absl::Mutex mu_;
  std::vector<Entry> entries_ ABSL_GUARDED_BY(mu_);
  absl::flat_hash_set<std::string> names_ ABSL_GUARDED_BY(mu_);
};

}  // namespace ogive::metrics

#endif  // OGIVE_SERVER_METRICS_METRIC_REGISTRY_H_
