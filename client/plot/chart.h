// Chart: one plot of an ogive report as data (axes, filled bands, bars, lines, steps, dots, rugs),
// and RenderSvg(), which draws it as one self-contained inline <svg> element: a title, a legend, axes
// with round-number ticks and grid lines, and the data clipped to the plot area. No scripts, no
// external references; every piece of text is escaped. Pure: data in, SVG text out.
//
// Drawn elements carry classes the report's tests look for: the plot area's outline is
// <rect class="frame">, the data group is <g class="data">, and inside it "band" (path), "bar"
// (rect), "line" and "step" (polyline), "dots" and "rug" (path), "mark" (line). A
// chart with nothing to draw shows its `empty_message` instead (class "empty").
#ifndef OGIVE_CLIENT_PLOT_CHART_H_
#define OGIVE_CLIENT_PLOT_CHART_H_

#include <optional>
#include <string>
#include <vector>

namespace ogive::plot {

struct Point {
  double x = 0;
  double y = 0;
};

enum class Mark {
  kLine,  // points joined in order; a non-finite y (or y <= 0 on a log axis) breaks the line
  kStep,  // a staircase: each y holds until the next x
  kDots,  // one dot per point
  kRug,   // a short tick at the bottom of the plot area for each x (y is ignored)
};

// A sequence of points drawn one way.
struct Series {
  std::string label = {};  // in the legend; empty = not listed
  std::string color = {};  // any CSS colour, e.g. "#2563eb"
  Mark mark = Mark::kLine;
  std::vector<Point> points = {};
  double width = 1.8;   // line width, or dot diameter, in pixels
  double opacity = 1;
  bool dashed = false;
};

// The area between two curves over the same x values: lower[i] .. upper[i] at x[i].
struct Band {
  std::string label = {};
  std::string color = {};
  double opacity = 0.3;
  std::vector<double> x = {};
  std::vector<double> lower = {};
  std::vector<double> upper = {};
};

// An axis-aligned rectangle in data coordinates, e.g. one segment of a stacked bar.
struct Bar {
  double x0 = 0, x1 = 0;
  double y0 = 0, y1 = 0;
  std::string color = {};
};

struct LegendEntry {
  std::string label = {};
  std::string color = {};
};

struct Axis {
  std::string label = {};              // e.g. "generation", "step size σ (log scale)"
  bool log = false;               // log10 axis; values <= 0 are not drawn
  std::optional<double> lo = {};  // a fixed domain (parameter bounds, probabilities); else from the data
  std::optional<double> hi = {};
  std::vector<std::string> categories = {};  // category names at 0, 1, ... (grades); replaces numeric ticks
  bool whole_numbers = false;     // ticks at whole numbers only (generations, trial numbers)
};

struct Chart {
  std::string id = {};     // unique within the page: letters, digits, '-' (used for the clip path id)
  std::string title = {};
  std::string subtitle = {};  // a smaller line under the title, e.g. the unit and bounds; may be empty
  Axis x;
  Axis y;
  std::vector<Band> bands = {};    // drawn first
  std::vector<Bar> bars = {};
  std::vector<Series> series = {};  // drawn last, in order
  std::vector<double> x_marks = {};  // vertical dashed lines (e.g. restarts)
  std::string x_marks_label = {};    // their legend entry; empty = not listed
  std::vector<LegendEntry> extra_legend = {};  // for bars, which carry no label of their own
  std::string empty_message = "nothing to plot yet";
  int width = 560;
  int height = 280;
};

// The chart as an <svg class="plot" ...> element.
std::string RenderSvg(const Chart& chart);

}  // namespace ogive::plot

#endif  // OGIVE_CLIENT_PLOT_CHART_H_
