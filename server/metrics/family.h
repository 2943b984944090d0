// Family: the series of one metric, one per combination of label values ("method"="Ask",
// "code"="OK"). A series is created the first time its label values are asked for and lives as long
// as the family; callers may keep the reference.
//
// Thread-safe. Looking a series up takes a shared lock (an exclusive one only to create it); the
// update itself is atomic (metric.h). Owned by the MetricRegistry that created it.
#ifndef OGIVE_SERVER_METRICS_FAMILY_H_
#define OGIVE_SERVER_METRICS_FAMILY_H_

#include <functional>
#include <memory>
#include <string>
#include <utility>
#include <vector>

#include "absl/base/thread_annotations.h"
#include "absl/container/btree_map.h"
#include "absl/synchronization/mutex.h"
#include "server/base/check.h"
#include "server/metrics/exposition.h"
#include "server/metrics/metric.h"

namespace ogive::metrics {

template <typename Series>
class Family {
 public:
  using Factory = std::function<std::unique_ptr<Series>()>;

  Family(std::string name, std::string help, MetricType type, std::vector<std::string> label_names, Factory factory)
      : name_(std::move(name)),
        help_(std::move(help)),
        type_(type),
        label_names_(std::move(label_names)),
        factory_(std::move(factory)) {}

  const std::string& name() const { return name_; }
  const std::vector<std::string>& label_names() const { return label_names_; }

  // The series with these label values, in the order of label_names(). REQUIRES: as many values as
  // label names.
  Series& WithLabels(const std::vector<std::string>& values) {
    OGIVE_CHECK(values.size() == label_names_.size());
    {
      absl::ReaderMutexLock lock(&mu_);
      if (auto it = series_.find(values); it != series_.end()) return *it->second;
    }
    absl::MutexLock lock(&mu_);
    std::unique_ptr<Series>& slot = series_[values];
    if (slot == nullptr) slot = factory_();
    return *slot;
  }

  // Every series, in label-value order, as `to_samples(labels, series, family)` appends them.
  FamilySnapshot Snapshot(const std::function<void(const Labels&, const Series&, FamilySnapshot&)>& to_samples) const {
    FamilySnapshot family{name_, help_, type_, {}};
    absl::ReaderMutexLock lock(&mu_);
    for (const auto& [values, series] : series_) {
      Labels labels;
      for (size_t i = 0; i < values.size(); ++i) labels.emplace_back(label_names_[i], values[i]);
      to_samples(labels, *series, family);
    }
    return family;
  }

 private:
  const std::string name_;
  const std::string help_;
  const MetricType type_;
  const std::vector<std::string> label_names_;
  const Factory factory_;
  mutable absl::Mutex mu_;
  absl::btree_map<std::vector<std::string>, std::unique_ptr<Series>> series_ ABSL_GUARDED_BY(mu_);
};

using CounterFamily = Family<Counter>;
using GaugeFamily = Family<Gauge>;
using HistogramFamily = Family<Histogram>;

}  // namespace ogive::metrics

#endif  // OGIVE_SERVER_METRICS_FAMILY_H_
