// RenderSvg: what each mark draws, in the data group under the clip path; axes, ticks and legends;
// escaping of every piece of text; empty charts; values a log axis or the page cannot show.
#include "client/plot/chart.h"

#include <cmath>
#include <regex>
#include <string>
#include <vector>

#include "gmock/gmock.h"
#include "gtest/gtest.h"

namespace ogive::plot {
namespace {

using ::testing::HasSubstr;
using ::testing::Not;

int Count(const std::string& text, const std::string& what) {
  int n = 0;
  for (size_t at = text.find(what); at != std::string::npos; at = text.find(what, at + what.size())) ++n;
  return n;
}

// The "points" attribute of every polyline of `cls`, split into x,y pairs.
std::vector<std::vector<std::pair<double, double>>> Polylines(const std::string& svg, const std::string& cls) {
  std::vector<std::vector<std::pair<double, double>>> out;
  const std::regex element("<polyline class=\"" + cls + "\" points=\"([^\"]*)\"");
  for (auto it = std::sregex_iterator(svg.begin(), svg.end(), element); it != std::sregex_iterator(); ++it) {
    std::vector<std::pair<double, double>>& line = out.emplace_back();
    const std::string points = (*it)[1];
    const std::regex pair("(-?[0-9.]+),(-?[0-9.]+)");
    for (auto p = std::sregex_iterator(points.begin(), points.end(), pair); p != std::sregex_iterator(); ++p) {
      line.push_back({std::stod((*p)[1]), std::stod((*p)[2])});
    }
  }
  return out;
}

// The data group: everything between <g class="data" ...> and its </g>.
std::string DataGroup(const std::string& svg) {
  const size_t start = svg.find("<g class=\"data\"");
  if (start == std::string::npos) return "";
  return svg.substr(start, svg.find("</g>", start) - start);
}

Chart LineChart(int n) {
  Chart c;
  c.id = "test";
  c.title = "best score";
  c.x = {.label = "trial", .whole_numbers = true};
  c.y = {.label = "score"};
  Series s{.label = "running best", .color = "#2563eb", .mark = Mark::kLine};
  for (int i = 1; i <= n; ++i) s.points.push_back({static_cast<double>(i), 100.0 / i});
  c.series.push_back(s);
  return c;
}

TEST(RenderSvg, DrawsALineOfEveryPointInsideThePlotArea) {
  const std::string svg = RenderSvg(LineChart(50));
  EXPECT_THAT(svg, HasSubstr("<svg class=\"plot\" id=\"test\""));
  EXPECT_THAT(svg, HasSubstr("<clipPath id=\"test-clip\">"));
  const std::string data = DataGroup(svg);
  EXPECT_THAT(data, HasSubstr("clip-path=\"url(#test-clip)\""));
  const auto lines = Polylines(data, "line");
  ASSERT_EQ(lines.size(), 1u);
  ASSERT_EQ(lines[0].size(), 50u);
  // x grows with the trial, y pixels grow as the score falls, and everything lies on the canvas.
  for (size_t i = 1; i < lines[0].size(); ++i) {
    EXPECT_GT(lines[0][i].first, lines[0][i - 1].first);
    EXPECT_GE(lines[0][i].second, lines[0][i - 1].second);
  }
  for (const auto& [x, y] : lines[0]) {
    EXPECT_GE(x, 0);
    EXPECT_LE(x, 560);
    EXPECT_GE(y, 0);
    EXPECT_LE(y, 280);
  }
  // The first and last trials sit on the left and right edges of the plot area (a tight x domain).
  const std::regex clip("<clipPath id=\"test-clip\"><rect x=\"([0-9.]+)\" y=\"[0-9.]+\" width=\"([0-9.]+)\"");
  std::smatch m;
  ASSERT_TRUE(std::regex_search(svg, m, clip));
  EXPECT_NEAR(lines[0].front().first, std::stod(m[1]), 0.06);
  EXPECT_NEAR(lines[0].back().first, std::stod(m[1]) + std::stod(m[2]), 0.06);
  // Axis labels, ticks at round numbers, the legend.
  EXPECT_THAT(svg, HasSubstr(">trial</text>"));
  EXPECT_THAT(svg, HasSubstr(">score</text>"));
  EXPECT_THAT(svg, HasSubstr(">100</text>"));
  EXPECT_THAT(svg, HasSubstr(">40</text>"));
  EXPECT_THAT(svg, HasSubstr(">running best</text>"));
  EXPECT_THAT(svg, HasSubstr("<title id=\"test-title\">best score</title>"));
  EXPECT_THAT(svg, Not(HasSubstr("<script")));
}

TEST(RenderSvg, StepsHoldEachValueUntilTheNextPoint) {
  Chart c = LineChart(4);
  c.series[0].mark = Mark::kStep;
  const auto steps = Polylines(DataGroup(RenderSvg(c)), "step");
  ASSERT_EQ(steps.size(), 1u);
  ASSERT_EQ(steps[0].size(), 7u);  // n points and n - 1 corners
  EXPECT_EQ(steps[0][1].second, steps[0][0].second);  // the corner keeps the old y...
  EXPECT_EQ(steps[0][1].first, steps[0][2].first);    // ...at the new x
}

TEST(RenderSvg, DotsAndRugsDrawOneMarkPerPoint) {
  Chart c = LineChart(0);
  c.series.clear();
  Series dots{.label = "score", .color = "#111", .mark = Mark::kDots, .width = 4};
  Series rug{.label = "infeasible", .color = "#b91c1c", .mark = Mark::kRug};
  for (int i = 1; i <= 30; ++i) dots.points.push_back({static_cast<double>(i), std::sin(i)});
  for (int i : {3, 9, 27}) rug.points.push_back({static_cast<double>(i), 0});
  c.series = {dots, rug};
  const std::string data = DataGroup(RenderSvg(c));
  EXPECT_EQ(Count(data, "h0"), 30);
  EXPECT_THAT(data, HasSubstr("stroke-linecap=\"round\""));
  EXPECT_EQ(Count(data, "v-7"), 3);
}

TEST(RenderSvg, BandsAreClosedOutlinesOfBothCurves) {
  Chart c;
  c.id = "band";
  c.title = "x";
  c.y = {.lo = 0, .hi = 10};
  Band b{.label = "mean \xc2\xb1 2 spreads", .color = "#2563eb"};
  for (int i = 0; i < 12; ++i) {
    b.x.push_back(i);
    b.lower.push_back(2 + 0.1 * i);
    b.upper.push_back(8 - 0.1 * i);
  }
  c.bands.push_back(b);
  const std::string data = DataGroup(RenderSvg(c));
  const std::regex path("<path class=\"band\" d=\"(M[^\"]*Z)\"");
  std::smatch m;
  ASSERT_TRUE(std::regex_search(data, m, path));
  EXPECT_EQ(Count(m[1], "L") + 1, 24);  // upper curve forwards, lower curve back
  EXPECT_THAT(data, HasSubstr("fill-opacity=\"0.3\""));
}

TEST(RenderSvg, BarsAreRectanglesInDataCoordinates) {
  Chart c;
  c.id = "bars";
  c.title = "states";
  c.x = {.lo = 0, .hi = 10};
  c.y = {.lo = 0, .hi = 10};
  c.bars = {{0, 5, 0, 10, "#16a34a"}, {5, 10, 0, 5, "#d97706"}};
  c.extra_legend = {{"reported", "#16a34a"}, {"lapsed", "#d97706"}};
  const std::string svg = RenderSvg(c);
  const std::string data = DataGroup(svg);
  EXPECT_EQ(Count(data, "<rect class=\"bar\""), 2);
  // The two bars share an edge in the middle of the plot area, and the second is half as tall.
  const std::regex rect("<rect class=\"bar\" x=\"([0-9.]+)\" y=\"([0-9.]+)\" width=\"([0-9.]+)\" height=\"([0-9.]+)\"");
  std::vector<std::smatch> bars;
  std::vector<double> x, w, h;
  for (auto it = std::sregex_iterator(data.begin(), data.end(), rect); it != std::sregex_iterator(); ++it) {
    x.push_back(std::stod((*it)[1]));
    w.push_back(std::stod((*it)[3]));
    h.push_back(std::stod((*it)[4]));
  }
  ASSERT_EQ(x.size(), 2u);
  EXPECT_NEAR(x[0] + w[0], x[1], 0.11);
  EXPECT_NEAR(h[1] * 2, h[0], 0.21);
  EXPECT_THAT(svg, HasSubstr(">reported</text>"));
  EXPECT_THAT(svg, HasSubstr(">lapsed</text>"));
}

TEST(RenderSvg, EscapesEveryPieceOfText) {
  Chart c = LineChart(3);
  c.id = "esc";
  c.title = "<b>peak & \"temp\"</b>";
  c.subtitle = "unit '<degC>'";
  c.x.label = "<x>";
  c.y.label = "&y";
  c.series[0].label = "</text><script>alert(1)</script>";
  c.x_marks = {2};
  c.x_marks_label = "<restart>";
  const std::string svg = RenderSvg(c);
  EXPECT_THAT(svg, HasSubstr("&lt;b&gt;peak &amp; &quot;temp&quot;&lt;/b&gt;"));
  EXPECT_THAT(svg, HasSubstr("unit &#39;&lt;degC&gt;&#39;"));
  EXPECT_THAT(svg, HasSubstr(">&lt;x&gt;</text>"));
  EXPECT_THAT(svg, HasSubstr(">&amp;y</text>"));
  EXPECT_THAT(svg, HasSubstr("&lt;restart&gt;"));
  EXPECT_THAT(svg, Not(HasSubstr("<script")));
  EXPECT_THAT(svg, Not(HasSubstr("<b>")));
  EXPECT_THAT(svg, Not(HasSubstr("<x>")));
}

TEST(RenderSvg, LogAxesDropValuesTheyCannotShowAndBreakTheLine) {
  Chart c;
  c.id = "log";
  c.title = "step size";
  c.y = {.label = "σ", .log = true};
  Series s{.color = "#000", .mark = Mark::kLine};
  s.points = {{1, 1e-1}, {2, 1e-3}, {3, 0}, {4, 1e-5}, {5, -1}, {6, 1e-6}, {7, 1e-6}};
  c.series.push_back(s);
  const std::string svg = RenderSvg(c);
  const auto lines = Polylines(DataGroup(svg), "line");
  ASSERT_EQ(lines.size(), 3u);
  EXPECT_EQ(lines[0].size(), 2u);
  EXPECT_EQ(lines[1].size(), 1u);
  EXPECT_EQ(lines[2].size(), 2u);
  // Decades from 1e-6 to 0.1, each a tick; equal ratios are equal distances.
  EXPECT_THAT(svg, HasSubstr(">1e-6</text>"));
  EXPECT_THAT(svg, HasSubstr(">0.001</text>"));
  EXPECT_THAT(svg, HasSubstr(">0.1</text>"));
  EXPECT_NEAR(lines[0][1].second - lines[0][0].second, lines[1][0].second - lines[0][1].second, 0.11);
}

TEST(RenderSvg, CategoryAxesLabelTheirTicksByName) {
  Chart c;
  c.id = "grades";
  c.title = "best grade";
  c.y = {.label = "grade", .categories = {"cracked", "poor", "fair", "good"}};
  c.series.push_back({.color = "#000", .mark = Mark::kStep, .points = {{1, 0}, {2, 1}, {5, 3}}});
  const std::string svg = RenderSvg(c);
  for (const char* label : {">cracked</text>", ">poor</text>", ">fair</text>", ">good</text>"}) {
    EXPECT_THAT(svg, HasSubstr(label));
  }
}

TEST(RenderSvg, WholeNumberAxesHaveNoFractionalTicks) {
  Chart c = LineChart(3);  // trials 1..3
  const std::string svg = RenderSvg(c);
  EXPECT_THAT(svg, HasSubstr(">1</text>"));
  EXPECT_THAT(svg, HasSubstr(">2</text>"));
  EXPECT_THAT(svg, HasSubstr(">3</text>"));
  EXPECT_THAT(svg, Not(HasSubstr(">1.5</text>")));
}

TEST(RenderSvg, ShowsAMessageWhenThereIsNothingToDraw) {
  Chart c = LineChart(0);
  c.empty_message = "no reported trials yet";
  std::string svg = RenderSvg(c);
  EXPECT_THAT(svg, HasSubstr("class=\"empty\""));
  EXPECT_THAT(svg, HasSubstr(">no reported trials yet</text>"));
  EXPECT_EQ(DataGroup(svg), "");
  // Only values a log axis cannot show: empty too.
  c.y.log = true;
  c.series[0].points = {{1, 0}, {2, -1}};
  svg = RenderSvg(c);
  EXPECT_THAT(svg, HasSubstr("class=\"empty\""));
}

TEST(RenderSvg, ExtremeValuesStayWithinBoundedCoordinates) {
  Chart c = LineChart(2);
  c.y = {.lo = 0, .hi = 1};
  c.series[0].points = {{1, 0.5}, {2, 1e300}, {3, NAN}, {4, -1e300}};
  const auto lines = Polylines(DataGroup(RenderSvg(c)), "line");
  ASSERT_EQ(lines.size(), 2u);
  EXPECT_EQ(lines[0][1].second, -100000);  // far above the plot area, hidden by the clip path
  EXPECT_EQ(lines[1][0].second, 100000);
}

}  // namespace
}  // namespace ogive::plot
