// Tests of the bench technician's tools: grade matching with suggestions, trial cards, the CSV
// reader and the import plan.
#include <string>
#include <vector>

#include "absl/strings/match.h"
#include "absl/strings/str_split.h"
#include "absl/time/time.h"
#include "client/cli/card.h"
#include "client/cli/csv_reader.h"
#include "client/cli/grade_match.h"
#include "client/cli/import_plan.h"
#include "gmock/gmock.h"
#include "google/protobuf/text_format.h"
#include "gtest/gtest.h"

namespace ogive::cli {
namespace {

using ::testing::HasSubstr;
using ::testing::Not;

v1::CampaignDesign Design(const std::string& text) {
  v1::CampaignDesign design;
  EXPECT_TRUE(google::protobuf::TextFormat::ParseFromString(text, &design)) << text;
  return design;
}

// A kiln firing recipe graded on an ordered scale (demo scenario).
v1::CampaignDesign Kiln() {
  return Design(R"pb(
    name: "kiln"
    parameters { name: "peak_temperature" unit: "degC" description: "hold temperature at the top of the ramp"
                 real { low: 1180 high: 1300 } }
    parameters { name: "hold" unit: "min" integer { low: 0 high: 60 } }
    parameters { name: "reduction" flag {} }
    objective { grade_scale { labels: "cracked" labels: "poor" labels: "fair" labels: "good" labels: "excellent" } }
  )pb");
}

v1::CampaignDesign Scored() {
  return Design(R"pb(
    name: "farm"
    parameters { name: "relax" real { low: 0.1 high: 1.9 } }
    objective { direction: DIRECTION_LOWER_IS_BETTER }
  )pb");
}

TEST(EditDistanceTest, KnownDistances) {
  // kitten -> sitting takes three edits: the standard example for Levenshtein distance (from memory).
  EXPECT_EQ(EditDistance("kitten", "sitting"), 3u);
  EXPECT_EQ(EditDistance("", "abc"), 3u);
  EXPECT_EQ(EditDistance("abc", ""), 3u);
  EXPECT_EQ(EditDistance("flaw", "lawn"), 2u);
  EXPECT_EQ(EditDistance("Good", "gOOD"), 0u);  // case does not count
  EXPECT_EQ(EditDistance("goood", "good"), 1u);
  // Symmetric.
  EXPECT_EQ(EditDistance("excellent", "exelent"), EditDistance("exelent", "excellent"));
}

TEST(MatchGradeTest, AnyCaseGivesTheScaleSpelling) {
  const v1::CampaignDesign kiln = Kiln();
  const v1::GradeScale& scale = kiln.objective().grade_scale();
  EXPECT_EQ(*MatchGrade("GOOD", scale, "--grade"), "good");
  EXPECT_EQ(*MatchGrade("  Excellent ", scale, "--grade"), "excellent");
}

TEST(MatchGradeTest, TyposGetTheClosestLabelSuggested) {
  const v1::CampaignDesign kiln = Kiln();
  const v1::GradeScale& scale = kiln.objective().grade_scale();
  absl::StatusOr<std::string> typo = MatchGrade("exellent", scale, "--grade");
  ASSERT_FALSE(typo.ok());
  EXPECT_EQ(typo.status().code(), absl::StatusCode::kInvalidArgument);
  EXPECT_THAT(typo.status().message(), HasSubstr("--grade: 'exellent' is not a grade"));
  EXPECT_THAT(typo.status().message(), HasSubstr("cracked < poor < fair < good < excellent"));
  EXPECT_THAT(typo.status().message(), HasSubstr("did you mean 'excellent'?"));
  // Far from every label: no suggestion.
  absl::StatusOr<std::string> far = MatchGrade("splendid", scale, "--grade");
  ASSERT_FALSE(far.ok());
  EXPECT_THAT(far.status().message(), Not(HasSubstr("did you mean")));
}

TEST(MatchGradeTest, ATieSuggestsNothing) {
  v1::GradeScale scale;
  scale.add_labels("A1");
  scale.add_labels("A3");
  absl::StatusOr<std::string> typo = MatchGrade("A2", scale, "grade");
  ASSERT_FALSE(typo.ok());
  EXPECT_THAT(typo.status().message(), Not(HasSubstr("did you mean")));
}

TEST(CardTest, BlockDigitsAreFiveLinesOfEqualGlyphs) {
  const std::string digits = BlockDigits(1207);
  std::vector<std::string> lines;
  for (absl::string_view line : absl::StrSplit(digits, '\n', absl::SkipEmpty())) lines.emplace_back(line);
  ASSERT_EQ(lines.size(), 5u);
  for (const std::string& line : lines) EXPECT_LE(line.size(), 4u * 6u);
  EXPECT_NE(BlockDigits(1), BlockDigits(7));
}

TEST(CardTest, ShowsEveryParameterWithUnitDescriptionAndHowToReport) {
  v1::Trial trial;
  trial.set_number(42);
  trial.set_generation(3);
  trial.set_worker("bench-2");
  trial.set_lease_deadline_unix_ms(1'800'000'000'000);
  (*trial.mutable_candidate()->mutable_values())["peak_temperature"].set_real(1234.5);
  (*trial.mutable_candidate()->mutable_values())["hold"].set_integer(17);
  (*trial.mutable_candidate()->mutable_values())["reduction"].set_flag(true);
  const std::string card = TrialCard("kiln", Kiln(), trial, absl::UTCTimeZone());
  EXPECT_THAT(card, HasSubstr("Campaign kiln"));
  EXPECT_THAT(card, HasSubstr(BlockDigits(42)));
  EXPECT_THAT(card, HasSubstr("peak_temperature = 1234.5 degC"));
  EXPECT_THAT(card, HasSubstr("hold temperature at the top of the ramp"));
  EXPECT_THAT(card, HasSubstr("hold = 17 min"));
  EXPECT_THAT(card, HasSubstr("ogive tell kiln 42 --grade LABEL"));
  EXPECT_THAT(card, HasSubstr("cracked < poor < fair < good < excellent"));
  EXPECT_THAT(card, HasSubstr("safety"));
  EXPECT_EQ(card.back(), '\f');
  const std::string scored = TrialCard("farm", Scored(), trial, absl::UTCTimeZone());
  EXPECT_THAT(scored, HasSubstr("--score X   (lower is better)"));
}

TEST(CsvReaderTest, FollowsRfc4180) {
  // RFC 4180 section 2: CRLF line breaks, quoted fields with commas, line breaks and doubled quotes.
  absl::StatusOr<std::vector<CsvRecord>> records =
      ParseCsv("trial,outcome,note\r\n3,good,\"glaze, crawled \"\"a bit\"\"\"\r\n\r\n4,poor,\"two\nlines\"\n5,fair,");
  ASSERT_TRUE(records.ok()) << records.status();
  ASSERT_EQ(records->size(), 4u);
  EXPECT_EQ((*records)[0].fields, (std::vector<std::string>{"trial", "outcome", "note"}));
  EXPECT_EQ((*records)[1].fields, (std::vector<std::string>{"3", "good", "glaze, crawled \"a bit\""}));
  EXPECT_EQ((*records)[1].line, 2);
  EXPECT_EQ((*records)[2].line, 4);  // after the blank line
  EXPECT_EQ((*records)[2].fields[2], "two\nlines");
  EXPECT_EQ((*records)[3].line, 6);
  EXPECT_EQ((*records)[3].fields, (std::vector<std::string>{"5", "fair", ""}));
}

TEST(CsvReaderTest, ErrorsNameTheLine) {
  absl::StatusOr<std::vector<CsvRecord>> open = ParseCsv("1,good\n2,\"poor\n");
  ASSERT_FALSE(open.ok());
  EXPECT_THAT(open.status().message(), HasSubstr("line 2"));
  absl::StatusOr<std::vector<CsvRecord>> stray = ParseCsv("1,good\n2,po\"or\n");
  ASSERT_FALSE(stray.ok());
  EXPECT_THAT(stray.status().message(), HasSubstr("line 2"));
}

std::vector<v1::Trial> Trials(int count) {
  std::vector<v1::Trial> trials;
  for (int i = 1; i <= count; ++i) {
    v1::Trial& t = trials.emplace_back();
    t.set_number(i);
    t.set_state(v1::TRIAL_STATE_LEASED);
  }
  return trials;
}

std::vector<CsvRecord> Csv(const std::string& text) {
  absl::StatusOr<std::vector<CsvRecord>> records = ParseCsv(text);
  EXPECT_TRUE(records.ok()) << records.status();
  return records.ok() ? *records : std::vector<CsvRecord>();
}

TEST(ImportPlanTest, EveryBadRowIsNamedByLineAndReason) {
  std::vector<v1::Trial> trials = Trials(5);
  trials[3].set_state(v1::TRIAL_STATE_REPORTED);
  trials[3].mutable_outcome()->set_grade("fair");  // trial 4
  const ImportPlan plan = PlanImport(Csv("trial,outcome,note\n"
                                         "1,Good,fine\n"        // 2: ok (any case)
                                         "2,exellent,\n"        // 3: typo
                                         "9,good,\n"            // 4: no such trial
                                         "x,good,\n"            // 5: not a number
                                         "4,fair,\n"            // 6: already stored, same
                                         "4,poor,\n"            // 7: same trial, other outcome in file
                                         "3,infeasible,broke\n"  // 8: ok
                                         "1,good,again\n"       // 9: same outcome twice: once
                                         "5,3.5\n"),            // 10: a number on a graded campaign
                                     Kiln(), trials);
  ASSERT_EQ(plan.to_report.size(), 2u);
  EXPECT_EQ(plan.to_report[0].trial, 1);
  EXPECT_EQ(plan.to_report[0].outcome.grade(), "good");
  EXPECT_EQ(plan.to_report[0].outcome.note(), "fine");
  EXPECT_EQ(plan.to_report[1].trial, 3);
  EXPECT_TRUE(plan.to_report[1].outcome.has_infeasible());
  ASSERT_EQ(plan.already_stored.size(), 1u);
  EXPECT_EQ(plan.already_stored[0].line, 6);
  std::vector<int> lines;
  for (const BadRow& b : plan.bad) lines.push_back(b.line);
  EXPECT_EQ(lines, (std::vector<int>{3, 4, 5, 7, 10}));
  EXPECT_THAT(plan.bad[0].reason, HasSubstr("did you mean 'excellent'"));
  EXPECT_THAT(plan.bad[1].reason, HasSubstr("no such trial"));
  EXPECT_THAT(plan.bad[2].reason, HasSubstr("not a trial number"));
  EXPECT_THAT(plan.bad[3].reason, HasSubstr("line 6 gives it grade fair"));
  EXPECT_THAT(plan.bad[4].reason, HasSubstr("'3.5' is not a grade"));
}

TEST(ImportPlanTest, WithoutAHeaderTheColumnsAreTrialOutcomeNote) {
  std::vector<v1::Trial> trials = Trials(3);
  trials[1].mutable_outcome()->set_score(2.5);
  const ImportPlan plan = PlanImport(Csv("1,1.25\n2,2.5,dup\n3,void,never fired\n"), Scored(), trials);
  ASSERT_EQ(plan.to_report.size(), 2u);
  EXPECT_DOUBLE_EQ(plan.to_report[0].outcome.score(), 1.25);
  EXPECT_TRUE(plan.to_report[1].outcome.has_void_());
  EXPECT_EQ(plan.to_report[1].outcome.note(), "never fired");
  EXPECT_EQ(plan.already_stored.size(), 1u);
  EXPECT_TRUE(plan.bad.empty());
  // A different stored score is a bad row, not an overwrite.
  const ImportPlan changed = PlanImport(Csv("2,2.75\n"), Scored(), trials);
  ASSERT_EQ(changed.bad.size(), 1u);
  EXPECT_THAT(changed.bad[0].reason, HasSubstr("already reported score 2.5; this row says score 2.75"));
  // Non-finite numbers are refused.
  EXPECT_EQ(PlanImport(Csv("1,nan\n3,inf\n"), Scored(), trials).bad.size(), 2u);
}

TEST(ImportPlanTest, AHeaderWithoutTheNeededColumnsIsRefused) {
  const ImportPlan plan = PlanImport(Csv("number,result\n1,2\n"), Scored(), Trials(1));
  ASSERT_EQ(plan.bad.size(), 1u);
  EXPECT_EQ(plan.bad[0].line, 1);
  EXPECT_THAT(plan.bad[0].reason, HasSubstr("'trial' and 'outcome'"));
  EXPECT_TRUE(plan.to_report.empty());
}

}  // namespace
}  // namespace ogive::cli
