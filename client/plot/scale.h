// Axis arithmetic for ogive's SVG plots: mapping data values to pixels (linear or log10), domains
// widened to round numbers, and tick positions and labels at round numbers (1, 2 or 5 times a power
// of ten). Pure functions of their arguments; no I/O.
#ifndef OGIVE_CLIENT_PLOT_SCALE_H_
#define OGIVE_CLIENT_PLOT_SCALE_H_

#include <string>
#include <vector>

namespace ogive::plot {

// A data interval [lo, hi] and its place on the page.
struct Domain {
  double lo = 0;
  double hi = 1;
};

// Maps the domain [lo, hi] onto the pixel interval from `from` to `to` (to < from for a y axis, whose
// pixels grow downwards). On a log axis the map is linear in log10(value).
// REQUIRES: lo < hi, and 0 < lo on a log axis.
struct Scale {
  Domain domain;
  double from = 0;
  double to = 1;
  bool log = false;

  // The pixel of `value`; values outside the domain map outside [from, to] (callers clip). A log
  // axis maps values <= 0 to NaN (they have no place on it).
  double Map(double value) const;
};

// The spacing of about `target` ticks over `span` (> 0): 1, 2 or 5 times a power of ten, the one
// nearest span / target.
double NiceStep(double span, int target);

// [min, max] widened outwards to multiples of NiceStep, for about `target` ticks. An empty interval
// (min == max) is widened around its value first; non-finite input gives [0, 1].
Domain NiceLinearDomain(double min, double max, int target);
// [min, max] (both > 0) widened to whole decades; within one decade, to the decade that holds it.
// Input that is not positive and finite gives [1, 10].
Domain NiceLogDomain(double min, double max);

// Tick values inside `domain`: multiples of NiceStep(hi - lo, target).
std::vector<double> LinearTicks(Domain domain, int target);
// Tick values inside `domain` (lo > 0) on a log axis: the powers of ten (every k-th when there are
// more than 8 decades); with fewer than four of them, also 2 and 5 times each power.
std::vector<double> LogTicks(Domain domain);

// A linear tick's label with as few digits as ticks `step` apart need: "0", "0.25", "1500", "-2";
// very large or small values in exponent form ("2e6", "5e-7").
std::string TickLabel(double value, double step);
// A log tick's label: "0.001" .. "10000" plainly, beyond that "1e-6", "2e5".
std::string LogTickLabel(double value);

}  // namespace ogive::plot

#endif  // OGIVE_CLIENT_PLOT_SCALE_H_
