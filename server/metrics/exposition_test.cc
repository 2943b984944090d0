// The text exposition for known inputs. Expected texts follow the Prometheus text exposition format
// 0.0.4 (Prometheus documentation, "Exposition formats"; from memory of that page): HELP and TYPE
// lines before the samples, label values quoted with \\, \" and \n escaped, help text with \\ and
// \n escaped, cumulative buckets ending in le="+Inf", _count equal to the +Inf bucket.
#include "server/metrics/exposition.h"

#include <cmath>
#include <limits>
#include <vector>

#include "gmock/gmock.h"
#include "gtest/gtest.h"

namespace ogive::metrics {
namespace {

TEST(FormatValueTest, IntegersSpecialsAndShortestDecimals) {
  EXPECT_EQ(FormatValue(0), "0");
  EXPECT_EQ(FormatValue(42), "42");
  EXPECT_EQ(FormatValue(-3), "-3");
  EXPECT_EQ(FormatValue(1e15), "1000000000000000");
  EXPECT_EQ(FormatValue(0.005), "0.005");
  EXPECT_EQ(FormatValue(0.1), "0.1");
  EXPECT_EQ(FormatValue(2.5), "2.5");
  EXPECT_EQ(FormatValue(1.0 / 3.0), "0.3333333333333333");
  EXPECT_EQ(FormatValue(1e300), "1e+300");
  EXPECT_EQ(FormatValue(std::numeric_limits<double>::infinity()), "+Inf");
  EXPECT_EQ(FormatValue(-std::numeric_limits<double>::infinity()), "-Inf");
  EXPECT_EQ(FormatValue(std::nan("")), "NaN");
}

TEST(EscapeTest, LabelValuesEscapeBackslashQuoteAndNewline) {
  EXPECT_EQ(EscapeLabelValue("plain"), "plain");
  EXPECT_EQ(EscapeLabelValue("a\"b"), "a\\\"b");
  EXPECT_EQ(EscapeLabelValue("C:\\dir"), "C:\\\\dir");
  EXPECT_EQ(EscapeLabelValue("two\nlines"), "two\\nlines");
  EXPECT_EQ(EscapeLabelValue("\\\"\n"), "\\\\\\\"\\n");
  EXPECT_EQ(EscapeLabelValue("tab\tstays"), "tab\tstays");
}

TEST(EscapeTest, HelpEscapesBackslashAndNewlineOnly) {
  EXPECT_EQ(EscapeHelp("say \"hi\"\\now\nplease"), "say \"hi\"\\\\now\\nplease");
}

TEST(NamesTest, MetricAndLabelNames) {
  EXPECT_TRUE(IsValidMetricName("ogive_requests_total"));
  EXPECT_TRUE(IsValidMetricName("a:b_c9"));
  EXPECT_FALSE(IsValidMetricName(""));
  EXPECT_FALSE(IsValidMetricName("9lives"));
  EXPECT_FALSE(IsValidMetricName("has-dash"));
  EXPECT_TRUE(IsValidLabelName("method"));
  EXPECT_TRUE(IsValidLabelName("_x1"));
  EXPECT_FALSE(IsValidLabelName("__reserved"));
  EXPECT_FALSE(IsValidLabelName("a:b"));
  EXPECT_FALSE(IsValidLabelName("1a"));
}

TEST(WriteTextTest, CounterAndGaugeFamilies) {
  std::vector<FamilySnapshot> families;
  families.push_back({"ogive_tells_total", "Tells stored, by outcome kind.", MetricType::kCounter,
                      {{"", {{"kind", "score"}}, 7}, {"", {{"kind", "void"}}, 1}}});
  families.push_back({"ogive_store_size_bytes", "Bytes on disk.\nMain file and log.", MetricType::kGauge,
                      {{"", {}, 40960}}});
  families.push_back({"ogive_empty", "No series yet.", MetricType::kGauge, {}});
  EXPECT_EQ(WriteText(families),
            "# HELP ogive_tells_total Tells stored, by outcome kind.\n"
            "# TYPE ogive_tells_total counter\n"
            "ogive_tells_total{kind=\"score\"} 7\n"
            "ogive_tells_total{kind=\"void\"} 1\n"
            "# HELP ogive_store_size_bytes Bytes on disk.\\nMain file and log.\n"
            "# TYPE ogive_store_size_bytes gauge\n"
            "ogive_store_size_bytes 40960\n"
            "# HELP ogive_empty No series yet.\n"
            "# TYPE ogive_empty gauge\n");
}

TEST(WriteTextTest, LabelValuesAreEscapedInSamples) {
  std::vector<FamilySnapshot> families;
  families.push_back({"x", "h", MetricType::kGauge, {{"", {{"a", "q\"b\\n\nend"}, {"b", ""}}, 1.5}}});
  EXPECT_EQ(WriteText(families),
            "# HELP x h\n"
            "# TYPE x gauge\n"
            "x{a=\"q\\\"b\\\\n\\nend\",b=\"\"} 1.5\n");
}

TEST(WriteTextTest, HistogramBucketsAreCumulativeAndEndWithInf) {
  FamilySnapshot family{"ogive_request_duration_seconds", "Latency.", MetricType::kHistogram, {}};
  const std::vector<double> bounds = {0.001, 0.01, 0.1};
  const std::vector<uint64_t> counts = {2, 0, 3, 1};  // per bucket, the last one past 0.1
  AppendHistogramSamples({{"method", "Ask"}}, bounds, counts, 0.75, family);
  EXPECT_EQ(WriteText({family}),
            "# HELP ogive_request_duration_seconds Latency.\n"
            "# TYPE ogive_request_duration_seconds histogram\n"
            "ogive_request_duration_seconds_bucket{method=\"Ask\",le=\"0.001\"} 2\n"
            "ogive_request_duration_seconds_bucket{method=\"Ask\",le=\"0.01\"} 2\n"
            "ogive_request_duration_seconds_bucket{method=\"Ask\",le=\"0.1\"} 5\n"
            "ogive_request_duration_seconds_bucket{method=\"Ask\",le=\"+Inf\"} 6\n"
            "ogive_request_duration_seconds_sum{method=\"Ask\"} 0.75\n"
            "ogive_request_duration_seconds_count{method=\"Ask\"} 6\n");
}

}  // namespace
}  // namespace ogive::metrics
