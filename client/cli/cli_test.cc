// Tests of the parts of `ogive` that need no server: argument parsing, outcome lines, environment
// names, CSV, design files and the views.
#include "client/cli/cli.h"

#include <sys/wait.h>

#include <csignal>
#include <cstdio>
#include <fstream>
#include <map>
#include <string>
#include <vector>

#include "absl/strings/match.h"
#include "absl/strings/str_join.h"
#include "absl/strings/str_replace.h"
#include "client/cli/args.h"
#include "client/cli/candidate_env.h"
#include "client/cli/csv_reader.h"
#include "client/cli/design_file.h"
#include "client/cli/format.h"
#include "client/cli/import_plan.h"
#include "client/cli/outcome_line.h"
#include "client/cli/trial_export.h"
#include "client/cli/views.h"
#include "client/cli/work.h"
#include "client/client_tls.h"
#include "client/ogive_client.h"
#include "gmock/gmock.h"
#include "google/protobuf/text_format.h"
#include "gtest/gtest.h"

namespace ogive::cli {
namespace {

using ::testing::ElementsAre;
using ::testing::HasSubstr;

v1::Objective Scored() {
  v1::Objective objective;
  objective.set_direction(v1::DIRECTION_LOWER_IS_BETTER);
  return objective;
}

v1::Objective Graded() {
  v1::Objective objective;
  for (const char* label : {"cracked", "Poor", "fair", "good"}) {
    objective.mutable_grade_scale()->add_labels(label);
  }
  return objective;
}

v1::CampaignDesign Design(const std::string& text) {
  v1::CampaignDesign design;
  EXPECT_TRUE(google::protobuf::TextFormat::ParseFromString(text, &design)) << text;
  return design;
}

constexpr char kMixedDesign[] = R"pb(
  name: "anneal"
  parameters {
    name: "peak-temp"
    unit: "degC"
    real { low: 700 high: 900 }
  }
  parameters {
    name: "passes"
    integer { low: 1 high: 6 }
  }
  parameters {
    name: "vacuum"
    flag {}
  }
  parameters {
    name: "gas"
    categorical { options: "argon" options: "nitrogen" }
  }
  objective { direction: DIRECTION_LOWER_IS_BETTER }
)pb";

v1::Candidate MixedCandidate() {
  v1::Candidate c;
  (*c.mutable_values())["peak-temp"].set_real(812.5);
  (*c.mutable_values())["passes"].set_integer(3);
  (*c.mutable_values())["vacuum"].set_flag(true);
  (*c.mutable_values())["gas"].set_categorical("argon");
  return c;
}

// ---- Outcome lines ----

TEST(OutcomeLineTest, NumbersAreScores) {
  struct Case {
    const char* line;
    double score;
  };
  for (const Case& c : {Case{"3.25", 3.25}, Case{"-17", -17}, Case{"1e3", 1000},
                        Case{"1.5E-3", 1.5e-3}, Case{"+2.5e+2", 250}, Case{"  42  ", 42},
                        Case{"\t0.5\r", 0.5}, Case{"0", 0}, Case{".5", 0.5}}) {
    const v1::Outcome o = ParseOutcomeLine(c.line, Scored());
    ASSERT_TRUE(o.has_score()) << c.line << " -> " << o.ShortDebugString();
    EXPECT_EQ(o.score(), c.score) << c.line;
  }
}

TEST(OutcomeLineTest, NonFiniteNumbersAreVoid) {
  for (const char* line : {"nan", "NaN", "inf", "-inf", "Infinity", "1e999"}) {
    const v1::Outcome o = ParseOutcomeLine(line, Scored());
    EXPECT_TRUE(o.has_void_()) << line;
    EXPECT_THAT(o.note(), HasSubstr("not a finite number")) << line;
  }
}

TEST(OutcomeLineTest, TextThatIsNotANumberIsVoidAndQuoted) {
  for (const char* line : {"3.25 mm", "score: 3", "done", "3,25", "0x"}) {
    const v1::Outcome o = ParseOutcomeLine(line, Scored());
    EXPECT_TRUE(o.has_void_()) << line;
    EXPECT_THAT(o.note(), HasSubstr(absl::StrCat("\"", line, "\""))) << line;
  }
}

TEST(OutcomeLineTest, EmptyOutputIsVoid) {
  for (const char* line : {"", "   ", "\t"}) {
    const v1::Outcome o = ParseOutcomeLine(line, Scored());
    EXPECT_TRUE(o.has_void_());
    EXPECT_THAT(o.note(), HasSubstr("printed nothing"));
  }
}

TEST(OutcomeLineTest, InfeasibleInAnyCase) {
  for (const char* line : {"infeasible", "INFEASIBLE", " Infeasible \n"}) {
    EXPECT_TRUE(ParseOutcomeLine(line, Scored()).has_infeasible()) << line;
    EXPECT_TRUE(ParseOutcomeLine(line, Graded()).has_infeasible()) << line;
  }
}

TEST(OutcomeLineTest, GradeLabelsMatchInAnyCaseAndKeepTheScaleSpelling) {
  EXPECT_EQ(ParseOutcomeLine("good", Graded()).grade(), "good");
  EXPECT_EQ(ParseOutcomeLine("GOOD", Graded()).grade(), "good");
  EXPECT_EQ(ParseOutcomeLine("  poor ", Graded()).grade(), "Poor");
  const v1::Outcome unknown = ParseOutcomeLine("excellent", Graded());
  EXPECT_TRUE(unknown.has_void_());
  EXPECT_THAT(unknown.note(), HasSubstr("cracked, Poor, fair, good"));
  EXPECT_THAT(unknown.note(), HasSubstr("\"excellent\""));
}

TEST(OutcomeLineTest, NumbersOnAGradedCampaignAndLabelsOnAScoredCampaignAreVoid) {
  EXPECT_TRUE(ParseOutcomeLine("3.5", Graded()).has_void_());
  EXPECT_TRUE(ParseOutcomeLine("good", Scored()).has_void_());
}

TEST(LastLineTest, KeepsTheLastNonEmptyLineAcrossChunks) {
  LastLine last;
  EXPECT_EQ(last.Get(), "");
  last.Feed("progress 10%\nprogress 5");
  last.Feed("0%\n3.2");
  EXPECT_EQ(last.Get(), "3.2");  // an unterminated final line counts
  last.Feed("5\n\n   \n");
  EXPECT_EQ(last.Get(), "3.25");  // blank lines after it do not
}

TEST(LastLineTest, BoundsVeryLongLines) {
  LastLine last;
  last.Feed(std::string(3 * LastLine::kMaxLineBytes, 'x'));
  last.Feed("\n");
  EXPECT_EQ(last.Get().size(), LastLine::kMaxLineBytes);
}

TEST(QuoteForNoteTest, EscapesAndCuts) {
  EXPECT_EQ(QuoteForNote("a\"b\\c\x01"), "\"a\\\"b\\\\c\\x01\"");
  EXPECT_EQ(QuoteForNote("abcdef", 3), "\"abc...\"");
}

// ---- Environment ----

TEST(EnvNameTest, UpperCasesAndReplacesDashesAndDots) {
  EXPECT_EQ(EnvName("peak-temp"), "OGIVE_PEAK_TEMP");
  EXPECT_EQ(EnvName("a.b_c"), "OGIVE_A_B_C");
  EXPECT_EQ(EnvName("Rate2"), "OGIVE_RATE2");
}

TEST(EnvValueTest, FormatsEachKind) {
  v1::Value v;
  v.set_real(0.1);
  EXPECT_EQ(EnvValue(v), "0.10000000000000001");  // %.17g: exact
  v.set_real(812.5);
  EXPECT_EQ(EnvValue(v), "812.5");
  v.set_integer(-3);
  EXPECT_EQ(EnvValue(v), "-3");
  v.set_flag(true);
  EXPECT_EQ(EnvValue(v), "1");
  v.set_flag(false);
  EXPECT_EQ(EnvValue(v), "0");
  v.set_categorical("argon");
  EXPECT_EQ(EnvValue(v), "argon");
}

TEST(CandidateEnvTest, OneVariablePerParameterInDesignOrder) {
  const auto env = CandidateEnv(Design(kMixedDesign), MixedCandidate());
  using P = std::pair<std::string, std::string>;
  EXPECT_THAT(env, ElementsAre(P{"OGIVE_PEAK_TEMP", "812.5"}, P{"OGIVE_PASSES", "3"},
                               P{"OGIVE_VACUUM", "1"}, P{"OGIVE_GAS", "argon"}));
}

TEST(CheckEnvNamesTest, RefusesCollisions) {
  EXPECT_TRUE(CheckEnvNames(Design(kMixedDesign)).ok());
  const absl::Status twins = CheckEnvNames(Design(R"pb(
    parameters {
      name: "a-b"
      flag {}
    }
    parameters {
      name: "a_b"
      flag {}
    }
  )pb"));
  EXPECT_EQ(twins.code(), absl::StatusCode::kInvalidArgument);
  EXPECT_THAT(std::string(twins.message()), HasSubstr("'a-b' and 'a_b' both map to"));
  EXPECT_THAT(std::string(twins.message()), HasSubstr("OGIVE_A_B"));
  const absl::Status reserved = CheckEnvNames(Design(R"pb(parameters {
                                                            name: "trial"
                                                            flag {}
                                                          })pb"));
  EXPECT_THAT(std::string(reserved.message()),
              HasSubstr("OGIVE_TRIAL, which the worker loop sets itself"));
}

TEST(CandidateJsonTest, TypedValuesInDesignOrder) {
  v1::Candidate c = MixedCandidate();
  (*c.mutable_values())["peak-temp"].set_real(800);
  (*c.mutable_values())["gas"].set_categorical("ni\"tro\\gen");
  EXPECT_EQ(CandidateJson(Design(kMixedDesign), c),
            "{\"peak-temp\": 800.0, \"passes\": 3, \"vacuum\": true, "
            "\"gas\": \"ni\\\"tro\\\\gen\"}\n");
}

// ---- CSV and formatting ----

TEST(CsvTest, QuotesOnlyWhatNeedsIt) {
  EXPECT_EQ(CsvField("plain"), "plain");
  EXPECT_EQ(CsvField(""), "");
  EXPECT_EQ(CsvField("a,b"), "\"a,b\"");
  EXPECT_EQ(CsvField("say \"hi\""), "\"say \"\"hi\"\"\"");
  EXPECT_EQ(CsvField("two\nlines"), "\"two\nlines\"");
  EXPECT_EQ(CsvField("cr\r"), "\"cr\r\"");
  EXPECT_EQ(CsvField(" spaced "), " spaced ");
  EXPECT_EQ(CsvRow({"1", "a,b", ""}), "1,\"a,b\",\n");
}

TEST(FormatTest, ExactNumbersAreShortest) {
  EXPECT_EQ(FormatExact(3.25), "3.25");
  EXPECT_EQ(FormatExact(0.1), "0.1");
  EXPECT_EQ(FormatExact(1e-7), "1e-07");
  EXPECT_EQ(FormatShort(1.0 / 3), "0.333333");
}

TEST(TableTest, AlignsColumns) {
  Table table({"A", "NUMBER"}, {false, true});
  table.AddRow({"long name", "3"});
  table.AddRow({"x", "12345678"});
  EXPECT_EQ(table.Render(),
            "A            NUMBER\n"
            "long name         3\n"
            "x          12345678\n");
}

// `campaign trials --csv` and `campaign export --csv` print one layout, and `import` reads it back: a
// file exported from a campaign and imported into it is found stored already, row for row (whatever
// the separator a spreadsheet program saved it with, and with its byte-order mark).
TEST(ExportImportTest, AnExportImportedIntoItsOwnCampaignChangesNothing) {
  std::vector<v1::Trial> trials;
  const char* const notes[] = {"the program exited with status 3, \"oops\"", "", "line one\nline two; ok"};
  for (int n = 1; n <= 6; ++n) {
    v1::Trial& t = trials.emplace_back();
    t.set_number(n);
    t.set_generation(n / 3);
    t.set_worker("node1:42");
    t.set_reported_by("farm-a");
    *t.mutable_candidate() = MixedCandidate();
    switch (n % 4) {
      case 0:
        t.set_state(v1::TRIAL_STATE_VOIDED);
        t.mutable_outcome()->mutable_void_();
        break;
      case 1:
        t.set_state(v1::TRIAL_STATE_REPORTED);
        t.mutable_outcome()->set_score(0.1 * n + 1e-17 * n);  // exact digits survive the trip
        break;
      case 2:
        t.set_state(v1::TRIAL_STATE_REPORTED);
        t.mutable_outcome()->mutable_infeasible();
        break;
      default:
        t.set_state(v1::TRIAL_STATE_LAPSED);  // no outcome: skipped
    }
    if (t.has_outcome()) t.mutable_outcome()->set_note(notes[n % 3]);
  }
  const v1::CampaignDesign design = Design(kMixedDesign);
  const std::string csv = TrialsExportCsv(design, trials);
  std::string semicolons = csv;  // the same records with ';' between fields, as some spreadsheets save them
  {
    absl::StatusOr<std::vector<CsvRecord>> records = ParseCsv(csv);
    ASSERT_TRUE(records.ok()) << records.status();
    semicolons = "\xEF\xBB\xBF";
    for (const CsvRecord& r : *records) {
      std::vector<std::string> quoted;
      for (const std::string& f : r.fields) quoted.push_back(absl::StrCat("\"", absl::StrReplaceAll(f, {{"\"", "\"\""}}), "\""));
      absl::StrAppend(&semicolons, absl::StrJoin(quoted, ";"), "\r\n");
    }
  }
  for (const std::string& text : {csv, semicolons}) {
    const absl::string_view body = StripByteOrderMark(text);
    const char separator = DetectSeparator(body);
    absl::StatusOr<std::vector<CsvRecord>> records = ParseCsv(body, separator);
    ASSERT_TRUE(records.ok()) << records.status();
    const ImportPlan plan = PlanImport(*records, design, trials, separator != ',');
    EXPECT_TRUE(plan.bad.empty()) << plan.bad[0].reason;
    EXPECT_TRUE(plan.to_report.empty());
    EXPECT_EQ(plan.already_stored.size(), 5u);  // trials 1, 2, 4, 5, 6 have outcomes
    EXPECT_EQ(plan.without_outcome, 1);         // trial 3 lapsed
  }
  // Into a campaign where those trials have no outcome yet, the same file reports each outcome once.
  std::vector<v1::Trial> fresh = trials;
  for (v1::Trial& t : fresh) {
    t.clear_outcome();
    t.set_state(v1::TRIAL_STATE_LEASED);
  }
  absl::StatusOr<std::vector<CsvRecord>> records = ParseCsv(csv);
  ASSERT_TRUE(records.ok());
  const ImportPlan plan = PlanImport(*records, design, fresh);
  ASSERT_EQ(plan.to_report.size(), 5u);
  for (const ImportRow& row : plan.to_report) {
    const v1::Trial& original = trials[static_cast<size_t>(row.trial - 1)];
    EXPECT_EQ(row.outcome.SerializeAsString(), original.outcome().SerializeAsString()) << row.trial;
  }
}

TEST(CsvReaderTest, ByteOrderMarkAndSeparatorsOfSpreadsheetPrograms) {
  EXPECT_EQ(StripByteOrderMark("\xEF\xBB\xBFtrial,outcome"), "trial,outcome");
  EXPECT_EQ(StripByteOrderMark("trial"), "trial");
  EXPECT_EQ(DetectSeparator("trial;outcome;note\n1;3,5;a,b\n"), ';');
  EXPECT_EQ(DetectSeparator("trial\toutcome\n"), '\t');
  EXPECT_EQ(DetectSeparator("trial,outcome\n"), ',');
  EXPECT_EQ(DetectSeparator("\"a;b;c\",outcome\n"), ',');  // separators inside quotes do not count
  EXPECT_EQ(DetectSeparator("trial\n"), ',');
  EXPECT_EQ(DetectSeparator("1;3,25\n"), ';');  // no header: the comma beside ';' is a decimal comma
  EXPECT_EQ(DetectSeparator("1\t3,25\n"), '\t');
  EXPECT_EQ(DetectSeparator("1,good,dull; matte\n"), ',');
  absl::StatusOr<std::vector<CsvRecord>> records = ParseCsv("trial;outcome\r\n7;\"3,25\"\r\n", ';');
  ASSERT_TRUE(records.ok());
  ASSERT_EQ(records->size(), 2u);
  EXPECT_THAT((*records)[1].fields, testing::ElementsAre("7", "3,25"));
  // A decimal comma is a score where fields are separated by ';', and nowhere else.
  v1::Trial t;
  t.set_number(7);
  t.set_state(v1::TRIAL_STATE_LEASED);
  const ImportPlan with_comma = PlanImport(*records, Design(kMixedDesign), {t}, /*decimal_comma=*/true);
  ASSERT_EQ(with_comma.to_report.size(), 1u);
  EXPECT_EQ(with_comma.to_report[0].outcome.score(), 3.25);
  const ImportPlan without = PlanImport(*records, Design(kMixedDesign), {t}, /*decimal_comma=*/false);
  EXPECT_EQ(without.bad.size(), 1u);
  // The same without a header row, as a spreadsheet saves a quick list: separator and decimal comma
  // are found from the data alone.
  const std::string headerless = "\xEF\xBB\xBF" "7;3,25\r\n";
  const absl::string_view body = StripByteOrderMark(headerless);
  const char separator = DetectSeparator(body);
  absl::StatusOr<std::vector<CsvRecord>> rows = ParseCsv(body, separator);
  ASSERT_TRUE(rows.ok());
  const ImportPlan quick = PlanImport(*rows, Design(kMixedDesign), {t}, separator != ',');
  ASSERT_EQ(quick.to_report.size(), 1u) << (quick.bad.empty() ? "" : quick.bad[0].reason);
  EXPECT_EQ(quick.to_report[0].outcome.score(), 3.25);
}

// An export of one campaign imported into another whose trials have the same numbers reports
// nothing: each row's candidate differs from that campaign's trial, and the row says so.
TEST(ExportImportTest, AnExportOfAnotherCampaignIsRefusedRowByRow) {
  const v1::CampaignDesign design = Design(kMixedDesign);
  v1::Trial theirs;
  theirs.set_number(1);
  theirs.set_state(v1::TRIAL_STATE_REPORTED);
  *theirs.mutable_candidate() = MixedCandidate();
  theirs.mutable_outcome()->set_score(2.5);
  v1::Trial ours = theirs;
  ours.clear_outcome();
  ours.set_state(v1::TRIAL_STATE_LEASED);
  (*ours.mutable_candidate()->mutable_values())["peak-temp"].set_real(700.25);
  absl::StatusOr<std::vector<CsvRecord>> records = ParseCsv(TrialsExportCsv(design, {theirs}));
  ASSERT_TRUE(records.ok());
  const ImportPlan plan = PlanImport(*records, design, {ours});
  EXPECT_TRUE(plan.to_report.empty());
  ASSERT_EQ(plan.bad.size(), 1u);
  EXPECT_THAT(plan.bad[0].reason, HasSubstr("peak-temp is '812.5', this campaign's trial 1 has 700.25"));
  // Digits shortened by a spreadsheet still match.
  std::string csv = TrialsExportCsv(design, {theirs});
  ours = theirs;
  ours.clear_outcome();
  (*ours.mutable_candidate()->mutable_values())["peak-temp"].set_real(812.5 + 1e-12);
  records = ParseCsv(csv);
  ASSERT_TRUE(records.ok());
  EXPECT_EQ(PlanImport(*records, design, {ours}).to_report.size(), 1u);
}

TEST(ViewsTest, TrialsTableShowsOutcomesAndParameters) {
  v1::Trial t;
  t.set_number(12);
  t.set_state(v1::TRIAL_STATE_REPORTED);
  t.mutable_outcome()->set_score(3.25);
  t.set_use(v1::OUTCOME_USE_CONSUMED);
  t.set_reported_by("kiln-operator");
  *t.mutable_candidate() = MixedCandidate();
  const std::string table = TrialsTable(Design(kMixedDesign), {t});
  EXPECT_THAT(table, HasSubstr("REPORTED BY"));
  EXPECT_THAT(table, HasSubstr("kiln-operator"));
  EXPECT_THAT(table, HasSubstr("peak-temp (degC)"));
  EXPECT_THAT(table, HasSubstr("score 3.25"));
  EXPECT_THAT(table, HasSubstr("consumed"));
  EXPECT_THAT(table, HasSubstr("argon"));
}

TEST(ViewsTest, SummaryShowsTheDistributionInUserUnits) {
  v1::CampaignView view;
  view.set_name("anneal");
  *view.mutable_design() = Design(kMixedDesign);
  v1::StatusSummary& s = *view.mutable_status();
  s.set_phase(v1::CAMPAIGN_PHASE_DONE);
  s.set_reason(v1::DONE_REASON_BUDGET);
  s.set_phase_message("the trial budget of 40 is spent");
  s.set_generation(5);
  s.mutable_best()->set_number(12);
  s.mutable_best()->mutable_outcome()->set_score(3.25);
  *s.mutable_best()->mutable_candidate() = MixedCandidate();
  v1::Marginal* m = s.add_marginals();
  m->set_parameter("peak-temp");
  m->set_unit("degC");
  m->set_mean(812.5);
  m->set_spread(30.25);
  m = s.add_marginals();
  m->set_parameter("vacuum");
  m->add_probabilities(0.62);
  m = s.add_marginals();
  m->set_parameter("gas");
  m->add_options("argon");
  m->add_options("nitrogen");
  m->add_probabilities(0.75);
  m->add_probabilities(0.25);
  const std::string text = CampaignSummary(view);
  EXPECT_THAT(text, HasSubstr("done (budget): the trial budget of 40 is spent"));
  EXPECT_THAT(text, HasSubstr("score 3.25 (trial 12)"));
  EXPECT_THAT(text, HasSubstr("peak-temp = 812.5 degC"));
  EXPECT_THAT(text, HasSubstr("812.5 ± 30.25 degC  in [700, 900]"));
  EXPECT_THAT(text, HasSubstr("P(on) = 0.62"));
  EXPECT_THAT(text, HasSubstr("argon 0.75, nitrogen 0.25"));
  EXPECT_THAT(text, HasSubstr("scores, lower is better"));
}

TEST(ViewsTest, ProgressBarFillsInProportion) {
  EXPECT_EQ(ProgressBar(0, 120, 10), "[..........]  0/120 (0%)");
  EXPECT_EQ(ProgressBar(60, 120, 10), "[#####.....]  60/120 (50%)");
  EXPECT_EQ(ProgressBar(130, 120, 10), "[##########]  130/120 (100%)");  // past the budget: full
}

TEST(ViewsTest, SummaryAndWatchLinesShowRecentActivityAndBudget) {
  v1::CampaignView view;
  view.set_name("kiln");
  view.mutable_design()->set_trial_budget(120);
  v1::StatusSummary* s = view.mutable_status();
  s->set_reported(30);
  s->set_reports_last_hour(12);
  s->set_as_of_unix_ms(10'000'000);
  v1::WorkerActivity* w = s->add_workers();
  w->set_worker("kiln-2");
  w->set_reports_last_hour(12);
  w->set_last_seen_unix_ms(10'000'000 - 180'000);
  const std::string summary = CampaignSummary(view);
  EXPECT_THAT(summary, ::testing::HasSubstr("12 reports in the last hour; 1 worker seen"));
  EXPECT_THAT(summary, ::testing::HasSubstr("kiln-2  12 reports, last seen 3 min ago"));
  EXPECT_THAT(WatchLine(view, absl::UTCTimeZone()), ::testing::HasSubstr("budget 30/120"));
  EXPECT_THAT(WatchScreen(view, absl::UTCTimeZone()), ::testing::HasSubstr("[##########"));
}

TEST(ViewsTest, TrialStateNames) {
  EXPECT_EQ(TrialStateFromName("lapsed"), v1::TRIAL_STATE_LAPSED);
  EXPECT_EQ(TrialStateFromName("Lapsed"), std::nullopt);
  EXPECT_EQ(TrialStateFromName("done"), std::nullopt);
}

// ---- Argument parsing ----

absl::StatusOr<Invocation> Parse(std::vector<std::string> args,
                                 std::map<std::string, std::string> env = {}) {
  return ParseCommandLine(args, [env](const char* name) -> const char* {
    auto it = env.find(name);
    return it == env.end() ? nullptr : it->second.c_str();
  });
}

std::string UsageMessage(std::vector<std::string> args) {
  absl::StatusOr<Invocation> inv = Parse(std::move(args));
  EXPECT_FALSE(inv.ok());
  EXPECT_EQ(inv.status().code(), absl::StatusCode::kInvalidArgument);
  return std::string(inv.status().message());
}

TEST(ArgsTest, ParsesOptionsInEveryForm) {
  const OptionSpec specs[] = {{"--lease", "", "SECONDS", ""},
                              {"-n", "", "N", ""},
                              {"--json", "", "", ""},
                              {"--count", "-c", "N", ""}};
  absl::StatusOr<ParsedArgs> a = ParseArgs(
      std::vector<std::string>{"x", "--lease=5", "-n", "3", "--json", "-c", "-2", "y"}, specs);
  ASSERT_TRUE(a.ok()) << a.status();
  EXPECT_THAT(a->positional, ElementsAre("x", "y"));
  EXPECT_EQ(a->Get("--lease"), "5");
  EXPECT_EQ(a->Get("-n"), "3");
  EXPECT_EQ(a->Get("--count"), "-2");  // a value may look like a negative number
  EXPECT_TRUE(a->Has("--json"));
  EXPECT_FALSE(a->Has("--other"));
}

TEST(ArgsTest, ErrorsNameTheOption) {
  const OptionSpec specs[] = {{"--lease", "", "SECONDS", ""}, {"--json", "", "", ""}};
  auto message = [&](std::vector<std::string> args) {
    absl::StatusOr<ParsedArgs> a = ParseArgs(args, specs);
    EXPECT_FALSE(a.ok());
    return std::string(a.status().message());
  };
  EXPECT_EQ(message({"--frob"}), "unknown option '--frob'");
  EXPECT_EQ(message({"--frob=3"}), "unknown option '--frob'");
  EXPECT_EQ(message({"--lease"}), "option --lease needs a value (--lease SECONDS)");
  EXPECT_EQ(message({"--lease", "--"}), "option --lease needs a value (--lease SECONDS)");
  EXPECT_EQ(message({"--json=yes"}), "option --json takes no value, got '--json=yes'");
  EXPECT_EQ(message({"--lease", "1", "--lease=2"}), "option --lease is given more than once");
}

TEST(ArgsTest, NothingAfterTheSeparatorIsAnOption) {
  const OptionSpec specs[] = {{"--json", "", "", ""}};
  absl::StatusOr<ParsedArgs> a =
      ParseArgs(std::vector<std::string>{"S", "--", "prog", "--json", "--frob", "--"}, specs);
  ASSERT_TRUE(a.ok()) << a.status();
  EXPECT_FALSE(a->Has("--json"));
  EXPECT_TRUE(a->has_separator);
  EXPECT_THAT(a->after_separator, ElementsAre("prog", "--json", "--frob", "--"));
}

TEST(ArgsTest, ValueParsers) {
  EXPECT_EQ(*ParseFiniteNumber("--score", " -1.5e-3 "), -1.5e-3);
  EXPECT_THAT(std::string(ParseFiniteNumber("--score", "inf").status().message()),
              HasSubstr("--score: must be a finite number"));
  EXPECT_FALSE(ParseFiniteNumber("--score", "NaN").ok());
  EXPECT_FALSE(ParseFiniteNumber("--score", "1e400").ok());
  EXPECT_FALSE(ParseFiniteNumber("--score", "3 apples").ok());
  EXPECT_FALSE(ParseFiniteNumber("--score", "").ok());
  EXPECT_EQ(*ParsePositiveSeconds("--lease", "90"), 90);
  EXPECT_EQ(*ParsePositiveSeconds("--lease", "90s"), 90);
  EXPECT_EQ(*ParsePositiveSeconds("--lease", "15m"), 900);
  EXPECT_EQ(*ParsePositiveSeconds("--lease", "2h"), 7200);
  EXPECT_EQ(*ParsePositiveSeconds("--lease", "2d"), 172800);
  EXPECT_THAT(std::string(ParsePositiveSeconds("--lease", "0").status().message()),
              HasSubstr("--lease: must be a positive duration of at most 3650d, such as 90s, 15m, 2h, 2d or 1h30m "
                        "(a bare number is seconds), got '0'"));
  EXPECT_EQ(*ParseInteger("-n", "7", 1, 10), 7);
  EXPECT_THAT(std::string(ParseInteger("-n", "0", 1, 10).status().message()),
              HasSubstr("-n: must be a whole number in 1..10, got '0'"));
}

TEST(CommandLineTest, FindsTheCommandAndGlobalOptionsAnywhere) {
  absl::StatusOr<Invocation> inv =
      Parse({"--server", "db1:7000", "campaign", "trials", "S", "--state", "voided", "--json"});
  ASSERT_TRUE(inv.ok()) << inv.status();
  EXPECT_THAT(inv->command->words, ElementsAre("campaign", "trials"));
  EXPECT_EQ(inv->globals.server, "db1:7000");
  EXPECT_TRUE(inv->globals.json);
  EXPECT_THAT(inv->args.positional, ElementsAre("S"));
  EXPECT_EQ(inv->args.Get("--state"), "voided");
}

TEST(CommandLineTest, ServerFromTheEnvironmentUnlessGiven) {
  EXPECT_EQ(Parse({"campaign", "list"})->globals.server, kDefaultServer);
  EXPECT_EQ(Parse({"campaign", "list"}, {{"OGIVE_SERVER", "h:1"}})->globals.server, "h:1");
  EXPECT_EQ(Parse({"campaign", "list", "--server=h:2"}, {{"OGIVE_SERVER", "h:1"}})->globals.server,
            "h:2");
  EXPECT_THAT(UsageMessage({"campaign", "list", "--server", "nohost"}),
              HasSubstr("--server: must be HOST:PORT"));
  EXPECT_THAT(UsageMessage({"campaign", "list", "--timeout", "-1"}),
              HasSubstr("--timeout: must be a positive duration of at most 3650d, such as 90s"));
}

TEST(CommandLineTest, TlsOptionsFromTheCommandLineElseTheEnvironment) {
  const client::ClientTls plain = Parse({"campaign", "list"})->globals.tls;
  EXPECT_FALSE(plain.on());
  absl::StatusOr<Invocation> given =
      Parse({"--tls-ca", "ca.pem", "work", "S", "--tls-cert=c.pem", "--tls-key", "c.key", "--tls-server-name",
             "ogive.lab", "--", "prog"},
            {{"OGIVE_TLS_CA", "env-ca.pem"}, {"OGIVE_TLS_SERVER_NAME", "env.name"}});
  ASSERT_TRUE(given.ok()) << given.status();
  EXPECT_TRUE(given->globals.tls.on());
  EXPECT_EQ(given->globals.tls.ca_path, "ca.pem");
  EXPECT_EQ(given->globals.tls.cert_path, "c.pem");
  EXPECT_EQ(given->globals.tls.key_path, "c.key");
  EXPECT_EQ(given->globals.tls.server_name, "ogive.lab");
  absl::StatusOr<Invocation> env = Parse({"ask", "S"}, {{"OGIVE_TLS_CA", "env-ca.pem"},
                                                        {"OGIVE_TLS_CERT", "e.pem"},
                                                        {"OGIVE_TLS_KEY", "e.key"}});
  ASSERT_TRUE(env.ok()) << env.status();
  EXPECT_EQ(env->globals.tls.ca_path, "env-ca.pem");
  EXPECT_EQ(env->globals.tls.cert_path, "e.pem");
  EXPECT_EQ(env->globals.tls.key_path, "e.key");
  EXPECT_TRUE(Parse({"campaign", "list", "--tls"})->globals.tls.on());
  EXPECT_THAT(UsageMessage({"campaign", "list", "--tls-cert", "c.pem"}), HasSubstr("--tls-cert: needs --tls-key"));
  EXPECT_THAT(UsageMessage({"campaign", "list", "--tls-key", "c.key"}), HasSubstr("--tls-key: needs --tls-cert"));
  EXPECT_THAT(UsageMessage({"campaign", "list", "--tls-server-name", "x"}),
              HasSubstr("--tls-server-name: applies to TLS only"));
}

TEST(ClientTlsTest, UnusableFilesNameTheOptionAndThePath) {
  const std::string dir = ::testing::TempDir();
  const std::string cert = dir + "/cli_test_cert.pem";
  const std::string not_pem = dir + "/cli_test_not.pem";
  {
    std::ofstream(cert) << "-----BEGIN CERTIFICATE-----\nAAAA\n-----END CERTIFICATE-----\n";
    std::ofstream(not_pem) << "hello\n";
  }
  client::ClientTls tls;
  tls.ca_path = dir + "/cli_test_missing.pem";
  EXPECT_THAT(std::string(client::TlsChannelCredentials(tls).status().message()),
              HasSubstr("--tls-ca '" + tls.ca_path + "': cannot read"));
  tls.ca_path = not_pem;
  EXPECT_THAT(std::string(client::TlsChannelCredentials(tls).status().message()),
              HasSubstr("--tls-ca '" + not_pem + "': holds no PEM certificate"));
  tls.ca_path = cert;
  tls.cert_path = cert;
  tls.key_path = cert;  // a certificate where the key should be
  EXPECT_THAT(std::string(client::TlsChannelCredentials(tls).status().message()),
              HasSubstr("--tls-key '" + cert + "': holds no PEM private key"));
  tls.key_path = "";
  EXPECT_THAT(std::string(client::TlsChannelCredentials(tls).status().message()),
              HasSubstr("--tls-cert: needs --tls-key"));
  client::ClientOptions options;
  options.tls.ca_path = dir + "/cli_test_missing.pem";
  EXPECT_EQ(client::Client::Open("127.0.0.1:1", options).status().code(), absl::StatusCode::kInvalidArgument);
  EXPECT_EQ(client::Client::Connect("127.0.0.1:1", options), nullptr);
  std::remove(cert.c_str());
  std::remove(not_pem.c_str());
}

TEST(CommandLineTest, UsageErrorsNameTheProblem) {
  EXPECT_THAT(UsageMessage({}), HasSubstr("ogive: missing command"));
  EXPECT_THAT(UsageMessage({"frob"}), HasSubstr("unknown command 'frob'"));
  EXPECT_THAT(UsageMessage({"campaign", "frob"}), HasSubstr("ogive campaign: unknown command 'frob'"));
  EXPECT_THAT(UsageMessage({"campaign"}), HasSubstr("missing subcommand: create, list, show"));
  EXPECT_THAT(UsageMessage({"ask", "S", "--frob"}),
              HasSubstr("ogive ask: unknown option '--frob'\n(see 'ogive ask --help')"));
  EXPECT_THAT(UsageMessage({"ask", "S", "--lease"}), HasSubstr("option --lease needs a value"));
  EXPECT_THAT(UsageMessage({"ask"}), HasSubstr("missing argument: NAME"));
  EXPECT_THAT(UsageMessage({"campaign", "show", "A", "B"}), HasSubstr("unexpected argument 'B'"));
  EXPECT_THAT(UsageMessage({"ask", "S", "--", "x"}), HasSubstr("'--' is only for 'ogive work'"));
  EXPECT_THAT(UsageMessage({"--worker", "w", "ask", "S"}),
              HasSubstr("unknown option '--worker' (a command's options go after it)"));
  EXPECT_THAT(UsageMessage({"work", "S", "--json", "--", "x"}), HasSubstr("--json does not apply"));
}

TEST(CommandLineTest, HelpWinsOverOtherProblems) {
  absl::StatusOr<Invocation> inv = Parse({"ask", "--help", "--frob"});
  ASSERT_TRUE(inv.ok()) << inv.status();
  EXPECT_TRUE(inv->help);
  EXPECT_THAT(inv->command->words, ElementsAre("ask"));
  inv = Parse({"campaign", "-h"});
  ASSERT_TRUE(inv.ok());
  EXPECT_TRUE(inv->help);
  EXPECT_THAT(inv->group, ElementsAre("campaign"));
  inv = Parse({"help", "work"});
  ASSERT_TRUE(inv.ok());
  EXPECT_TRUE(inv->help);
  // After `--`, --help belongs to the program.
  inv = Parse({"work", "S", "--", "prog", "--help"});
  ASSERT_TRUE(inv.ok());
  EXPECT_FALSE(inv->help);
}

TEST(CommandLineTest, EveryCommandHasHelpAndTheTopLevelHasTheSafetyNote) {
  for (const Command& c : Commands()) {
    const std::string help = HelpText(&c, {});
    EXPECT_THAT(help, HasSubstr(absl::StrCat("usage: ogive ", c.words[0]))) << help;
    EXPECT_FALSE(c.summary.empty());
  }
  const std::string top = HelpText(nullptr, {});
  EXPECT_THAT(top, HasSubstr("local safety rules"));
  EXPECT_THAT(top, HasSubstr("before it drives equipment"));
  for (const Command& c : Commands()) EXPECT_THAT(top, HasSubstr(c.summary));
}

TEST(WorkArgsTest, TheProgramFollowsTheSeparator) {
  absl::StatusOr<Invocation> inv = Parse({"work", "S", "--parallel", "4", "--max-trials=10",
                                          "--lease", "60", "--", "./eval.sh", "--fast", "-n", "3"});
  ASSERT_TRUE(inv.ok()) << inv.status();
  absl::StatusOr<WorkOptions> options = WorkOptionsFromArgs(inv->args, "host:1");
  ASSERT_TRUE(options.ok()) << options.status();
  EXPECT_EQ(options->campaign, "S");
  EXPECT_THAT(options->command, ElementsAre("./eval.sh", "--fast", "-n", "3"));
  EXPECT_EQ(options->parallel, 4);
  EXPECT_EQ(options->max_trials, 10);
  EXPECT_EQ(options->lease_seconds, 60);
  EXPECT_EQ(options->worker, "host:1");
}

TEST(WorkArgsTest, ErrorsNameTheOption) {
  auto message = [](std::vector<std::string> args) {
    absl::StatusOr<Invocation> inv = Parse(args);
    if (!inv.ok()) return std::string(inv.status().message());
    absl::StatusOr<WorkOptions> options = WorkOptionsFromArgs(inv->args, "host:1");
    EXPECT_FALSE(options.ok());
    return std::string(options.status().message());
  };
  EXPECT_THAT(message({"work", "S"}), HasSubstr("give the program to run after '--'"));
  EXPECT_THAT(message({"work", "S", "--"}), HasSubstr("give the program to run after '--'"));
  EXPECT_THAT(message({"work", "S", "./eval.sh"}),
              HasSubstr("unexpected argument './eval.sh' (the program goes after '--')"));
  EXPECT_THAT(message({"work", "S", "--parallel", "0", "--", "x"}),
              HasSubstr("--parallel: must be a whole number in 1..1024, got '0'"));
  EXPECT_THAT(message({"work", "S", "--max-trials", "many", "--", "x"}),
              HasSubstr("--max-trials: must be a whole number"));
  EXPECT_THAT(message({"work", "S", "--lease", "-5", "--", "x"}),
              HasSubstr("--lease: must be a positive duration of at most 3650d, such as 90s"));
}

TEST(TellArgsTest, ExactlyOneOutcome) {
  auto outcome = [](std::vector<std::string> args) {
    absl::StatusOr<Invocation> inv = Parse(args);
    EXPECT_TRUE(inv.ok()) << inv.status();
    return OutcomeFromOptions(inv->args);
  };
  EXPECT_EQ(outcome({"tell", "S", "3", "--score", "-2.5e1"})->score(), -25);
  EXPECT_EQ(outcome({"tell", "S", "3", "--grade", "good", "--note", "by eye"})->grade(), "good");
  EXPECT_EQ(outcome({"tell", "S", "3", "--grade", "good", "--note", "by eye"})->note(), "by eye");
  EXPECT_TRUE(outcome({"tell", "S", "3", "--infeasible"})->has_infeasible());
  EXPECT_TRUE(outcome({"tell", "S", "3", "--void"})->has_void_());
  EXPECT_THAT(std::string(outcome({"tell", "S", "3"}).status().message()),
              HasSubstr("give the outcome"));
  EXPECT_THAT(std::string(outcome({"tell", "S", "3", "--void", "--infeasible"}).status().message()),
              HasSubstr("got --infeasible and --void"));
  for (const char* bad : {"nan", "inf", "-Infinity", "1e999", "three"}) {
    EXPECT_THAT(std::string(outcome({"tell", "S", "3", "--score", bad}).status().message()),
                HasSubstr("--score: must be a finite number"))
        << bad;
  }
}

// ---- Design files ----

TEST(DesignFileTest, ChoosesTheFormatByName) {
  EXPECT_TRUE(IsJsonFileName("a.json"));
  EXPECT_TRUE(IsJsonFileName("A.JSON"));
  EXPECT_FALSE(IsJsonFileName("a.txtpb"));
  EXPECT_FALSE(IsJsonFileName("a.pb.txt"));
  EXPECT_FALSE(IsJsonFileName("a.json.txt"));
}

TEST(DesignFileTest, ReadsTextFormat) {
  absl::StatusOr<v1::CampaignDesign> d = ParseDesign("d.txtpb", kMixedDesign);
  ASSERT_TRUE(d.ok()) << d.status();
  EXPECT_EQ(d->name(), "anneal");
  ASSERT_EQ(d->parameters_size(), 4);
  EXPECT_EQ(d->parameters(0).real().high(), 900);
  EXPECT_TRUE(d->parameters(2).has_flag());
}

TEST(DesignFileTest, TextErrorsNameFileLineAndColumn) {
  absl::StatusOr<v1::CampaignDesign> d = ParseDesign("d.textproto",
                                                  "name: \"x\"\n"
                                                  "parameters {\n"
                                                  "  nmae: \"a\"\n"
                                                  "}\n");
  ASSERT_FALSE(d.ok());
  EXPECT_EQ(d.status().code(), absl::StatusCode::kInvalidArgument);
  EXPECT_THAT(std::string(d.status().message()), HasSubstr("d.textproto:3:3: "));
  EXPECT_THAT(std::string(d.status().message()), HasSubstr("nmae"));

  d = ParseDesign("d.txtpb", "name: \"x\"\npopulation_size: many\n");
  ASSERT_FALSE(d.ok());
  EXPECT_THAT(std::string(d.status().message()), HasSubstr("d.txtpb:2:18: "));
  d = ParseDesign("d.txtpb", "parameters {\n  name: \"a\"\n");
  ASSERT_FALSE(d.ok());
  EXPECT_THAT(std::string(d.status().message()), HasSubstr("d.txtpb:3:1: "));
}

// Found by the design_text fuzz target: a description saved in Latin-1, or written with an octal
// escape, was accepted here and then refused by the server's gRPC layer with no hint of where.
TEST(DesignFileTest, RefusesStringsThatAreNotUtf8) {
  absl::StatusOr<v1::CampaignDesign> d =
      ParseDesign("d.txtpb", "name: \"x\"\nparameters { name: \"t\" unit: \"\xb0" "C\" }\n");
  ASSERT_FALSE(d.ok());
  EXPECT_EQ(d.status().code(), absl::StatusCode::kInvalidArgument);
  EXPECT_THAT(std::string(d.status().message()), HasSubstr("d.txtpb:2:31: byte 0xb0 is not UTF-8"));
  d = ParseDesign("d.json", "{\"name\": \"caf\xe9\"}");
  ASSERT_FALSE(d.ok());
  EXPECT_THAT(std::string(d.status().message()), HasSubstr("d.json:1:14: byte 0xe9"));

  d = ParseDesign("d.txtpb", "name: \"x\"\nparameters { name: \"t\" description: \"\\260C\" flag {} }\n");
  ASSERT_FALSE(d.ok());
  EXPECT_THAT(std::string(d.status().message()), HasSubstr("d.txtpb: parameters[0].description: "));
  d = ParseDesign("d.txtpb", "name: \"x\" start { values { key: \"k\" value { categorical: \"\\xed\\xa0\\x80\" } } }");
  ASSERT_FALSE(d.ok());
  EXPECT_THAT(std::string(d.status().message()), HasSubstr("start.values[0].value.categorical"));

  // Well-formed multi-byte text is fine, in the file and from escapes.
  d = ParseDesign("d.txtpb", "name: \"x\"\nparameters { name: \"t\" unit: \"\xc2\xb0" "C\" description: \"\\342\\202\\254\" }\n");
  ASSERT_TRUE(d.ok()) << d.status();
  EXPECT_EQ(d->parameters(0).unit(), "\xc2\xb0" "C");
  EXPECT_EQ(d->parameters(0).description(), "\xe2\x82\xac");
}

TEST(DesignFileTest, ReadsJson) {
  absl::StatusOr<v1::CampaignDesign> d = ParseDesign("d.json", R"({
    "name": "anneal",
    "parameters": [
      {"name": "t", "unit": "degC", "real": {"low": 700, "high": 900, "log": false}},
      {"name": "n", "integer": {"low": "1", "high": 6}},
      {"name": "v", "flag": {}}
    ],
    "objective": {"gradeScale": {"labels": ["bad", "good"]}},
    "population_size": 8,
    "start": {"values": {"t": {"real": 800}}}
  })");
  ASSERT_TRUE(d.ok()) << d.status();
  EXPECT_EQ(d->parameters(1).integer().low(), 1);
  EXPECT_EQ(d->objective().grade_scale().labels(1), "good");
  EXPECT_EQ(d->population_size(), 8);
  EXPECT_EQ(d->start().values().at("t").real(), 800);
}

TEST(DesignFileTest, JsonSyntaxErrorsNameLineAndColumn) {
  absl::StatusOr<v1::CampaignDesign> d = ParseDesign("d.json",
                                                  "{\n"
                                                  "  \"name\": \"x\",\n"
                                                  "  \"parameters\": [1, 2,, 3]\n"
                                                  "}\n");
  ASSERT_FALSE(d.ok());
  EXPECT_THAT(std::string(d.status().message()), HasSubstr("d.json:3:23: "));
  d = ParseDesign("d.json", "{\"name\": \"x\",\n \"seed\": 1\n");
  ASSERT_FALSE(d.ok());
  EXPECT_THAT(std::string(d.status().message()), HasSubstr("d.json:3:1: the file ends"));
  d = ParseDesign("d.json", "{\"name\": x}");
  ASSERT_FALSE(d.ok());
  EXPECT_THAT(std::string(d.status().message()), HasSubstr("d.json:1:10: 'x' is not a JSON value"));
}

TEST(DesignFileTest, JsonFieldErrorsPointAtTheField) {
  const std::string text =
      "{\n"
      "  \"name\": \"x\",\n"
      "  \"parameters\": [\n"
      "    {\"name\": \"a\", \"real\": {\"low\": 1, \"high\": 2}},\n"
      "    {\"name\": \"b\", \"real\": {\"lowx\": 1}}\n"
      "  ]\n"
      "}\n";
  absl::StatusOr<v1::CampaignDesign> d = ParseDesign("d.json", text);
  ASSERT_FALSE(d.ok());
  EXPECT_THAT(std::string(d.status().message()), HasSubstr("d.json:5:28: "));
  EXPECT_THAT(std::string(d.status().message()), HasSubstr("lowx"));

  d = ParseDesign("d.json", "{\"name\": \"x\",\n \"objective\": {\"direction\": \"UP\"}}");
  ASSERT_FALSE(d.ok());
  EXPECT_THAT(std::string(d.status().message()), HasSubstr("d.json:2:29: "));
  EXPECT_THAT(std::string(d.status().message()), HasSubstr("UP"));

  d = ParseDesign("d.json",
                  "{\"name\": \"x\",\n \"start\": {\"values\": {\"a\": {\"real\": \"x\"}}}}");
  ASSERT_FALSE(d.ok());
  EXPECT_THAT(std::string(d.status().message()), HasSubstr("d.json:2:37: "));
}

TEST(DesignFileTest, MissingFileIsNamed) {
  absl::StatusOr<v1::CampaignDesign> d = ReadDesignFile("/nonexistent/design.txtpb");
  ASSERT_FALSE(d.ok());
  EXPECT_THAT(std::string(d.status().message()),
              HasSubstr("cannot read design file '/nonexistent/design.txtpb': No such file"));
}

// ---- Worker helpers ----

TEST(WorkHelpersTest, DescribesHowAProgramEnded) {
  EXPECT_EQ(DescribeFailure(0), "");
  EXPECT_EQ(DescribeFailure(3 << 8), "exited with status 3");
  EXPECT_EQ(DescribeFailure(SIGKILL), "was killed by signal 9 (SIGKILL)");
}

TEST(WorkHelpersTest, FindsExecutables) {
  EXPECT_TRUE(FindExecutable("sh", "/nonexistent:/bin:/usr/bin"));
  EXPECT_TRUE(FindExecutable("/bin/sh", ""));
  EXPECT_FALSE(FindExecutable("no-such-program-here", "/bin:/usr/bin"));
  EXPECT_FALSE(FindExecutable("/etc/passwd", ""));  // not executable
  EXPECT_FALSE(FindExecutable("/bin", ""));         // a directory
}

}  // namespace
}  // namespace ogive::cli
