#include "client/plot/chart.h"

#include <algorithm>
#include <cmath>
#include <limits>

#include "absl/strings/str_cat.h"
#include "client/plot/markup.h"
#include "client/plot/scale.h"

namespace ogive::plot {
namespace {

using absl::StrAppend;
using absl::StrCat;

// Layout, in pixels. Text widths are estimated (no font metrics without a browser): an average
// character of the 11 px sans-serif used for ticks and legends is about 6.2 px wide.
constexpr double kCharWidth = 6.2;
constexpr double kRightMargin = 14;
constexpr double kBottomMargin = 40;
constexpr double kTitleHeight = 20;
constexpr double kLegendRowHeight = 16;
constexpr double kRugLength = 7;
constexpr int kXTicks = 6;
constexpr int kYTicks = 5;
// Pixel coordinates are kept within this bound so that an extreme value cannot produce a number SVG
// renderers choke on; the clip path hides everything outside the plot area anyway.
constexpr double kMaxPixel = 1e5;

double ClampPixel(double p) { return std::clamp(p, -kMaxPixel, kMaxPixel); }

// The extent of finite values (positive ones on a log axis).
struct Extent {
  double min = std::numeric_limits<double>::infinity();
  double max = -std::numeric_limits<double>::infinity();
  bool log = false;
  void Add(double v) {
    if (!std::isfinite(v) || (log && !(v > 0))) return;
    min = std::min(min, v);
    max = std::max(max, v);
  }
  bool empty() const { return !(min <= max); }
};

bool Usable(double v, bool log) { return std::isfinite(v) && (!log || v > 0); }

Domain ChooseDomain(const Axis& axis, const Extent& extent, bool tight) {
  if (!axis.categories.empty()) return {-0.5, static_cast<double>(axis.categories.size()) - 0.5};
  double min = axis.lo.value_or(extent.empty() ? (axis.log ? 1 : 0) : extent.min);
  double max = axis.hi.value_or(extent.empty() ? (axis.log ? 10 : 1) : extent.max);
  if (axis.lo.has_value() && axis.hi.has_value() && min < max) return {min, max};
  if (axis.log) {
    Domain d = NiceLogDomain(min, max);
    if (axis.lo.has_value() && *axis.lo > 0) d.lo = *axis.lo;
    if (axis.hi.has_value() && *axis.hi > d.lo) d.hi = *axis.hi;
    return d;
  }
  if (tight && min < max) return {min, max};
  if (tight) return axis.whole_numbers ? Domain{min - 1, max + 1} : NiceLinearDomain(min, max, kXTicks);
  Domain d = NiceLinearDomain(min, max, kYTicks);
  if (axis.lo.has_value() && *axis.lo < d.hi) d.lo = *axis.lo;
  if (axis.hi.has_value() && *axis.hi > d.lo) d.hi = *axis.hi;
  return d;
}

struct Tick {
  double value;
  std::string label;
};

std::vector<Tick> Ticks(const Axis& axis, Domain domain, int target) {
  std::vector<Tick> ticks;
  if (!axis.categories.empty()) {
    for (size_t i = 0; i < axis.categories.size(); ++i) {
      ticks.push_back({static_cast<double>(i), Shorten(axis.categories[i], 14)});
    }
    return ticks;
  }
  if (axis.log) {
    for (double v : LogTicks(domain)) ticks.push_back({v, LogTickLabel(v)});
    return ticks;
  }
  double step = NiceStep(domain.hi - domain.lo, target);
  std::vector<double> values = LinearTicks(domain, target);
  if (axis.whole_numbers && step < 1) {
    values.clear();
    step = 1;
    for (double v = std::ceil(domain.lo); v <= domain.hi; v += 1) values.push_back(v);
  }
  for (double v : values) ticks.push_back({v, TickLabel(v, step)});
  return ticks;
}

// Splits `points` into runs of drawable points (a non-drawable one ends a run).
std::vector<std::vector<Point>> Runs(const std::vector<Point>& points, bool x_log, bool y_log) {
  std::vector<std::vector<Point>> runs(1);
  for (const Point& p : points) {
    if (Usable(p.x, x_log) && Usable(p.y, y_log)) {
      runs.back().push_back(p);
    } else if (!runs.back().empty()) {
      runs.emplace_back();
    }
  }
  if (runs.back().empty()) runs.pop_back();
  return runs;
}

struct Frame {
  Scale x, y;
  double left, right, top, bottom;
  std::string Xy(double x_value, double y_value) const {
    return StrCat(Px(ClampPixel(x.Map(x_value))), ",", Px(ClampPixel(y.Map(y_value))));
  }
};

void DrawBand(const Band& band, const Frame& f, std::string* out) {
  // Runs of x where both curves are drawable; each run is one closed outline.
  const size_t n = std::min({band.x.size(), band.lower.size(), band.upper.size()});
  size_t i = 0;
  while (i < n) {
    std::vector<size_t> run;
    for (; i < n; ++i) {
      const bool ok = Usable(band.x[i], f.x.log) && Usable(band.lower[i], f.y.log) && Usable(band.upper[i], f.y.log);
      if (!ok) break;
      run.push_back(i);
    }
    ++i;
    if (run.empty()) continue;
    std::string d;
    for (size_t k = 0; k < run.size(); ++k) StrAppend(&d, k == 0 ? "M" : "L", f.Xy(band.x[run[k]], band.upper[run[k]]));
    for (size_t k = run.size(); k-- > 0;) StrAppend(&d, "L", f.Xy(band.x[run[k]], band.lower[run[k]]));
    if (run.size() == 1) {
      // One x: a vertical bar two pixels wide, so that a single generation still shows.
      const double px = f.x.Map(band.x[run[0]]);
      d = StrCat("M", Px(px - 1), ",", Px(ClampPixel(f.y.Map(band.upper[run[0]]))), "H", Px(px + 1), "V",
                 Px(ClampPixel(f.y.Map(band.lower[run[0]]))), "H", Px(px - 1));
    }
    StrAppend(out, "<path class=\"band\" d=\"", d, "Z\" fill=\"", Escape(band.color), "\" fill-opacity=\"",
              band.opacity, "\" stroke=\"none\"/>\n");
  }
}

void DrawBar(const Bar& bar, const Frame& f, std::string* out) {
  if (!Usable(bar.x0, f.x.log) || !Usable(bar.x1, f.x.log) || !Usable(bar.y0, f.y.log) || !Usable(bar.y1, f.y.log)) {
    return;
  }
  const double x0 = ClampPixel(f.x.Map(bar.x0)), x1 = ClampPixel(f.x.Map(bar.x1));
  const double y0 = ClampPixel(f.y.Map(bar.y0)), y1 = ClampPixel(f.y.Map(bar.y1));
  StrAppend(out, "<rect class=\"bar\" x=\"", Px(std::min(x0, x1)), "\" y=\"", Px(std::min(y0, y1)), "\" width=\"",
            Px(std::abs(x1 - x0)), "\" height=\"", Px(std::abs(y1 - y0)), "\" fill=\"", Escape(bar.color), "\"/>\n");
}

void DrawSeries(const Series& s, const Frame& f, std::string* out) {
  const std::string color = Escape(s.color);
  const std::string style = StrCat(" stroke=\"", color, "\" stroke-width=\"", s.width, "\"",
                                   s.opacity < 1 ? StrCat(" stroke-opacity=\"", s.opacity, "\"") : "",
                                   s.dashed ? " stroke-dasharray=\"5 3\"" : "");
  switch (s.mark) {
    case Mark::kLine:
    case Mark::kStep:
      for (const std::vector<Point>& run : Runs(s.points, f.x.log, f.y.log)) {
        std::string points;
        for (size_t i = 0; i < run.size(); ++i) {
          if (s.mark == Mark::kStep && i > 0) StrAppend(&points, " ", f.Xy(run[i].x, run[i - 1].y));
          StrAppend(&points, i == 0 ? "" : " ", f.Xy(run[i].x, run[i].y));
        }
        StrAppend(out, "<polyline class=\"", s.mark == Mark::kStep ? "step" : "line", "\" points=\"", points,
                  "\" fill=\"none\"", style, " stroke-linejoin=\"round\"/>\n");
      }
      break;
    case Mark::kDots: {
      // Zero-length subpaths with round caps: one path element for any number of dots.
      std::string d;
      for (const Point& p : s.points) {
        if (!Usable(p.x, f.x.log) || !Usable(p.y, f.y.log)) continue;
        StrAppend(&d, "M", f.Xy(p.x, p.y), "h0");
      }
      if (!d.empty()) {
        StrAppend(out, "<path class=\"dots\" d=\"", d, "\" fill=\"none\"", style, " stroke-linecap=\"round\"/>\n");
      }
      break;
    }
    case Mark::kRug: {
      std::string d;
      for (const Point& p : s.points) {
        if (!Usable(p.x, f.x.log)) continue;
        StrAppend(&d, "M", Px(ClampPixel(f.x.Map(p.x))), ",", Px(f.bottom), "v-", Px(kRugLength));
      }
      if (!d.empty()) StrAppend(out, "<path class=\"rug\" d=\"", d, "\" fill=\"none\"", style, "/>\n");
      break;
    }
  }
}

bool HasDrawable(const Chart& c) {
  const bool xl = c.x.log, yl = c.y.log;
  for (const Band& b : c.bands) {
    for (size_t i = 0; i < std::min({b.x.size(), b.lower.size(), b.upper.size()}); ++i) {
      if (Usable(b.x[i], xl) && Usable(b.lower[i], yl) && Usable(b.upper[i], yl)) return true;
    }
  }
  for (const Bar& b : c.bars) {
    if (Usable(b.x0, xl) && Usable(b.x1, xl) && Usable(b.y0, yl) && Usable(b.y1, yl)) return true;
  }
  for (const Series& s : c.series) {
    for (const Point& p : s.points) {
      if (Usable(p.x, xl) && (s.mark == Mark::kRug || Usable(p.y, yl))) return true;
    }
  }
  return false;
}

struct LegendItem {
  std::string label;
  std::string color;
  enum { kArea, kLine, kDashed, kDot } swatch;
  double opacity;
};

std::vector<LegendItem> LegendItems(const Chart& c) {
  std::vector<LegendItem> items;
  for (const Band& b : c.bands) {
    if (!b.label.empty()) items.push_back({b.label, b.color, LegendItem::kArea, std::max(b.opacity, 0.35)});
  }
  for (const LegendEntry& e : c.extra_legend) items.push_back({e.label, e.color, LegendItem::kArea, 1});
  for (const Series& s : c.series) {
    if (s.label.empty()) continue;
    const auto swatch = s.mark == Mark::kDots ? LegendItem::kDot
                        : s.dashed           ? LegendItem::kDashed
                                             : LegendItem::kLine;
    items.push_back({s.label, s.color, swatch, std::max(s.opacity, 0.6)});
  }
  if (!c.x_marks.empty() && !c.x_marks_label.empty()) {
    items.push_back({c.x_marks_label, "#6b7280", LegendItem::kDashed, 1});
  }
  return items;
}

}  // namespace

std::string RenderSvg(const Chart& c) {
  const double width = c.width, height = c.height;
  Extent xe{.log = c.x.log}, ye{.log = c.y.log};
  for (const Band& b : c.bands) {
    for (double v : b.x) xe.Add(v);
    for (double v : b.lower) ye.Add(v);
    for (double v : b.upper) ye.Add(v);
  }
  for (const Bar& b : c.bars) {
    xe.Add(b.x0);
    xe.Add(b.x1);
    ye.Add(b.y0);
    ye.Add(b.y1);
  }
  for (const Series& s : c.series) {
    for (const Point& p : s.points) {
      xe.Add(p.x);
      if (s.mark != Mark::kRug) ye.Add(p.y);
    }
  }
  for (double v : c.x_marks) xe.Add(v);
  const Domain xd = ChooseDomain(c.x, xe, /*tight=*/true);
  const Domain yd = ChooseDomain(c.y, ye, /*tight=*/false);
  const std::vector<Tick> x_ticks = Ticks(c.x, xd, kXTicks);
  const std::vector<Tick> y_ticks = Ticks(c.y, yd, kYTicks);

  // The legend, wrapped into rows across the width.
  const std::vector<LegendItem> legend = LegendItems(c);
  std::vector<std::pair<double, double>> legend_at;  // (x, row) of each item
  {
    double x = 8;
    int row = 0;
    for (const LegendItem& item : legend) {
      const double w = 22 + kCharWidth * static_cast<double>(Shorten(item.label, 40).size());
      if (x + w > width - kRightMargin && x > 8) {
        x = 8;
        ++row;
      }
      legend_at.push_back({x, row});
      x += w + 10;
    }
  }
  const int legend_rows = legend.empty() ? 0 : static_cast<int>(legend_at.back().second) + 1;
  const double subtitle_height = c.subtitle.empty() ? 0 : 14;
  const double legend_top = kTitleHeight + subtitle_height + 4;
  size_t widest_y_label = 0;
  for (const Tick& t : y_ticks) widest_y_label = std::max(widest_y_label, t.label.size());

  Frame f;
  f.left = std::min(34 + kCharWidth * static_cast<double>(widest_y_label), width / 3);
  f.right = width - kRightMargin;
  f.top = legend_top + legend_rows * kLegendRowHeight + 6;
  f.bottom = height - kBottomMargin;
  f.x = Scale{xd, f.left, f.right, c.x.log};
  f.y = Scale{yd, f.bottom, f.top, c.y.log};

  const std::string id = Escape(c.id);
  std::string out = StrCat("<svg class=\"plot\" id=\"", id, "\" width=\"", c.width, "\" height=\"", c.height,
                           "\" viewBox=\"0 0 ", c.width, " ", c.height, "\" role=\"img\" aria-labelledby=\"", id,
                           "-title\" font-family=\"sans-serif\">\n");
  StrAppend(&out, "<title id=\"", id, "-title\">", Escape(c.title), "</title>\n");
  StrAppend(&out, "<defs><clipPath id=\"", id, "-clip\"><rect x=\"", Px(f.left), "\" y=\"", Px(f.top),
            "\" width=\"", Px(f.right - f.left), "\" height=\"", Px(f.bottom - f.top), "\"/></clipPath></defs>\n");
  StrAppend(&out, "<rect x=\"0\" y=\"0\" width=\"", c.width, "\" height=\"", c.height, "\" fill=\"#ffffff\"/>\n");
  StrAppend(&out, "<text x=\"8\" y=\"15\" font-size=\"13\" font-weight=\"bold\" fill=\"#111827\">", Escape(c.title),
            "</text>\n");
  if (!c.subtitle.empty()) {
    StrAppend(&out, "<text x=\"8\" y=\"", Px(kTitleHeight + 9), "\" font-size=\"11\" fill=\"#4b5563\">",
              Escape(c.subtitle), "</text>\n");
  }

  // Grid and ticks.
  out += "<g class=\"axes\" font-size=\"11\" fill=\"#374151\">\n";
  for (const Tick& t : y_ticks) {
    const double py = f.y.Map(t.value);
    if (!std::isfinite(py) || py < f.top - 0.5 || py > f.bottom + 0.5) continue;
    StrAppend(&out, "<line x1=\"", Px(f.left), "\" x2=\"", Px(f.right), "\" y1=\"", Px(py), "\" y2=\"", Px(py),
              "\" stroke=\"#e5e7eb\"/>\n");
    StrAppend(&out, "<text x=\"", Px(f.left - 5), "\" y=\"", Px(py + 3.5), "\" text-anchor=\"end\">",
              Escape(t.label), "</text>\n");
  }
  double last_label_end = -1e9;
  for (const Tick& t : x_ticks) {
    const double px = f.x.Map(t.value);
    if (!std::isfinite(px) || px < f.left - 0.5 || px > f.right + 0.5) continue;
    StrAppend(&out, "<line x1=\"", Px(px), "\" x2=\"", Px(px), "\" y1=\"", Px(f.top), "\" y2=\"", Px(f.bottom),
              "\" stroke=\"#f0f1f3\"/>\n");
    const double half = kCharWidth * static_cast<double>(t.label.size()) / 2;
    if (px - half < last_label_end + 4) continue;  // no overlapping labels
    last_label_end = px + half;
    StrAppend(&out, "<text x=\"", Px(px), "\" y=\"", Px(f.bottom + 14), "\" text-anchor=\"middle\">",
              Escape(t.label), "</text>\n");
  }
  StrAppend(&out, "<rect x=\"", Px(f.left), "\" y=\"", Px(f.top), "\" width=\"", Px(f.right - f.left),
            "\" height=\"", Px(f.bottom - f.top), "\" class=\"frame\" fill=\"none\" stroke=\"#9ca3af\"/>\n");
  StrAppend(&out, "<text x=\"", Px((f.left + f.right) / 2), "\" y=\"", Px(height - 8),
            "\" text-anchor=\"middle\" fill=\"#111827\">", Escape(c.x.label), "</text>\n");
  const double y_mid = (f.top + f.bottom) / 2;
  StrAppend(&out, "<text x=\"12\" y=\"", Px(y_mid), "\" text-anchor=\"middle\" transform=\"rotate(-90 12 ",
            Px(y_mid), ")\" fill=\"#111827\">", Escape(c.y.label), "</text>\n");
  out += "</g>\n";

  if (!HasDrawable(c)) {
    StrAppend(&out, "<text class=\"empty\" x=\"", Px((f.left + f.right) / 2), "\" y=\"", Px(y_mid),
              "\" text-anchor=\"middle\" font-size=\"12\" fill=\"#6b7280\">", Escape(c.empty_message), "</text>\n");
  } else {
    StrAppend(&out, "<g class=\"data\" clip-path=\"url(#", id, "-clip)\">\n");
    for (const Band& b : c.bands) DrawBand(b, f, &out);
    for (const Bar& b : c.bars) DrawBar(b, f, &out);
    for (double m : c.x_marks) {
      if (!Usable(m, c.x.log)) continue;
      const double px = f.x.Map(m);
      StrAppend(&out, "<line class=\"mark\" x1=\"", Px(px), "\" x2=\"", Px(px), "\" y1=\"", Px(f.top), "\" y2=\"",
                Px(f.bottom), "\" stroke=\"#6b7280\" stroke-dasharray=\"4 3\"/>\n");
    }
    for (const Series& s : c.series) DrawSeries(s, f, &out);
    out += "</g>\n";
  }

  if (!legend.empty()) {
    out += "<g class=\"legend\" font-size=\"11\" fill=\"#111827\">\n";
    for (size_t i = 0; i < legend.size(); ++i) {
      const LegendItem& item = legend[i];
      const double x = legend_at[i].first;
      const double y = legend_top + legend_at[i].second * kLegendRowHeight;
      const std::string color = Escape(item.color);
      switch (item.swatch) {
        case LegendItem::kArea:
          StrAppend(&out, "<rect x=\"", Px(x), "\" y=\"", Px(y + 2), "\" width=\"14\" height=\"9\" fill=\"", color,
                    "\" fill-opacity=\"", item.opacity, "\"/>\n");
          break;
        case LegendItem::kLine:
        case LegendItem::kDashed:
          StrAppend(&out, "<line x1=\"", Px(x), "\" x2=\"", Px(x + 14), "\" y1=\"", Px(y + 6.5), "\" y2=\"",
                    Px(y + 6.5), "\" stroke=\"", color, "\" stroke-width=\"2\"",
                    item.swatch == LegendItem::kDashed ? " stroke-dasharray=\"4 3\"" : "", "/>\n");
          break;
        case LegendItem::kDot:
          StrAppend(&out, "<circle cx=\"", Px(x + 7), "\" cy=\"", Px(y + 6.5), "\" r=\"3\" fill=\"", color,
                    "\" fill-opacity=\"", item.opacity, "\"/>\n");
          break;
      }
      StrAppend(&out, "<text x=\"", Px(x + 18), "\" y=\"", Px(y + 10.5), "\">", Escape(Shorten(item.label, 40)),
                "</text>\n");
    }
    out += "</g>\n";
  }
  out += "</svg>\n";
  return out;
}

}  // namespace ogive::plot
