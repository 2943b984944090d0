// The registry's families: series by label values, histogram bucketing at the bounds, collected
// families, registration order, and counts that add up under concurrent updates.
#include "server/metrics/metric_registry.h"

#include <thread>
#include <vector>

#include "gmock/gmock.h"
#include "gtest/gtest.h"

namespace ogive::metrics {
namespace {

using ::testing::ElementsAre;
using ::testing::HasSubstr;

TEST(HistogramTest, ValueOnABoundCountsInThatBucket) {
  Histogram h({1, 2, 4});
  for (double v : {0.5, 1.0, 1.5, 2.0, 4.0, 4.5, 100.0}) h.Observe(v);
  EXPECT_THAT(h.bucket_counts(), ElementsAre(2, 2, 1, 2));
  EXPECT_DOUBLE_EQ(h.sum(), 113.5);
}

TEST(HistogramTest, ExponentialBuckets) {
  EXPECT_THAT(ExponentialBuckets(1, 2, 5), ElementsAre(1, 2, 4, 8, 16));
}

TEST(HistogramDeathTest, BoundsMustIncrease) {
  EXPECT_DEATH(Histogram({1, 1}), "check failed");
}

TEST(MetricRegistryTest, FamiliesInRegistrationOrderSeriesInLabelOrder) {
  MetricRegistry registry;
  CounterFamily& requests = registry.AddCounter("ogive_requests_total", "Requests.", {"method", "code"});
  GaugeFamily& leases = registry.AddGauge("ogive_open_leases", "Leases.", {"campaign"});
  registry.AddCollected("ogive_store_size_bytes", "Size.", MetricType::kGauge,
                        [](std::vector<Sample>& samples) { samples.push_back({"", {}, 4096}); });
  requests.WithLabels({"Tell", "OK"}).Increment(2);
  requests.WithLabels({"Ask", "OK"}).Increment();
  requests.WithLabels({"Ask", "NOT_FOUND"}).Increment();
  requests.WithLabels({"Ask", "OK"}).Increment();
  leases.WithLabels({"kiln"}).Set(3);
  EXPECT_EQ(registry.ExpositionText(),
            "# HELP ogive_requests_total Requests.\n"
            "# TYPE ogive_requests_total counter\n"
            "ogive_requests_total{method=\"Ask\",code=\"NOT_FOUND\"} 1\n"
            "ogive_requests_total{method=\"Ask\",code=\"OK\"} 2\n"
            "ogive_requests_total{method=\"Tell\",code=\"OK\"} 2\n"
            "# HELP ogive_open_leases Leases.\n"
            "# TYPE ogive_open_leases gauge\n"
            "ogive_open_leases{campaign=\"kiln\"} 3\n"
            "# HELP ogive_store_size_bytes Size.\n"
            "# TYPE ogive_store_size_bytes gauge\n"
            "ogive_store_size_bytes 4096\n");
}

TEST(MetricRegistryTest, HistogramFamilyExposesEverySeries) {
  MetricRegistry registry;
  HistogramFamily& latency = registry.AddHistogram("lat_seconds", "L.", {"method"}, {0.1, 1});
  latency.WithLabels({"Ask"}).Observe(0.05);
  latency.WithLabels({"Ask"}).Observe(5);
  const std::string text = registry.ExpositionText();
  EXPECT_THAT(text, HasSubstr("lat_seconds_bucket{method=\"Ask\",le=\"0.1\"} 1\n"
                              "lat_seconds_bucket{method=\"Ask\",le=\"1\"} 1\n"
                              "lat_seconds_bucket{method=\"Ask\",le=\"+Inf\"} 2\n"
                              "lat_seconds_sum{method=\"Ask\"} 5.05\n"
                              "lat_seconds_count{method=\"Ask\"} 2\n"));
}

TEST(MetricRegistryTest, SameLabelValuesGiveTheSameSeries) {
  MetricRegistry registry;
  CounterFamily& f = registry.AddCounter("c_total", "C.", {"k"});
  EXPECT_EQ(&f.WithLabels({"a"}), &f.WithLabels({"a"}));
  EXPECT_NE(&f.WithLabels({"a"}), &f.WithLabels({"b"}));
}

TEST(MetricRegistryDeathTest, BadOrRepeatedNamesAbort) {
  MetricRegistry registry;
  registry.AddCounter("c_total", "C.", {});
  EXPECT_DEATH(registry.AddGauge("c_total", "again", {}), "check failed");
  EXPECT_DEATH(registry.AddGauge("bad-name", "x", {}), "check failed");
  EXPECT_DEATH(registry.AddGauge("g", "x", {"__reserved"}), "check failed");
  EXPECT_DEATH(registry.AddHistogram("h_seconds", "x", {"le"}, {1}), "check failed");
  CounterFamily& f = registry.AddCounter("two_total", "x", {"a", "b"});
  EXPECT_DEATH(f.WithLabels({"only one"}), "check failed");
}

TEST(MetricRegistryTest, ConcurrentUpdatesAndScrapesAddUp) {
  MetricRegistry registry;
  CounterFamily& counter = registry.AddCounter("c_total", "C.", {"thread"});
  HistogramFamily& histogram = registry.AddHistogram("h_seconds", "H.", {}, {0.5});
  constexpr int kThreads = 4, kPerThread = 20000;
  // The series exist before the scraper starts, so every scrape sees them (a series made lazily by
  // the first observation would be missing from a scrape that runs first).
  histogram.WithLabels({});
  std::vector<std::thread> threads;
  for (int t = 0; t < kThreads; ++t) {
    threads.emplace_back([&, t] {
      for (int i = 0; i < kPerThread; ++i) {
        counter.WithLabels({t % 2 == 0 ? "even" : "odd"}).Increment();
        histogram.WithLabels({}).Observe(i % 2 == 0 ? 0.25 : 1.0);
      }
    });
  }
  std::thread scraper([&] {
    for (int i = 0; i < 50; ++i) {
      for (const FamilySnapshot& f : registry.Collect()) {
        if (f.name != "h_seconds") continue;
        // Buckets are read one by one while observations land, but the count is their sum.
        ASSERT_EQ(f.samples.size(), 4u);
        EXPECT_LE(f.samples[0].value, f.samples[1].value);
        EXPECT_EQ(f.samples[1].value, f.samples[3].value);
      }
    }
  });
  for (std::thread& t : threads) t.join();
  scraper.join();
  EXPECT_EQ(counter.WithLabels({"even"}).value(), 2u * kPerThread);
  EXPECT_EQ(counter.WithLabels({"odd"}).value(), 2u * kPerThread);
  EXPECT_THAT(histogram.WithLabels({}).bucket_counts(), ElementsAre(2 * kPerThread, 2 * kPerThread));
  EXPECT_DOUBLE_EQ(histogram.WithLabels({}).sum(), kThreads * kPerThread / 2 * 1.25);
}

}  // namespace
}  // namespace ogive::metrics
