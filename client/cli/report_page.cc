#include "client/cli/report_page.h"

#include <algorithm>
#include <cmath>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_join.h"
#include "client/cli/format.h"
#include "client/cli/report_data.h"
#include "client/plot/chart.h"
#include "client/plot/markup.h"

namespace ogive::cli {
namespace {

using absl::StrAppend;
using absl::StrCat;
using plot::Escape;

constexpr char kCaution[] =
    "Caution: candidates are suggestions of a search algorithm, not instructions. Check every candidate "
    "against your local safety rules and equipment limits before it drives equipment.";

// Colours: one per role, readable on white and told apart in the legend.
constexpr char kBlue[] = "#2563eb";
constexpr char kRed[] = "#dc2626";
constexpr char kGreen[] = "#16a34a";
constexpr char kTeal[] = "#0d9488";
constexpr char kAmber[] = "#d97706";
constexpr char kGray[] = "#9ca3af";
constexpr char kSlate[] = "#475569";
constexpr char kViolet[] = "#7c3aed";
// Options of a categorical parameter, in order (repeating beyond eight).
constexpr const char* kPalette[] = {"#2563eb", "#d97706", "#16a34a", "#db2777",
                                    "#7c3aed", "#0891b2", "#65a30d", "#b45309"};

// Scores go on a log axis when they are all positive and span at least a decade: the running best
// of a minimization then stays readable next to the early, much worse outcomes.
constexpr double kLogScoreSpan = 10;

constexpr char kStyle[] = R"css(
body { font-family: sans-serif; color: #111827; margin: 24px; max-width: 1180px; }
h1 { font-size: 22px; margin: 0 0 4px 0; }
h2 { font-size: 17px; margin: 28px 0 8px 0; border-bottom: 1px solid #e5e7eb; padding-bottom: 4px; }
p.meta { color: #4b5563; margin: 2px 0; font-size: 13px; }
p.caution { background: #fef3c7; border: 1px solid #f59e0b; padding: 8px 12px; font-size: 13px; }
.phase { font-weight: bold; }
table { border-collapse: collapse; font-size: 13px; margin: 4px 0; }
th, td { border: 1px solid #e5e7eb; padding: 3px 8px; text-align: left; vertical-align: top; }
th { background: #f9fafb; }
td.num { text-align: right; font-variant-numeric: tabular-nums; }
table.summary th { width: 170px; }
.plots { display: flex; flex-wrap: wrap; gap: 12px; }
svg.plot { border: 1px solid #e5e7eb; max-width: 100%; height: auto; }
td.note { max-width: 320px; white-space: pre-wrap; word-break: break-word; }
)css";

std::string Utc(absl::Time t) { return absl::FormatTime("%Y-%m-%d %H:%M:%S UTC", t, absl::UTCTimeZone()); }

std::string UtcMs(int64_t unix_ms) { return unix_ms == 0 ? "-" : Utc(absl::FromUnixMillis(unix_ms)); }

std::string WithUnit(const std::string& text, const std::string& unit) {
  return unit.empty() ? text : StrCat(text, " ", unit);
}

// A value for a table: reals to six significant digits, with the unit.
std::string ValueCell(const v1::Value& value, const std::string& unit) {
  std::string text = value.kind_case() == v1::Value::kReal ? FormatShort(value.real()) : ValueText(value);
  return value.kind_case() == v1::Value::kReal || value.kind_case() == v1::Value::kInteger ? WithUnit(text, unit)
                                                                                          : text;
}

std::string OutcomeCell(const v1::Outcome& o) {
  if (o.has_score()) return StrCat("score ", FormatShort(o.score()));
  const std::string text = OutcomeText(o);
  return text.empty() ? "-" : text;
}

std::string ObjectiveText(const v1::Objective& objective) {
  if (objective.has_grade_scale()) {
    return StrCat("grades, worst first: ", absl::StrJoin(objective.grade_scale().labels(), " < "));
  }
  return objective.direction() == v1::DIRECTION_HIGHER_IS_BETTER ? "scores, higher is better" : "scores, lower is better";
}

std::string KindText(const v1::Parameter& p) {
  switch (p.kind_case()) {
    case v1::Parameter::kReal:
      return StrCat("real [", FormatExact(p.real().low()), ", ", FormatExact(p.real().high()), "]",
                    p.real().log() ? ", log scale" : "");
    case v1::Parameter::kInteger:
      return StrCat("integer [", p.integer().low(), ", ", p.integer().high(), "]");
    case v1::Parameter::kCategorical:
      return StrCat("categorical: ", absl::StrJoin(p.categorical().options(), ", "));
    case v1::Parameter::kFlag:
      return "flag (on/off)";
    default:
      return "-";
  }
}

void Row(std::string* out, absl::string_view key, const std::string& value) {
  StrAppend(out, "<tr><th>", Escape(key), "</th><td>", Escape(value), "</td></tr>\n");
}

// ---- Plots ----

plot::Chart BestChart(const ReportInput& in) {
  const v1::Objective& objective = in.view.design().objective();
  const std::vector<BestPoint> best = RunningBest(in.trials, objective);
  plot::Chart c;
  c.id = "plot-best";
  c.title = "Best outcome against trials";
  c.x = {.label = "trial number", .whole_numbers = true};
  c.empty_message = "no scored or graded trial yet";
  plot::Series outcomes{.label = "outcome", .color = kSlate, .mark = plot::Mark::kDots, .width = 4, .opacity = 0.45};
  plot::Series running{.label = "best so far", .color = kBlue, .mark = plot::Mark::kStep, .width = 2.2};
  for (const BestPoint& p : best) {
    outcomes.points.push_back({static_cast<double>(p.trial), p.value});
    running.points.push_back({static_cast<double>(p.trial), p.best});
  }
  if (objective.has_grade_scale()) {
    c.subtitle = "grades on their scale, worst at the bottom";
    c.y = {.label = "grade", .categories = {objective.grade_scale().labels().begin(),
                                            objective.grade_scale().labels().end()}};
  } else {
    double min = INFINITY, max = -INFINITY;
    for (const BestPoint& p : best) {
      min = std::min(min, p.value);
      max = std::max(max, p.value);
    }
    const bool log = !best.empty() && min > 0 && max / min >= kLogScoreSpan;
    c.subtitle = objective.direction() == v1::DIRECTION_HIGHER_IS_BETTER ? "higher is better" : "lower is better";
    c.y = {.label = log ? "score (log scale)" : "score", .log = log};
  }
  if (!running.points.empty()) {
    // Hold the best to the last trial handed out, so the line reaches the present.
    int64_t last = 0;
    for (const v1::Trial& t : in.trials) last = std::max(last, t.number());
    if (last > static_cast<int64_t>(running.points.back().x)) {
      running.points.push_back({static_cast<double>(last), running.points.back().y});
    }
  }
  c.series = {outcomes, running};
  const std::vector<int64_t> infeasible = InfeasibleTrials(in.trials);
  if (!infeasible.empty()) {
    plot::Series rug{.label = "infeasible (ranked last)", .color = kRed, .mark = plot::Mark::kRug, .width = 1.4};
    for (int64_t n : infeasible) rug.points.push_back({static_cast<double>(n), 0});
    c.series.push_back(rug);
  }
  return c;
}

plot::Chart GenerationChart(const ReportInput& in, const std::string& id, const std::string& title,
                            const std::string& y_label, const char* color, double (*value)(const v1::GenerationView&)) {
  plot::Chart c;
  c.id = id;
  c.title = title;
  c.x = {.label = "generation", .whole_numbers = true};
  c.y = {.label = y_label, .log = true};
  c.empty_message = "no update yet";
  plot::Series s{.color = color, .mark = plot::Mark::kLine, .width = 2};
  for (const v1::GenerationView& g : in.generations) s.points.push_back({static_cast<double>(g.generation()), value(g)});
  if (s.points.size() == 1) {  // a line needs two points
    s.mark = plot::Mark::kDots;
    s.width = 5;
  }
  c.series.push_back(s);
  for (int64_t g : RestartGenerations(in.generations)) c.x_marks.push_back(static_cast<double>(g));
  c.x_marks_label = "restart";
  return c;
}

plot::Chart StatesChart(const ReportInput& in) {
  plot::Chart c;
  c.id = "plot-states";
  c.title = "Trial states by trial number";
  c.subtitle = "each bar: a block of consecutive trials, by their state now";
  c.x = {.label = "trial number", .whole_numbers = true};
  c.y = {.label = "trials", .lo = 0, .whole_numbers = true};
  c.empty_message = "no trials yet";
  struct Layer {
    const char* label;
    const char* color;
    int StateBlock::*count;
  };
  const Layer layers[] = {{"reported", kGreen, &StateBlock::reported},
                          {"reported late", kTeal, &StateBlock::late},
                          {"voided", kGray, &StateBlock::voided},
                          {"lapsed", kAmber, &StateBlock::lapsed},
                          {"leased", kBlue, &StateBlock::leased}};
  const std::vector<StateBlock> blocks = StatesByBlock(in.trials, 40);
  std::vector<bool> used(std::size(layers), false);
  for (const StateBlock& b : blocks) {
    double y = 0;
    for (size_t k = 0; k < std::size(layers); ++k) {
      const int n = b.*(layers[k].count);
      if (n == 0) continue;
      used[k] = true;
      c.bars.push_back({static_cast<double>(b.first) - 0.5, static_cast<double>(b.last) + 0.5, y, y + n,
                        layers[k].color});
      y += n;
    }
  }
  for (size_t k = 0; k < std::size(layers); ++k) {
    if (used[k]) c.extra_legend.push_back({layers[k].label, layers[k].color});
  }
  return c;
}

plot::Chart StalenessChart(const ReportInput& in) {
  plot::Chart c;
  c.id = "plot-staleness";
  c.title = "Staleness of consumed outcomes";
  c.subtitle = "generations between a trial's own and the update that used it";
  c.x = {.label = "generation", .whole_numbers = true};
  c.y = {.label = "staleness (generations)", .lo = 0, .whole_numbers = true};
  c.empty_message = "no update yet";
  plot::Series each{.label = "one outcome", .color = kSlate, .mark = plot::Mark::kDots, .width = 4, .opacity = 0.35};
  for (const ConsumedOutcome& o : ConsumedStaleness(in.trials)) {
    each.points.push_back({static_cast<double>(o.consumed_by), static_cast<double>(o.staleness)});
  }
  plot::Series mean{.label = "mean", .color = kBlue, .mark = plot::Mark::kLine, .width = 2};
  plot::Series max{.label = "max", .color = kRed, .mark = plot::Mark::kLine, .width = 1.5, .dashed = true};
  for (const v1::GenerationView& g : in.generations) {
    mean.points.push_back({static_cast<double>(g.generation()), g.mean_staleness()});
    max.points.push_back({static_cast<double>(g.generation()), static_cast<double>(g.max_staleness())});
  }
  if (in.generations.size() == 1) {
    mean.mark = max.mark = plot::Mark::kDots;
    mean.width = max.width = 5;
  }
  c.series = {each, mean, max};
  return c;
}

// The value of parameter `name` in a trial's candidate as a number (reals and integers), if any.
bool NumericValue(const v1::Trial& t, const std::string& name, double* value) {
  auto it = t.candidate().values().find(name);
  if (it == t.candidate().values().end()) return false;
  if (it->second.has_real()) {
    *value = it->second.real();
    return true;
  }
  if (it->second.has_integer()) {
    *value = static_cast<double>(it->second.integer());
    return true;
  }
  return false;
}

plot::Chart ParameterChart(const ReportInput& in, int index) {
  const v1::Parameter& p = in.view.design().parameters(index);
  plot::Chart c;
  c.id = StrCat("plot-parameter-", index);
  c.title = p.name();
  std::vector<std::string> sub;
  sub.push_back(KindText(p));
  if (!p.unit().empty()) sub.push_back(StrCat("unit ", p.unit()));
  if (!p.description().empty()) sub.push_back(plot::Shorten(p.description(), 70));
  c.subtitle = absl::StrJoin(sub, " \xc2\xb7 ");
  c.x = {.label = "generation", .whole_numbers = true};
  c.empty_message = "no update yet";
  const auto marginal = [&](const v1::GenerationView& g) -> const v1::Marginal* {
    return index < g.marginals_size() ? &g.marginals(index) : nullptr;
  };
  if (p.has_real() || p.has_integer()) {
    const bool log = p.has_real() && p.real().log();
    const double low = p.has_real() ? p.real().low() : static_cast<double>(p.integer().low());
    const double high = p.has_real() ? p.real().high() : static_cast<double>(p.integer().high());
    c.y = {.label = WithUnit(log ? "value (log scale)" : "value", p.unit().empty() ? "" : StrCat("[", p.unit(), "]")),
           .log = log, .lo = low, .hi = high};
    plot::Band band{.label = "mean \xc2\xb1 2 spreads (within bounds)", .color = kBlue, .opacity = 0.22};
    plot::Series mean{.label = "mean", .color = kBlue, .mark = plot::Mark::kLine, .width = 2};
    for (const v1::GenerationView& g : in.generations) {
      const v1::Marginal* m = marginal(g);
      if (m == nullptr) continue;
      const BandRange r = TwoSpreadBand(m->mean(), m->spread(), low, high, log);
      band.x.push_back(static_cast<double>(g.generation()));
      band.lower.push_back(r.lower);
      band.upper.push_back(r.upper);
      mean.points.push_back({static_cast<double>(g.generation()), m->mean()});
    }
    if (mean.points.size() == 1) {
      mean.mark = plot::Mark::kDots;
      mean.width = 5;
    }
    plot::Series trials{.label = "trials, by their generation", .color = kSlate,
                        .mark = plot::Mark::kDots, .width = 3.5, .opacity = 0.4};
    for (const v1::Trial& t : in.trials) {
      double v = 0;
      if (NumericValue(t, p.name(), &v)) trials.points.push_back({static_cast<double>(t.generation()), v});
    }
    c.bands.push_back(band);
    c.series = {trials, mean};
    return c;
  }
  // Flags and categoricals: stacked probabilities, the first option (or "on") at the bottom.
  c.y = {.label = "probability", .lo = 0, .hi = 1};
  std::vector<std::string> names;
  if (p.has_flag()) {
    names = {"on", "off"};
  } else {
    names.assign(p.categorical().options().begin(), p.categorical().options().end());
  }
  std::vector<plot::Band> layers(names.size());
  for (size_t k = 0; k < names.size(); ++k) {
    layers[k].label = p.has_flag() ? StrCat("P(", names[k], ")") : names[k];
    layers[k].color = p.has_flag() ? (k == 0 ? kGreen : kGray) : kPalette[k % std::size(kPalette)];
    layers[k].opacity = 0.75;
  }
  for (const v1::GenerationView& g : in.generations) {
    const v1::Marginal* m = marginal(g);
    if (m == nullptr || m->probabilities().empty()) continue;
    std::vector<double> probabilities(m->probabilities().begin(), m->probabilities().end());
    if (p.has_flag()) probabilities = {probabilities[0], 1 - probabilities[0]};
    double below = 0;
    for (size_t k = 0; k < layers.size() && k < probabilities.size(); ++k) {
      layers[k].x.push_back(static_cast<double>(g.generation()));
      layers[k].lower.push_back(below);
      below += probabilities[k];
      layers[k].upper.push_back(std::min(below, 1.0));
    }
  }
  c.bands = std::move(layers);
  return c;
}

// ---- Tables ----

std::string SummaryTable(const ReportInput& in) {
  const v1::StatusSummary& s = in.view.status();
  const v1::CampaignDesign& d = in.view.design();
  std::string out = "<table class=\"summary\">\n";
  Row(&out, "objective", ObjectiveText(d.objective()));
  Row(&out, "phase", StrCat(PhaseWithReason(s), s.phase_message().empty() ? "" : ": ", s.phase_message()));
  Row(&out, "generation", StrCat(s.generation(), " (restarts ", s.restarts(), ", population size λ = ",
                                 s.population_size(), ")"));
  Row(&out, "trials", StrCat(in.trials.size(), ": leased ", s.leased(), ", reported ", s.reported(), " (late ",
                             s.late(), "), lapsed ", s.lapsed(), ", voided ", s.voided()));
  Row(&out, "outcomes", StrCat("pending ", s.pending(), ", consumed ", s.consumed(), ", too stale ", s.too_stale()));
  const bool best = s.has_best() && s.best().outcome().kind_case() != v1::Outcome::KIND_NOT_SET;
  Row(&out, "best", best ? StrCat(OutcomeText(s.best().outcome()), " (trial ", s.best().number(), ")") : "-");
  bool gaussian = false;
  for (const v1::Parameter& p : d.parameters()) gaussian |= p.has_real() || p.has_integer();
  if (gaussian) {
    Row(&out, "step size \xcf\x83", StrCat(FormatShort(s.step_size()), " (a fraction of each range)"));
    Row(&out, "axis ratio", FormatShort(s.axis_ratio()));
  }
  if (d.trial_budget() > 0) Row(&out, "trial budget", StrCat(d.trial_budget(), " informative outcomes"));
  out += "</table>\n";
  return out;
}

std::string BestTrialsTable(const ReportInput& in) {
  const v1::CampaignDesign& d = in.view.design();
  const std::vector<v1::Trial> best = BestTrials(in.trials, d.objective(), kReportBestTrials);
  if (best.empty()) return "<p>No informative outcome yet.</p>\n";
  std::string out = "<table class=\"best\">\n<tr><th>rank</th><th>trial</th><th>outcome</th>";
  for (const v1::Parameter& p : d.parameters()) StrAppend(&out, "<th>", Escape(p.name()), "</th>");
  out += "<th>generation</th><th>worker</th><th>reported</th><th>note</th></tr>\n";
  for (size_t i = 0; i < best.size(); ++i) {
    const v1::Trial& t = best[i];
    StrAppend(&out, "<tr><td class=\"num\">", i + 1, "</td><td class=\"num\">", t.number(), "</td><td>",
              Escape(OutcomeCell(t.outcome())), "</td>");
    for (const v1::Parameter& p : d.parameters()) {
      auto it = t.candidate().values().find(p.name());
      const bool numeric = p.has_real() || p.has_integer();
      StrAppend(&out, numeric ? "<td class=\"num\">" : "<td>",
                it == t.candidate().values().end() ? "-" : Escape(ValueCell(it->second, p.unit())), "</td>");
    }
    StrAppend(&out, "<td class=\"num\">", t.generation(), "</td><td>", Escape(t.worker().empty() ? "-" : t.worker()),
              "</td><td>", Escape(UtcMs(t.reported_at_unix_ms())), t.late() ? " (late)" : "", "</td><td class=\"note\">",
              Escape(t.outcome().note()), "</td></tr>\n");
  }
  out += "</table>\n";
  return out;
}

std::string DesignTables(const ReportInput& in) {
  const v1::CampaignDesign& d = in.view.design();
  std::string out = "<table class=\"parameters\">\n<tr><th>parameter</th><th>kind and range</th><th>unit</th>"
                    "<th>description</th></tr>\n";
  for (const v1::Parameter& p : d.parameters()) {
    StrAppend(&out, "<tr><td>", Escape(p.name()), "</td><td>", Escape(KindText(p)), "</td><td>",
              Escape(p.unit().empty() ? "-" : p.unit()), "</td><td>", Escape(p.description()), "</td></tr>\n");
  }
  out += "</table>\n<table class=\"summary settings\">\n";
  Row(&out, "objective", ObjectiveText(d.objective()));
  Row(&out, "population size", d.population_size() == 0 ? "default (4 + 3 ln n, at least the expected workers)"
                                                        : StrCat(d.population_size()));
  Row(&out, "expected workers", StrCat(d.expected_workers() == 0 ? 1 : d.expected_workers()));
  Row(&out, "staleness limit", d.staleness_limit() == 0 ? "default" : StrCat(d.staleness_limit(), " generations"));
  Row(&out, "trial budget", d.trial_budget() == 0 ? "none" : StrCat(d.trial_budget()));
  if (d.has_target()) Row(&out, "target score", FormatExact(d.target()));
  if (d.has_target_grade()) Row(&out, "target grade", d.target_grade());
  Row(&out, "lease", d.lease_seconds() == 0 ? "server default" : StrCat(FormatShort(d.lease_seconds()), " s"));
  Row(&out, "restarts", d.restarts() ? "on (population doubles on each)" : "off");
  Row(&out, "initial spread", d.initial_spread() == 0 ? "default" : FormatShort(d.initial_spread()));
  Row(&out, "Gaussian model", d.gaussian_model() == v1::GAUSSIAN_MODEL_FULL       ? "full covariance"
                              : d.gaussian_model() == v1::GAUSSIAN_MODEL_DIAGONAL ? "diagonal"
                                                                                  : "default");
  Row(&out, "seed", StrCat(d.seed()));
  out += "</table>\n";
  return out;
}

double StepSize(const v1::GenerationView& g) { return g.step_size(); }
double AxisRatio(const v1::GenerationView& g) { return g.axis_ratio(); }

}  // namespace

std::string CampaignReportHtml(const ReportInput& in) {
  const v1::CampaignDesign& d = in.view.design();
  const std::string name = Escape(in.view.name());
  std::string out = "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n";
  StrAppend(&out, "<title>ogive campaign report: ", name, "</title>\n<style>", kStyle, "</style>\n</head>\n<body>\n");
  StrAppend(&out, "<h1>Campaign ", name, "</h1>\n");
  StrAppend(&out, "<p class=\"meta\"><span class=\"phase\">", Escape(PhaseWithReason(in.view.status())), "</span>",
            in.view.status().phase_message().empty() ? "" : StrCat(": ", Escape(in.view.status().phase_message())),
            " \xc2\xb7 generation ", in.view.status().generation(), " \xc2\xb7 ", in.trials.size(), " trials</p>\n");
  StrAppend(&out, "<p class=\"meta\">Report made ", Escape(Utc(in.generated_at)), " from the ogive server ",
            Escape(in.server), ".</p>\n");
  StrAppend(&out, "<p class=\"caution\">", Escape(kCaution), "</p>\n");

  out += "<h2>Status</h2>\n";
  out += SummaryTable(in);

  out += "<h2>Progress</h2>\n<div class=\"plots\">\n";
  out += plot::RenderSvg(BestChart(in));
  bool gaussian = false;
  for (const v1::Parameter& p : d.parameters()) gaussian |= p.has_real() || p.has_integer();
  if (gaussian) {
    out += plot::RenderSvg(GenerationChart(in, "plot-step-size", "Step size against generation",
                                           "step size \xcf\x83 (log scale)", kViolet, &StepSize));
    out += plot::RenderSvg(GenerationChart(in, "plot-axis-ratio", "Axis ratio against generation",
                                           "axis ratio (log scale)", kAmber, &AxisRatio));
  }
  out += plot::RenderSvg(StatesChart(in));
  out += plot::RenderSvg(StalenessChart(in));
  out += "</div>\n";

  out += "<h2>Parameters over the generations</h2>\n<div class=\"plots\">\n";
  for (int i = 0; i < d.parameters_size(); ++i) out += plot::RenderSvg(ParameterChart(in, i));
  out += "</div>\n";

  StrAppend(&out, "<h2>Best trials</h2>\n");
  out += BestTrialsTable(in);

  out += "<h2>Design</h2>\n";
  out += DesignTables(in);
  out += "</body>\n</html>\n";
  return out;
}

}  // namespace ogive::cli
