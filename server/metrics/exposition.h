// Exposition: a point-in-time copy of metric families and its rendering in the Prometheus text
// exposition format, version 0.0.4 (the format described in the Prometheus documentation,
// "Exposition formats"; the details below are from memory of that page).
//
//   # HELP <name> <help, with \ and newline escaped>
//   # TYPE <name> counter|gauge|histogram
//   <name><suffix>{<label>="<value, with \ " and newline escaped>",...} <value>
//
// Values are Go-style floats: +Inf, -Inf, NaN, or a decimal number. A histogram family carries
// <name>_bucket{le="..."} samples (cumulative, the last one le="+Inf"), <name>_sum and <name>_count.
//
// Plain values; no shared state.
#ifndef OGIVE_SERVER_METRICS_EXPOSITION_H_
#define OGIVE_SERVER_METRICS_EXPOSITION_H_

#include <cstdint>
#include <string>
#include <utility>
#include <vector>

#include "absl/strings/string_view.h"
#include "absl/types/span.h"

namespace ogive::metrics {

enum class MetricType { kCounter, kGauge, kHistogram };
const char* MetricTypeName(MetricType type);  // "counter", "gauge", "histogram"

// Label name -> value pairs, in the order they are written.
using Labels = std::vector<std::pair<std::string, std::string>>;

// One line of a family: the family's name plus `suffix` ("" or "_bucket", "_sum", "_count").
struct Sample {
  std::string suffix;
  Labels labels;
  double value = 0.0;
};

// One family as it is at the moment of a scrape.
struct FamilySnapshot {
  std::string name;
  std::string help;
  MetricType type = MetricType::kGauge;
  std::vector<Sample> samples;
};

// Appends the samples of one histogram series: a _bucket sample per bound in `upper_bounds` plus
// le="+Inf", then _sum and _count. `bucket_counts` holds the count of each bucket on its own (not
// cumulated), one more entry than `upper_bounds` (the last is the +Inf bucket); the output is
// cumulative and _count is the +Inf bucket's value. REQUIRES: sizes as described.
void AppendHistogramSamples(const Labels& labels, absl::Span<const double> upper_bounds,
                            absl::Span<const uint64_t> bucket_counts, double sum, FamilySnapshot& family);

// The text exposition of `families`, in the order given; every line ends with a newline.
std::string WriteText(absl::Span<const FamilySnapshot> families);

// A number as the format writes it: "+Inf", "-Inf", "NaN", an integer without a decimal point when
// the value is one (below 2^53), otherwise the shortest decimal that reads back to the same double.
std::string FormatValue(double value);

// Escaping per the format: in label values \ -> \\, " -> \", newline -> \n; in help text only \ and
// newline.
std::string EscapeLabelValue(absl::string_view value);
std::string EscapeHelp(absl::string_view help);

// Whether `name` is a valid metric name ([a-zA-Z_:][a-zA-Z0-9_:]*) or label name
// ([a-zA-Z_][a-zA-Z0-9_]*, not starting with "__", which is reserved).
bool IsValidMetricName(absl::string_view name);
bool IsValidLabelName(absl::string_view name);

}  // namespace ogive::metrics

#endif  // OGIVE_SERVER_METRICS_EXPOSITION_H_
