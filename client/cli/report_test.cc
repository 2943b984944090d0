// Tests of `ogive campaign report` and `ogive campaign export` that need no server: the numbers the plots
// are drawn from (bands clipped to bounds, running best, state blocks, staleness, ranking), the page
// (every plot, the caution, user text escaped, nothing loaded from elsewhere) and the CSV and JSON
// records. Rendering in a browser and round trips through Python are tests/report/.
#include <cmath>
#include <cstdio>
#include <regex>
#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "absl/time/time.h"
#include "client/cli/cli.h"
#include "client/cli/report_commands.h"
#include "client/cli/report_data.h"
#include "client/cli/report_page.h"
#include "client/cli/trial_export.h"
#include "gmock/gmock.h"
#include "google/protobuf/text_format.h"
#include "gtest/gtest.h"

namespace ogive::cli {
namespace {

using ::testing::ElementsAre;
using ::testing::HasSubstr;
using ::testing::Not;

template <typename Message>
Message Parse(const std::string& text) {
  Message m;
  EXPECT_TRUE(google::protobuf::TextFormat::ParseFromString(text, &m)) << text;
  return m;
}

v1::Trial Scored(int64_t number, double score, int64_t generation = 0) {
  v1::Trial t;
  t.set_number(number);
  t.set_state(v1::TRIAL_STATE_REPORTED);
  t.set_generation(generation);
  t.mutable_outcome()->set_score(score);
  return t;
}

v1::Trial WithState(int64_t number, v1::TrialState state) {
  v1::Trial t;
  t.set_number(number);
  t.set_state(state);
  if (state == v1::TRIAL_STATE_VOIDED) t.mutable_outcome()->mutable_void_();
  return t;
}

v1::Objective Direction(v1::Direction d) {
  v1::Objective o;
  o.set_direction(d);
  return o;
}

v1::Objective Grades() {
  return Parse<v1::Objective>(R"pb(grade_scale { labels: "cracked" labels: "poor" labels: "fair" labels: "good" })pb");
}

// ---- report_data ----

TEST(TwoSpreadBand, IsMeanPlusMinusTwoSpreadsClippedToTheBounds) {
  BandRange b = TwoSpreadBand(5, 1, 0, 10, false);
  EXPECT_DOUBLE_EQ(b.lower, 3);
  EXPECT_DOUBLE_EQ(b.upper, 7);
  b = TwoSpreadBand(1, 2, 0, 10, false);  // -3 .. 5: clipped below
  EXPECT_DOUBLE_EQ(b.lower, 0);
  EXPECT_DOUBLE_EQ(b.upper, 5);
  b = TwoSpreadBand(9.5, 3, 0, 10, false);  // 3.5 .. 15.5: clipped above
  EXPECT_DOUBLE_EQ(b.lower, 3.5);
  EXPECT_DOUBLE_EQ(b.upper, 10);
  b = TwoSpreadBand(5, 100, 0, 10, false);  // the whole range
  EXPECT_DOUBLE_EQ(b.lower, 0);
  EXPECT_DOUBLE_EQ(b.upper, 10);
}

TEST(TwoSpreadBand, IsSymmetricInTheLogarithmOnALogScale) {
  // Mean 1e-3 with spread 9e-3: one spread is a factor 10, two are a factor 100.
  BandRange b = TwoSpreadBand(1e-3, 9e-3, 1e-8, 1, true);
  EXPECT_NEAR(b.lower, 1e-5, 1e-18);
  EXPECT_NEAR(b.upper, 1e-1, 1e-14);
  b = TwoSpreadBand(1e-3, 9e-3, 1e-4, 1e-2, true);  // clipped at both ends
  EXPECT_DOUBLE_EQ(b.lower, 1e-4);
  EXPECT_DOUBLE_EQ(b.upper, 1e-2);
  b = TwoSpreadBand(NAN, 1, 1, 10, true);  // nothing to centre on: the whole range
  EXPECT_EQ(b.lower, 1);
  EXPECT_EQ(b.upper, 10);
}

TEST(RunningBest, FollowsTheCampaignsDirectionInTrialNumberOrder) {
  std::vector<v1::Trial> trials = {Scored(3, 5), Scored(1, 8), Scored(2, 9), WithState(4, v1::TRIAL_STATE_VOIDED),
                                   Scored(5, 2), WithState(6, v1::TRIAL_STATE_LEASED)};
  trials.push_back(Scored(7, 0));
  trials.back().mutable_outcome()->mutable_infeasible();  // infeasible: not a score, not on the line
  std::vector<BestPoint> best = RunningBest(trials, Direction(v1::DIRECTION_LOWER_IS_BETTER));
  ASSERT_EQ(best.size(), 4u);
  EXPECT_EQ(best[0].trial, 1);
  EXPECT_EQ(best[1].trial, 2);
  EXPECT_EQ(best[2].trial, 3);
  EXPECT_EQ(best[3].trial, 5);
  EXPECT_EQ(best[1].value, 9);
  EXPECT_EQ(best[1].best, 8);
  EXPECT_EQ(best[2].best, 5);
  EXPECT_EQ(best[3].best, 2);
  best = RunningBest(trials, Direction(v1::DIRECTION_HIGHER_IS_BETTER));
  EXPECT_EQ(best[1].best, 9);
  EXPECT_EQ(best[3].best, 9);
  EXPECT_THAT(InfeasibleTrials(trials), ElementsAre(7));
}

TEST(RunningBest, PlacesGradesByTheirIndexOnTheScale) {
  std::vector<v1::Trial> trials(4);
  const char* grades[] = {"poor", "good", "cracked", "bogus"};
  for (int i = 0; i < 4; ++i) {
    trials[i].set_number(i + 1);
    trials[i].mutable_outcome()->set_grade(grades[i]);
  }
  const std::vector<BestPoint> best = RunningBest(trials, Grades());
  ASSERT_EQ(best.size(), 3u);  // a label off the scale is left out
  EXPECT_EQ(best[0].value, 1);
  EXPECT_EQ(best[1].value, 3);
  EXPECT_EQ(best[2].value, 0);
  EXPECT_EQ(best[2].best, 3);
}

TEST(StatesByBlock, CountsEachStateInRoundBlocksOfTrialNumbers) {
  std::vector<v1::Trial> trials;
  for (int n = 1; n <= 23; ++n) trials.push_back(Scored(n, n));
  trials[4] = WithState(5, v1::TRIAL_STATE_LAPSED);
  trials[5] = WithState(6, v1::TRIAL_STATE_VOIDED);
  trials[6].set_late(true);
  trials[22] = WithState(23, v1::TRIAL_STATE_LEASED);
  // At most 5 blocks for 23 trials: width 5 (1-5, ..., 21-23).
  std::vector<StateBlock> blocks = StatesByBlock(trials, 5);
  ASSERT_EQ(blocks.size(), 5u);
  EXPECT_EQ(blocks[0].first, 1);
  EXPECT_EQ(blocks[0].last, 5);
  EXPECT_EQ(blocks[0].reported, 4);
  EXPECT_EQ(blocks[0].lapsed, 1);
  EXPECT_EQ(blocks[1].voided, 1);
  EXPECT_EQ(blocks[1].late, 1);
  EXPECT_EQ(blocks[1].reported, 3);
  EXPECT_EQ(blocks[4].first, 21);
  EXPECT_EQ(blocks[4].last, 23);
  EXPECT_EQ(blocks[4].reported, 2);
  EXPECT_EQ(blocks[4].leased, 1);
  // Widths are 1, 2, 5, 10, 20, ...: 23 trials in at most 40 blocks are one per block; in 2, 20 each.
  EXPECT_EQ(StatesByBlock(trials, 40).size(), 23u);
  blocks = StatesByBlock(trials, 2);
  ASSERT_EQ(blocks.size(), 2u);
  EXPECT_EQ(blocks[0].last, 20);
  EXPECT_TRUE(StatesByBlock({}, 40).empty());
}

TEST(ConsumedStaleness, CountsGenerationsBetweenSamplingAndUse) {
  std::vector<v1::Trial> trials = {Scored(1, 1, 0), Scored(2, 1, 0), Scored(3, 1, 4)};
  trials[0].set_use(v1::OUTCOME_USE_CONSUMED);
  trials[0].set_consumed_by(1);  // sampled from 0, used by the update that made 1: staleness 0
  trials[1].set_use(v1::OUTCOME_USE_CONSUMED);
  trials[1].set_consumed_by(3);  // staleness 2
  trials[2].set_use(v1::OUTCOME_USE_PENDING);
  trials[2].set_consumed_by(-1);
  const std::vector<ConsumedOutcome> out = ConsumedStaleness(trials);
  ASSERT_EQ(out.size(), 2u);
  EXPECT_EQ(out[0].consumed_by, 1);
  EXPECT_EQ(out[0].staleness, 0);
  EXPECT_EQ(out[1].consumed_by, 3);
  EXPECT_EQ(out[1].staleness, 2);
}

TEST(BestTrials, RanksScoresThenInfeasibleAndBreaksTiesByNumber) {
  std::vector<v1::Trial> trials = {Scored(1, 4), Scored(2, 1), Scored(3, 4), Scored(4, 9),
                                   WithState(5, v1::TRIAL_STATE_VOIDED), WithState(6, v1::TRIAL_STATE_LEASED)};
  trials.push_back(Scored(7, 0));
  trials.back().mutable_outcome()->mutable_infeasible();
  const auto numbers = [](const std::vector<v1::Trial>& ts) {
    std::vector<int64_t> n;
    for (const v1::Trial& t : ts) n.push_back(t.number());
    return n;
  };
  EXPECT_THAT(numbers(BestTrials(trials, Direction(v1::DIRECTION_LOWER_IS_BETTER), 10)), ElementsAre(2, 1, 3, 4, 7));
  EXPECT_THAT(numbers(BestTrials(trials, Direction(v1::DIRECTION_HIGHER_IS_BETTER), 10)), ElementsAre(4, 1, 3, 2, 7));
  EXPECT_THAT(numbers(BestTrials(trials, Direction(v1::DIRECTION_LOWER_IS_BETTER), 2)), ElementsAre(2, 1));
  std::vector<v1::Trial> graded(3);
  const char* grades[] = {"fair", "good", "poor"};
  for (int i = 0; i < 3; ++i) {
    graded[i].set_number(i + 1);
    graded[i].mutable_outcome()->set_grade(grades[i]);
  }
  EXPECT_THAT(numbers(BestTrials(graded, Grades(), 10)), ElementsAre(2, 1, 3));
}

TEST(RestartGenerations, AreWhereTheEpochGrows) {
  std::vector<v1::GenerationView> g(5);
  const int epochs[] = {0, 0, 1, 1, 2};
  for (int i = 0; i < 5; ++i) {
    g[i].set_generation(i + 1);
    g[i].set_epoch(epochs[i]);
  }
  EXPECT_THAT(RestartGenerations(g), ElementsAre(3, 5));
}

// ---- The page ----

// A campaign with every parameter kind and user text that HTML would take as markup.
ReportInput MixedReport() {
  ReportInput in;
  in.view = Parse<v1::CampaignView>(R"pb(
    name: "kiln-7"
    design {
      name: "kiln-7"
      parameters { name: "peak" unit: "<b>degC</b>" description: "Peak <script>alert('x')</script> & more"
                   real { low: 1100 high: 1300 } }
      parameters { name: "rate" unit: "1/s" real { low: 1e-4 high: 1 log: true } }
      parameters { name: "hold" unit: "min" integer { low: 0 high: 60 } }
      parameters { name: "reduce" flag {} }
      parameters { name: "glaze" categorical { options: "cel & don" options: "<tenmoku>" options: "shino" } }
      objective { direction: DIRECTION_LOWER_IS_BETTER }
      trial_budget: 40
    }
    status { phase: CAMPAIGN_PHASE_DONE reason: DONE_REASON_BUDGET phase_message: "budget <spent>" generation: 3
             population_size: 4 step_size: 0.2 axis_ratio: 2 }
  )pb");
  for (int g = 1; g <= 3; ++g) {
    v1::GenerationView& view = in.generations.emplace_back();
    view.set_generation(g);
    view.set_population_size(4);
    view.set_cohort_size(4);
    view.set_mean_staleness(0.25 * g);
    view.set_max_staleness(g);
    view.set_step_size(0.3 / g);
    view.set_axis_ratio(1 + g);
    view.set_best_trial(1);
    *view.add_marginals() = Parse<v1::Marginal>("parameter: 'peak' mean: 1200 spread: 30 low: 1100 high: 1300");
    *view.add_marginals() = Parse<v1::Marginal>("parameter: 'rate' mean: 0.01 spread: 0.02 low: 1e-4 high: 1");
    *view.add_marginals() = Parse<v1::Marginal>("parameter: 'hold' mean: 20 spread: 5 low: 0 high: 60");
    *view.add_marginals() = Parse<v1::Marginal>("parameter: 'reduce' probabilities: 0.6");
    *view.add_marginals() = Parse<v1::Marginal>(
        "parameter: 'glaze' options: ['cel & don', '<tenmoku>', 'shino'] probabilities: [0.2, 0.3, 0.5]");
  }
  for (int n = 1; n <= 12; ++n) {
    v1::Trial t = Scored(n, 100.0 / n, (n - 1) / 4);
    (*t.mutable_candidate()->mutable_values())["peak"].set_real(1150 + n);
    (*t.mutable_candidate()->mutable_values())["rate"].set_real(0.001 * n);
    (*t.mutable_candidate()->mutable_values())["hold"].set_integer(n);
    (*t.mutable_candidate()->mutable_values())["reduce"].set_flag(n % 2 == 0);
    (*t.mutable_candidate()->mutable_values())["glaze"].set_categorical("<tenmoku>");
    t.set_use(v1::OUTCOME_USE_CONSUMED);
    t.set_consumed_by(t.generation() + 1);
    t.set_worker("kiln <2>");
    t.set_reported_at_unix_ms(1'767'225'600'000 + n);
    in.trials.push_back(t);
  }
  in.trials[11].mutable_outcome()->set_note("</td><script>alert(1)</script> \"quoted\"");
  in.generated_at = absl::FromUnixSeconds(1'767'225'600);  // 2026-01-01 00:00:00 UTC
  in.server = "127.0.0.1:7075";
  return in;
}

TEST(CampaignReportHtml, HasEveryPlotTheCautionAndTheTables) {
  const std::string html = CampaignReportHtml(MixedReport());
  EXPECT_THAT(html, HasSubstr("<!DOCTYPE html>"));
  EXPECT_THAT(html, HasSubstr("<meta charset=\"utf-8\">"));
  for (const char* id : {"plot-best", "plot-step-size", "plot-axis-ratio", "plot-states", "plot-staleness",
                         "plot-parameter-0", "plot-parameter-1", "plot-parameter-2", "plot-parameter-3",
                         "plot-parameter-4"}) {
    EXPECT_THAT(html, HasSubstr(absl::StrCat("<svg class=\"plot\" id=\"", id, "\""))) << id;
  }
  // Every plot drew something; none shows its empty message.
  int plots = 0, data = 0;
  for (size_t at = html.find("<svg class=\"plot\""); at != std::string::npos;
       at = html.find("<svg class=\"plot\"", at + 1)) {
    ++plots;
  }
  for (size_t at = html.find("<g class=\"data\""); at != std::string::npos; at = html.find("<g class=\"data\"", at + 1)) {
    ++data;
  }
  EXPECT_EQ(plots, 10);
  EXPECT_EQ(data, 10);
  EXPECT_THAT(html, Not(HasSubstr("class=\"empty\"")));
  EXPECT_THAT(html, HasSubstr("Caution: candidates are suggestions"));
  EXPECT_THAT(html, HasSubstr("local safety rules"));
  EXPECT_THAT(html, HasSubstr("done (budget)"));
  EXPECT_THAT(html, HasSubstr("Report made 2026-01-01 00:00:00 UTC from the ogive server 127.0.0.1:7075"));
  EXPECT_THAT(html, HasSubstr("<h2>Best trials</h2>"));
  EXPECT_THAT(html, HasSubstr("<td>score 8.33333</td>"));  // trial 12, the best, in the first row
  EXPECT_THAT(html, HasSubstr("1162 &lt;b&gt;degC&lt;/b&gt;"));  // a value with its unit
  EXPECT_THAT(html, HasSubstr("<h2>Design</h2>"));
  EXPECT_THAT(html, HasSubstr("real [1e-04, 1], log scale"));
  // The scores span a decade and are positive: a log axis.
  EXPECT_THAT(html, HasSubstr("score (log scale)"));
}

TEST(CampaignReportHtml, EscapesUserTextAndLoadsNothing) {
  const std::string html = CampaignReportHtml(MixedReport());
  EXPECT_THAT(html, Not(HasSubstr("<script")));
  EXPECT_THAT(html, Not(HasSubstr("<b>")));
  EXPECT_THAT(html, Not(HasSubstr("<tenmoku>")));
  EXPECT_THAT(html, Not(HasSubstr("kiln <2>")));
  EXPECT_THAT(html, HasSubstr("&lt;script&gt;alert(&#39;x&#39;)&lt;/script&gt; &amp; more"));
  EXPECT_THAT(html, HasSubstr("&lt;/td&gt;&lt;script&gt;alert(1)&lt;/script&gt; &quot;quoted&quot;"));
  EXPECT_THAT(html, HasSubstr("cel &amp; don"));
  EXPECT_THAT(html, HasSubstr("budget &lt;spent&gt;"));
  // No external references: no URLs, no src or href attributes, no url() but the clip paths'.
  EXPECT_THAT(html, Not(HasSubstr("http:")));
  EXPECT_THAT(html, Not(HasSubstr("https:")));
  EXPECT_THAT(html, Not(HasSubstr(" src=")));
  EXPECT_THAT(html, Not(HasSubstr(" href=")));
  EXPECT_FALSE(std::regex_search(html, std::regex("url\\([^#]")));
}

TEST(CampaignReportHtml, AGradedCampaignPlotsGradesOnTheirScale) {
  ReportInput in;
  in.view = Parse<v1::CampaignView>(R"pb(
    name: "glaze"
    design { name: "glaze" parameters { name: "temp" real { low: 0 high: 1 } }
             objective { grade_scale { labels: "cracked" labels: "poor" labels: "good" } } }
  )pb");
  for (int n = 1; n <= 3; ++n) {
    v1::Trial& t = in.trials.emplace_back();
    t.set_number(n);
    t.set_state(v1::TRIAL_STATE_REPORTED);
    t.mutable_outcome()->set_grade(n == 2 ? "good" : "poor");
  }
  const std::string html = CampaignReportHtml(in);
  const size_t best = html.find("id=\"plot-best\"");
  ASSERT_NE(best, std::string::npos);
  const std::string svg = html.substr(best, html.find("</svg>", best) - best);
  for (const char* label : {">cracked</text>", ">poor</text>", ">good</text>"}) EXPECT_THAT(svg, HasSubstr(label));
  EXPECT_THAT(svg, HasSubstr("class=\"step\""));
  // No update yet: the generation plots say so instead of drawing.
  EXPECT_THAT(html, HasSubstr(">no update yet</text>"));
}

TEST(CampaignReportHtml, AFreshCampaignSaysWhatIsMissingInEveryPlot) {
  ReportInput in = MixedReport();
  in.trials.clear();
  in.generations.clear();
  const std::string html = CampaignReportHtml(in);
  EXPECT_THAT(html, Not(HasSubstr("<g class=\"data\"")));
  EXPECT_THAT(html, HasSubstr(">no scored or graded trial yet</text>"));
  EXPECT_THAT(html, HasSubstr(">no trials yet</text>"));
  EXPECT_THAT(html, HasSubstr("No informative outcome yet."));
  int empty = 0;
  for (size_t at = html.find("class=\"empty\""); at != std::string::npos; at = html.find("class=\"empty\"", at + 1)) {
    ++empty;
  }
  EXPECT_EQ(empty, 10);
}

// ---- Export ----

v1::CampaignDesign ExportDesign() {
  return Parse<v1::CampaignDesign>(R"pb(
    name: "e"
    parameters { name: "peak" unit: "deg, C" real { low: 0 high: 10 } }
    parameters { name: "hold" integer { low: 0 high: 9 } }
    parameters { name: "glaze" categorical { options: "a,b" options: "c" } }
    parameters { name: "reduce" flag {} }
    objective { grade_scale { labels: "poor" labels: "good" } }
  )pb");
}

std::vector<v1::Trial> ExportTrials() {
  std::vector<v1::Trial> trials(2);
  trials[0] = Parse<v1::Trial>(R"pb(
    number: 1 state: TRIAL_STATE_REPORTED generation: 2 worker: "w \"1\"" reported_by: "bench-3"
    lease_deadline_unix_ms: 1767225600250 reported_at_unix_ms: 1767225601005 use: OUTCOME_USE_CONSUMED
    consumed_by: 3 late: true outcome { grade: "good" note: "line one\nline \"two\", end" }
  )pb");
  (*trials[0].mutable_candidate()->mutable_values())["peak"].set_real(0.1);
  (*trials[0].mutable_candidate()->mutable_values())["hold"].set_integer(7);
  (*trials[0].mutable_candidate()->mutable_values())["glaze"].set_categorical("a,b");
  (*trials[0].mutable_candidate()->mutable_values())["reduce"].set_flag(true);
  trials[1] = Parse<v1::Trial>(R"pb(
    number: 2 state: TRIAL_STATE_LEASED generation: 3 worker: "w2" lease_deadline_unix_ms: 1767225700000
    consumed_by: -1 replicate_of: 1
  )pb");
  return trials;
}

TEST(TrialsExportCsv, FollowsRfc4180) {
  const std::string csv = TrialsExportCsv(ExportDesign(), ExportTrials());
  const std::string expected =
      "trial,state,outcome,score,grade,note,\"peak (deg, C)\",hold,glaze,reduce,generation,consumed_by,use,late,"
      "worker,reported_by,reported_at,lease_deadline,replicate_of\r\n"
      "1,reported,grade,,good,\"line one\nline \"\"two\"\", end\",0.1,7,\"a,b\",true,2,3,consumed,true,"
      "\"w \"\"1\"\"\",bench-3,2026-01-01T00:00:01.005Z,2026-01-01T00:00:00.250Z,\r\n"
      "2,leased,,,,,,,,,3,,,false,w2,,,2026-01-01T00:01:40.000Z,1\r\n";
  EXPECT_EQ(csv, expected);
}

TEST(TrialsExportJson, IsAnArrayOfObjectsWithNullsForWhatIsMissing) {
  const std::string json = TrialsExportJson(ExportDesign(), ExportTrials());
  EXPECT_THAT(json, HasSubstr("{\"trial\":1,\"state\":\"reported\",\"outcome\":\"grade\",\"score\":null,"
                              "\"grade\":\"good\",\"note\":\"line one\\nline \\\"two\\\", end\","
                              "\"values\":{\"peak\":0.1,\"hold\":7,\"glaze\":\"a,b\",\"reduce\":true},"
                              "\"generation\":2,\"consumed_by\":3,\"use\":\"consumed\",\"late\":true,"
                              "\"worker\":\"w \\\"1\\\"\",\"reported_by\":\"bench-3\","
                              "\"reported_at\":\"2026-01-01T00:00:01.005Z\","
                              "\"lease_deadline\":\"2026-01-01T00:00:00.250Z\",\"replicate_of\":null}"));
  EXPECT_THAT(json, HasSubstr("{\"trial\":2,\"state\":\"leased\",\"outcome\":null,\"score\":null,\"grade\":null,"
                              "\"note\":\"\",\"values\":{},\"generation\":3,\"consumed_by\":null,\"use\":null,"
                              "\"late\":false,\"worker\":\"w2\",\"reported_by\":\"\",\"reported_at\":null,"));
  EXPECT_THAT(json, HasSubstr("\"replicate_of\":1}"));
  EXPECT_EQ(json.front(), '[');
  EXPECT_EQ(json.substr(json.size() - 4), "}\n]\n");
  EXPECT_EQ(TrialsExportJson(ExportDesign(), {}), "[]\n");
}

TEST(JsonString, EscapesQuotesBackslashesAndControlCharacters) {
  EXPECT_EQ(JsonString("a\"b\\c"), "\"a\\\"b\\\\c\"");
  EXPECT_EQ(JsonString(std::string("\t\n\r\x01\x1f", 5)), "\"\\t\\n\\r\\u0001\\u001f\"");
  EXPECT_EQ(JsonString("gr\xc3\xbcn"), "\"gr\xc3\xbcn\"");
}

TEST(IsoUtcMillis, IsIso8601InUtcWithMilliseconds) {
  EXPECT_EQ(IsoUtcMillis(1'767'225'600'000), "2026-01-01T00:00:00.000Z");
  EXPECT_EQ(IsoUtcMillis(1'767'225'600'250), "2026-01-01T00:00:00.250Z");
  EXPECT_EQ(IsoUtcMillis(0), "");
}

TEST(WriteFileAtomically, WritesTheWholeFileOrSaysWhyNot) {
  const std::string path = ::testing::TempDir() + "/ogive_report_test_write.html";
  ASSERT_TRUE(WriteFileAtomically(path, "<p>first</p>").ok());
  ASSERT_TRUE(WriteFileAtomically(path, "<p>second</p>").ok());
  std::FILE* f = std::fopen(path.c_str(), "rb");
  ASSERT_NE(f, nullptr);
  char buffer[64] = {0};
  const size_t n = std::fread(buffer, 1, sizeof buffer, f);
  std::fclose(f);
  EXPECT_EQ(std::string(buffer, n), "<p>second</p>");
  std::remove(path.c_str());
  const absl::Status status = WriteFileAtomically("/nonexistent-dir/r.html", "x");
  EXPECT_EQ(status.code(), absl::StatusCode::kInvalidArgument);
  EXPECT_THAT(std::string(status.message()), HasSubstr("/nonexistent-dir/r.html"));
  EXPECT_THAT(std::string(status.message()), HasSubstr("No such file or directory"));
}

TEST(ReportCommands, AreRegisteredWithTheirOptions) {
  const auto parse = [](std::vector<std::string> args) {
    return ParseCommandLine(args, [](const char*) -> const char* { return nullptr; });
  };
  absl::StatusOr<Invocation> inv = parse({"campaign", "report", "kiln", "-o", "k.html"});
  ASSERT_TRUE(inv.ok()) << inv.status();
  EXPECT_EQ(inv->args.Get("--output"), "k.html");
  inv = parse({"campaign", "export", "kiln", "--csv", "--output=t.csv"});
  ASSERT_TRUE(inv.ok()) << inv.status();
  EXPECT_TRUE(inv->args.Has("--csv"));
  inv = parse({"--json", "campaign", "export", "kiln"});
  ASSERT_TRUE(inv.ok()) << inv.status();
  EXPECT_TRUE(inv->globals.json);
  // The report is a file, not data: --json does not apply.
  inv = parse({"campaign", "report", "kiln", "--json"});
  ASSERT_FALSE(inv.ok());
  EXPECT_THAT(std::string(inv.status().message()), HasSubstr("--json does not apply"));
  inv = parse({"campaign", "export"});
  ASSERT_FALSE(inv.ok());
  EXPECT_THAT(std::string(inv.status().message()), HasSubstr("missing argument: NAME"));
}

}  // namespace
}  // namespace ogive::cli
