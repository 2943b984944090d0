// The three kinds of series ogived exports: Counter (only goes up), Gauge (any value) and Histogram
// (observations counted into fixed buckets, with their sum). Each is one series, i.e. one set of
// label values of a family (family.h).
//
// Thread-safe and lock-free: every update is an atomic operation, so request paths never wait for a
// scrape. A histogram read while it is being updated may show an observation in its buckets but not
// yet in its sum; its count is always the sum of its buckets.
#ifndef OGIVE_SERVER_METRICS_METRIC_H_
#define OGIVE_SERVER_METRICS_METRIC_H_

#include <atomic>
#include <cstdint>
#include <memory>
#include <vector>

#include "absl/types/span.h"

namespace ogive::metrics {

class Counter {
 public:
  void Increment(uint64_t by = 1) { value_.fetch_add(by, std::memory_order_relaxed); }
  uint64_t value() const { return value_.load(std::memory_order_relaxed); }

 private:
  std::atomic<uint64_t> value_{0};
};

class Gauge {
 public:
  void Set(double value) { value_.store(value, std::memory_order_relaxed); }
  void Add(double delta);
  double value() const { return value_.load(std::memory_order_relaxed); }

 private:
  std::atomic<double> value_{0.0};
};

// Observations v land in the first bucket whose upper bound b satisfies v <= b, or in the +Inf
// bucket past the last bound.
class Histogram {
 public:
  // REQUIRES: `upper_bounds` strictly increasing and finite.
  explicit Histogram(std::vector<double> upper_bounds);

  void Observe(double value);

  const std::vector<double>& upper_bounds() const { return upper_bounds_; }
  // Each bucket's own count (not cumulated), upper_bounds().size() + 1 entries, the last for +Inf.
  std::vector<uint64_t> bucket_counts() const;
  double sum() const { return sum_.load(std::memory_order_relaxed); }

 private:
  const std::vector<double> upper_bounds_;
  std::unique_ptr<std::atomic<uint64_t>[]> counts_;
  std::atomic<double> sum_{0.0};
};

// Bucket bounds start, start * factor, ..., `count` of them. REQUIRES: start > 0, factor > 1, count >= 1.
std::vector<double> ExponentialBuckets(double start, double factor, int count);

}  // namespace ogive::metrics

#endif  // OGIVE_SERVER_METRICS_METRIC_H_
