#include "server/metrics/metric.h"

#include <algorithm>
#include <cmath>

#include "server/base/check.h"

namespace ogive::metrics {
namespace {

void AtomicAdd(std::atomic<double>& target, double delta) {
  double current = target.load(std::memory_order_relaxed);
  while (!target.compare_exchange_weak(current, current + delta, std::memory_order_relaxed)) {
  }
}

}  // namespace

void Gauge::Add(double delta) { AtomicAdd(value_, delta); }

Histogram::Histogram(std::vector<double> upper_bounds)
    : upper_bounds_(std::move(upper_bounds)), counts_(new std::atomic<uint64_t>[upper_bounds_.size() + 1]) {
  for (size_t i = 0; i < upper_bounds_.size(); ++i) {
    OGIVE_CHECK(std::isfinite(upper_bounds_[i]));
    OGIVE_CHECK(i == 0 || upper_bounds_[i - 1] < upper_bounds_[i]);
  }
  for (size_t i = 0; i <= upper_bounds_.size(); ++i) counts_[i].store(0, std::memory_order_relaxed);
}

void Histogram::Observe(double value) {
  // lower_bound: the first bound >= value, so a value equal to a bound counts in that bucket (le).
  const size_t bucket =
      static_cast<size_t>(std::lower_bound(upper_bounds_.begin(), upper_bounds_.end(), value) - upper_bounds_.begin());
  counts_[bucket].fetch_add(1, std::memory_order_relaxed);
  AtomicAdd(sum_, value);
}

std::vector<uint64_t> Histogram::bucket_counts() const {
  std::vector<uint64_t> out(upper_bounds_.size() + 1);
  for (size_t i = 0; i < out.size(); ++i) out[i] = counts_[i].load(std::memory_order_relaxed);
  return out;
}

std::vector<double> ExponentialBuckets(double start, double factor, int count) {
  OGIVE_CHECK(start > 0 && factor > 1 && count >= 1);
  std::vector<double> bounds;
  double b = start;
  for (int i = 0; i < count; ++i, b *= factor) bounds.push_back(b);
  return bounds;
}

}  // namespace ogive::metrics
