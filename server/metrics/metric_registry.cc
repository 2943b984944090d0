#include "server/metrics/metric_registry.h"

#include <utility>

#include "server/base/check.h"

namespace ogive::metrics {

void MetricRegistry::Reserve(const std::string& name, const std::vector<std::string>& label_names, bool histogram) {
  OGIVE_CHECK(IsValidMetricName(name));
  OGIVE_CHECK(names_.insert(name).second);
  for (const std::string& label : label_names) {
    OGIVE_CHECK(IsValidLabelName(label));
    OGIVE_CHECK(!(histogram && label == "le"));
  }
}

CounterFamily& MetricRegistry::AddCounter(const std::string& name, const std::string& help,
                                          std::vector<std::string> label_names) {
  absl::MutexLock lock(&mu_);
  Reserve(name, label_names, false);
  Entry entry;
  entry.counter = std::make_unique<CounterFamily>(name, help, MetricType::kCounter, std::move(label_names),
                                                  [] { return std::make_unique<Counter>(); });
  entries_.push_back(std::move(entry));
  return *entries_.back().counter;
}

GaugeFamily& MetricRegistry::AddGauge(const std::string& name, const std::string& help,
                                      std::vector<std::string> label_names) {
  absl::MutexLock lock(&mu_);
  Reserve(name, label_names, false);
  Entry entry;
  entry.gauge = std::make_unique<GaugeFamily>(name, help, MetricType::kGauge, std::move(label_names),
                                              [] { return std::make_unique<Gauge>(); });
  entries_.push_back(std::move(entry));
  return *entries_.back().gauge;
}

HistogramFamily& MetricRegistry::AddHistogram(const std::string& name, const std::string& help,
                                              std::vector<std::string> label_names, std::vector<double> upper_bounds) {
  absl::MutexLock lock(&mu_);
  Reserve(name, label_names, true);
  Histogram check(upper_bounds);  // checks the bounds now, not at the first observation
  Entry entry;
  entry.histogram = std::make_unique<HistogramFamily>(
      name, help, MetricType::kHistogram, std::move(label_names),
      [bounds = std::move(upper_bounds)] { return std::make_unique<Histogram>(bounds); });
  entries_.push_back(std::move(entry));
  return *entries_.back().histogram;
}

void MetricRegistry::AddCollected(const std::string& name, const std::string& help, MetricType type,
                                  Callback callback) {
  absl::MutexLock lock(&mu_);
  Reserve(name, {}, type == MetricType::kHistogram);
  Entry entry;
  entry.name = name;
  entry.help = help;
  entry.type = type;
  entry.callback = std::move(callback);
  entries_.push_back(std::move(entry));
}

std::vector<FamilySnapshot> MetricRegistry::Collect() const {
  absl::ReaderMutexLock lock(&mu_);
  std::vector<FamilySnapshot> out;
  out.reserve(entries_.size());
  for (const Entry& e : entries_) {
    if (e.counter != nullptr) {
      out.push_back(e.counter->Snapshot([](const Labels& labels, const Counter& c, FamilySnapshot& f) {
        f.samples.push_back({"", labels, static_cast<double>(c.value())});
      }));
    } else if (e.gauge != nullptr) {
      out.push_back(e.gauge->Snapshot([](const Labels& labels, const Gauge& g, FamilySnapshot& f) {
        f.samples.push_back({"", labels, g.value()});
      }));
    } else if (e.histogram != nullptr) {
      out.push_back(e.histogram->Snapshot([](const Labels& labels, const Histogram& h, FamilySnapshot& f) {
        AppendHistogramSamples(labels, h.upper_bounds(), h.bucket_counts(), h.sum(), f);
      }));
    } else {
      FamilySnapshot family{e.name, e.help, e.type, {}};
      e.callback(family.samples);
      out.push_back(std::move(family));
    }
  }
  return out;
}

}  // namespace ogive::metrics
