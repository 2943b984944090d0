// Prints an exposition with awkward label values and help text, for exposition_parse_test.py to read
// back with Debian's python3-prometheus-client.
#include <cstdio>

#include "server/metrics/metric_registry.h"

int main() {
  ogive::metrics::MetricRegistry registry;
  ogive::metrics::CounterFamily& c =
      registry.AddCounter("sample_events_total", "Help with a \\ backslash\nand a second line.", {"value"});
  c.WithLabels({"quote \" inside"}).Increment(1);
  c.WithLabels({"back\\slash"}).Increment(2);
  c.WithLabels({"new\nline"}).Increment(3);
  c.WithLabels({"all three \\\"\n end"}).Increment(4);
  c.WithLabels({"unicode \xc3\xa9t\xc3\xa9"}).Increment(5);
  ogive::metrics::GaugeFamily& g = registry.AddGauge("sample_ratio", "A gauge.", {});
  g.WithLabels({}).Set(0.1);
  ogive::metrics::HistogramFamily& h =
      registry.AddHistogram("sample_duration_seconds", "A histogram.", {"kind"}, {0.001, 0.25, 1});
  for (double v : {0.0005, 0.1, 0.3, 7.0}) h.WithLabels({"x"}).Observe(v);
  std::fputs(registry.ExpositionText().c_str(), stdout);
  return 0;
}
