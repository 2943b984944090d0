#include "client/plot/scale.h"

#include <algorithm>
#include <cmath>
#include <cstdio>

namespace ogive::plot {
namespace {

// Relative slack when comparing tick values with domain ends (round-off of k * step).
constexpr double kTickSlack = 1e-9;

// "%.*g" without a '+' or leading zeros in the exponent: "2e6", "5e-7".
std::string Compact(double value, int digits) {
  char buffer[64];
  std::snprintf(buffer, sizeof buffer, "%.*g", digits, value);
  std::string s = buffer;
  const size_t e = s.find('e');
  if (e == std::string::npos) return s;
  std::string mantissa = s.substr(0, e);
  std::string exponent = s.substr(e + 1);
  bool negative = false;
  if (!exponent.empty() && (exponent[0] == '+' || exponent[0] == '-')) {
    negative = exponent[0] == '-';
    exponent.erase(0, 1);
  }
  exponent.erase(0, std::min(exponent.find_first_not_of('0'), exponent.size() - 1));
  return mantissa + "e" + (negative ? "-" : "") + exponent;
}

}  // namespace

double Scale::Map(double value) const {
  if (log) {
    if (!(value > 0)) return std::nan("");
    const double l0 = std::log10(domain.lo), l1 = std::log10(domain.hi);
    return from + (std::log10(value) - l0) / (l1 - l0) * (to - from);
  }
  return from + (value - domain.lo) / (domain.hi - domain.lo) * (to - from);
}

double NiceStep(double span, int target) {
  const double raw = span / std::max(target, 1);
  const double magnitude = std::pow(10.0, std::floor(std::log10(raw)));
  const double f = raw / magnitude;
  // The nearest of 1, 2, 5, 10 (on a log scale), so the count of ticks stays near `target`.
  const double nice = f < 1.5 ? 1 : f < 3.5 ? 2 : f < 7.5 ? 5 : 10;
  return nice * magnitude;
}

Domain NiceLinearDomain(double min, double max, int target) {
  if (!std::isfinite(min) || !std::isfinite(max)) return {0, 1};
  if (min > max) std::swap(min, max);
  if (min == max) {
    const double pad = min == 0 ? 1 : std::abs(min) * 0.1;
    min -= pad;
    max += pad;
  }
  const double step = NiceStep(max - min, target);
  return {std::floor(min / step + kTickSlack) * step, std::ceil(max / step - kTickSlack) * step};
}

Domain NiceLogDomain(double min, double max) {
  if (!(min > 0) || !(max > 0) || !std::isfinite(min) || !std::isfinite(max)) return {1, 10};
  if (min > max) std::swap(min, max);
  double lo = std::pow(10.0, std::floor(std::log10(min) + kTickSlack));
  double hi = std::pow(10.0, std::ceil(std::log10(max) - kTickSlack));
  if (hi <= lo) hi = lo * 10;
  return {lo, hi};
}

std::vector<double> LinearTicks(Domain domain, int target) {
  std::vector<double> ticks;
  const double span = domain.hi - domain.lo;
  if (!(span > 0) || !std::isfinite(span)) return ticks;
  const double step = NiceStep(span, target);
  const double slack = step * kTickSlack * 1e3;
  for (double k = std::ceil((domain.lo - slack) / step); k * step <= domain.hi + slack; k += 1) {
    double v = k * step;
    if (std::abs(v) < slack) v = 0;  // no "-0" or 1e-17
    ticks.push_back(v);
    if (ticks.size() > 1000) break;  // a guard; NiceStep keeps it near `target`
  }
  return ticks;
}

std::vector<double> LogTicks(Domain domain) {
  std::vector<double> ticks;
  if (!(domain.lo > 0) || !(domain.hi > domain.lo)) return ticks;
  const int first = static_cast<int>(std::floor(std::log10(domain.lo) + kTickSlack));
  const int last = static_cast<int>(std::ceil(std::log10(domain.hi) - kTickSlack));
  const auto inside = [&](double v) {
    return v >= domain.lo * (1 - kTickSlack) && v <= domain.hi * (1 + kTickSlack);
  };
  std::vector<double> decades;
  for (int e = first; e <= last; ++e) {
    if (inside(std::pow(10.0, e))) decades.push_back(std::pow(10.0, e));
  }
  if (decades.size() >= 4) {
    const size_t stride = (decades.size() + 7) / 8;
    for (size_t i = 0; i < decades.size(); i += stride) ticks.push_back(decades[i]);
    return ticks;
  }
  for (int e = first - 1; e <= last; ++e) {
    for (double m : {1.0, 2.0, 5.0}) {
      const double v = m * std::pow(10.0, e);
      if (inside(v)) ticks.push_back(v);
    }
  }
  return ticks;
}

std::string TickLabel(double value, double step) {
  if (std::abs(value) < std::abs(step) * kTickSlack) return "0";
  const double magnitude = std::max(std::abs(value), std::abs(step));
  if (magnitude >= 1e6 || std::abs(step) < 1e-4) {
    // Enough significant digits to tell neighbours apart: those of the value down to the step.
    const int digits = std::clamp(
        static_cast<int>(std::floor(std::log10(std::abs(value)))) - static_cast<int>(std::floor(std::log10(step))) + 1,
        1, 15);
    return Compact(value, digits);
  }
  const int decimals = std::max(0, static_cast<int>(std::ceil(-std::log10(step) - kTickSlack)));
  char buffer[64];
  std::snprintf(buffer, sizeof buffer, "%.*f", decimals, value);
  return buffer;
}

std::string LogTickLabel(double value) {
  if (value >= 1e-3 && value < 1e5) return Compact(value, 6);
  return Compact(value, 3);
}

}  // namespace ogive::plot
