#include "server/metrics/exposition.h"

#include <cmath>
#include <cstdint>
#include <cstdio>
#include <cstdlib>

#include "absl/strings/ascii.h"
#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"
#include "server/base/check.h"

namespace ogive::metrics {

const char* MetricTypeName(MetricType type) {
  switch (type) {
    case MetricType::kCounter:
      return "counter";
    case MetricType::kGauge:
      return "gauge";
    case MetricType::kHistogram:
      return "histogram";
  }
  return "untyped";
}

void AppendHistogramSamples(const Labels& labels, absl::Span<const double> upper_bounds,
                            absl::Span<const uint64_t> bucket_counts, double sum, FamilySnapshot& family) {
  OGIVE_CHECK(bucket_counts.size() == upper_bounds.size() + 1);
  uint64_t cumulative = 0;
  for (size_t i = 0; i <= upper_bounds.size(); ++i) {
    cumulative += bucket_counts[i];
    Labels with_le = labels;
    with_le.emplace_back("le", i < upper_bounds.size() ? FormatValue(upper_bounds[i]) : "+Inf");
    family.samples.push_back({"_bucket", std::move(with_le), static_cast<double>(cumulative)});
  }
  family.samples.push_back({"_sum", labels, sum});
  family.samples.push_back({"_count", labels, static_cast<double>(cumulative)});
}

std::string FormatValue(double value) {
  if (std::isnan(value)) return "NaN";
  if (std::isinf(value)) return value > 0 ? "+Inf" : "-Inf";
  // Counts are the common case; print them as integers (2^53: the last integer a double holds exactly).
  if (value == std::trunc(value) && std::fabs(value) < 9007199254740992.0) {
    return absl::StrCat(static_cast<int64_t>(value));
  }
  char buffer[32];
  for (int precision = 1; precision <= 17; ++precision) {
    std::snprintf(buffer, sizeof buffer, "%.*g", precision, value);
    if (std::strtod(buffer, nullptr) == value) break;
  }
  return buffer;
}

std::string EscapeLabelValue(absl::string_view value) {
  std::string out;
  out.reserve(value.size());
  for (char c : value) {
    if (c == '\\') {
      out += "\\\\";
    } else if (c == '"') {
      out += "\\\"";
    } else if (c == '\n') {
      out += "\\n";
    } else {
      out.push_back(c);
    }
  }
  return out;
}

std::string EscapeHelp(absl::string_view help) {
  std::string out;
  out.reserve(help.size());
  for (char c : help) {
    if (c == '\\') {
      out += "\\\\";
    } else if (c == '\n') {
      out += "\\n";
    } else {
      out.push_back(c);
    }
  }
  return out;
}

bool IsValidMetricName(absl::string_view name) {
  if (name.empty()) return false;
  for (size_t i = 0; i < name.size(); ++i) {
    const char c = name[i];
    const bool ok = absl::ascii_isalpha(c) || c == '_' || c == ':' || (i > 0 && absl::ascii_isdigit(c));
    if (!ok) return false;
  }
  return true;
}

bool IsValidLabelName(absl::string_view name) {
  if (name.empty() || absl::StartsWith(name, "__")) return false;
  for (size_t i = 0; i < name.size(); ++i) {
    const char c = name[i];
    const bool ok = absl::ascii_isalpha(c) || c == '_' || (i > 0 && absl::ascii_isdigit(c));
    if (!ok) return false;
  }
  return true;
}

std::string WriteText(absl::Span<const FamilySnapshot> families) {
  std::string out;
  for (const FamilySnapshot& family : families) {
    absl::StrAppend(&out, "# HELP ", family.name, " ", EscapeHelp(family.help), "\n");
    absl::StrAppend(&out, "# TYPE ", family.name, " ", MetricTypeName(family.type), "\n");
    for (const Sample& sample : family.samples) {
      absl::StrAppend(&out, family.name, sample.suffix);
      if (!sample.labels.empty()) {
        out.push_back('{');
        for (size_t i = 0; i < sample.labels.size(); ++i) {
          absl::StrAppend(&out, i == 0 ? "" : ",", sample.labels[i].first, "=\"",
                          EscapeLabelValue(sample.labels[i].second), "\"");
        }
        out.push_back('}');
      }
      absl::StrAppend(&out, " ", FormatValue(sample.value), "\n");
    }
  }
  return out;
}

}  // namespace ogive::metrics
