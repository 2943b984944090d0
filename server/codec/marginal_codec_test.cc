// Internal coordinates to user units: hand-computed values for every parameter kind, the stored
// generation summary's round trip through the same conversion, and refused summaries that do not fit.
#include "server/codec/marginal_codec.h"

#include <cmath>
#include <string>
#include <vector>

#include "gmock/gmock.h"
#include "google/protobuf/text_format.h"
#include "gtest/gtest.h"
#include "server/codec/design_codec.h"

namespace ogive::codec {
namespace {

using ::testing::ElementsAre;
using ::testing::HasSubstr;

// Every kind: a linear real, a log real spanning four decades, an integer, a flag, a categorical.
constexpr char kDesign[] = R"pb(
  name: "marginals"
  parameters { name: "temp" unit: "degC" real { low: 0 high: 10 } }
  parameters { name: "tol" real { low: 1e-3 high: 10 log: true } }
  parameters { name: "level" integer { low: 1 high: 8 } }
  parameters { name: "reorder" flag {} }
  parameters { name: "glaze" categorical { options: "a" options: "b" options: "c" } }
  objective { direction: DIRECTION_LOWER_IS_BETTER }
)pb";

v1::CampaignDesign Design() {
  v1::CampaignDesign design;
  EXPECT_TRUE(google::protobuf::TextFormat::ParseFromString(kDesign, &design));
  return design;
}

// A stored summary with internal means (0.25, 0.5, 0.5) and spreads (0.1, 0.25, 0.125).
v1::GenerationSummary Summary() {
  v1::GenerationSummary g;
  g.set_generation(7);
  g.set_epoch(1);
  g.set_population_size(10);
  for (int64_t n : {3, 4, 5, 6, 7, 8, 9, 10, 11, 12}) g.add_cohort(n);
  g.set_mean_staleness(0.5);
  g.set_max_staleness(2);
  for (double u : {0.25, 0.5, 0.5}) g.add_mean(u);
  for (double s : {0.1, 0.25, 0.125}) g.add_spread(s);
  g.set_sigma(0.2);
  g.set_axis_ratio(3.5);
  g.add_flag_probabilities(0.8);
  for (double p : {0.2, 0.3, 0.5}) g.add_option_probabilities(p);
  g.set_best_trial(9);
  g.set_recorded_at_ns(1'700'000'000'123'456'789);
  return g;
}

TEST(MarginalCodec, ConvertsEveryKindToUserUnits) {
  const v1::CampaignDesign design = Design();
  absl::StatusOr<search::Space> space = SpaceFromDesign(design);
  ASSERT_TRUE(space.ok()) << space.status();
  absl::StatusOr<v1::GenerationView> view = GenerationViewFromSummary(Summary(), *space, design);
  ASSERT_TRUE(view.ok()) << view.status();
  ASSERT_EQ(view->marginals_size(), 5);

  // Linear: 0 + 0.25 * 10 = 2.5; 0.1 * 10 = 1.
  const v1::Marginal& temp = view->marginals(0);
  EXPECT_EQ(temp.parameter(), "temp");
  EXPECT_EQ(temp.unit(), "degC");
  EXPECT_DOUBLE_EQ(temp.mean(), 2.5);
  EXPECT_DOUBLE_EQ(temp.spread(), 1.0);
  EXPECT_EQ(temp.low(), 0);
  EXPECT_EQ(temp.high(), 10);

  // Log: span = ln(1e4); mean = exp(ln 1e-3 + span / 2) = 0.1; a quarter span is one decade, so the
  // spread is 0.1 * (10 - 1) = 0.9.
  const v1::Marginal& tol = view->marginals(1);
  EXPECT_NEAR(tol.mean(), 0.1, 1e-15);
  EXPECT_NEAR(tol.spread(), 0.9, 1e-14);

  // Integer: cells of width 8 from 0.5 to 8.5: 0.5 + 0.5 * 8 = 4.5; 0.125 * 8 = 1.
  const v1::Marginal& level = view->marginals(2);
  EXPECT_DOUBLE_EQ(level.mean(), 4.5);
  EXPECT_DOUBLE_EQ(level.spread(), 1.0);
  EXPECT_EQ(level.low(), 1);
  EXPECT_EQ(level.high(), 8);

  EXPECT_THAT(view->marginals(3).probabilities(), ElementsAre(0.8));
  EXPECT_TRUE(view->marginals(3).options().empty());
  EXPECT_THAT(view->marginals(4).options(), ElementsAre("a", "b", "c"));
  EXPECT_THAT(view->marginals(4).probabilities(), ElementsAre(0.2, 0.3, 0.5));

  EXPECT_EQ(view->generation(), 7);
  EXPECT_EQ(view->epoch(), 1);
  EXPECT_EQ(view->population_size(), 10);
  EXPECT_EQ(view->cohort_size(), 10);
  EXPECT_EQ(view->mean_staleness(), 0.5);
  EXPECT_EQ(view->max_staleness(), 2);
  EXPECT_EQ(view->step_size(), 0.2);
  EXPECT_EQ(view->axis_ratio(), 3.5);
  EXPECT_EQ(view->best_trial(), 9);
  EXPECT_EQ(view->recorded_at_unix_ms(), 1'700'000'000'123);
}

TEST(MarginalCodec, StatusViewAndHistoryShareOneConversion) {
  const v1::CampaignDesign design = Design();
  absl::StatusOr<search::Space> space = SpaceFromDesign(design);
  ASSERT_TRUE(space.ok());
  const std::vector<v1::Marginal> direct =
      MarginalsToProto(SummaryFromGeneration(Summary(), *space), *space, design);
  absl::StatusOr<v1::GenerationView> view = GenerationViewFromSummary(Summary(), *space, design);
  ASSERT_TRUE(view.ok());
  ASSERT_EQ(direct.size(), 5u);
  for (int i = 0; i < 5; ++i) {
    EXPECT_EQ(direct[i].SerializeAsString(), view->marginals(i).SerializeAsString()) << i;
  }
}

TEST(MarginalCodec, NoGaussianBlockLeavesStepSizeAtZero) {
  v1::CampaignDesign design;
  ASSERT_TRUE(google::protobuf::TextFormat::ParseFromString(R"pb(
    name: "flags" parameters { name: "f" flag {} } objective { direction: DIRECTION_LOWER_IS_BETTER })pb", &design));
  absl::StatusOr<search::Space> space = SpaceFromDesign(design);
  ASSERT_TRUE(space.ok());
  v1::GenerationSummary g;
  g.set_generation(1);
  g.add_flag_probabilities(0.4);
  absl::StatusOr<v1::GenerationView> view = GenerationViewFromSummary(g, *space, design);
  ASSERT_TRUE(view.ok()) << view.status();
  EXPECT_EQ(view->step_size(), 0);
  EXPECT_EQ(view->axis_ratio(), 0);
  EXPECT_THAT(view->marginals(0).probabilities(), ElementsAre(0.4));
}

TEST(MarginalCodec, RefusesSummariesThatDoNotFitTheSpace) {
  const v1::CampaignDesign design = Design();
  absl::StatusOr<search::Space> space = SpaceFromDesign(design);
  ASSERT_TRUE(space.ok());
  struct Case {
    void (*damage)(v1::GenerationSummary&);
    std::string message;
  };
  const Case cases[] = {
      {[](v1::GenerationSummary& g) { g.mutable_mean()->RemoveLast(); }, "2 means, the campaign's parameters need 3"},
      {[](v1::GenerationSummary& g) { g.add_spread(0.1); }, "4 spreads"},
      {[](v1::GenerationSummary& g) { g.clear_flag_probabilities(); }, "0 flag probabilities"},
      {[](v1::GenerationSummary& g) { g.add_option_probabilities(0.1); }, "4 option probabilities"},
  };
  for (const Case& c : cases) {
    v1::GenerationSummary g = Summary();
    c.damage(g);
    const absl::Status status = GenerationViewFromSummary(g, *space, design).status();
    EXPECT_EQ(status.code(), absl::StatusCode::kDataLoss) << status;
    EXPECT_THAT(std::string(status.message()), HasSubstr(c.message));
    EXPECT_THAT(std::string(status.message()), HasSubstr("generation 7"));
  }
}

}  // namespace
}  // namespace ogive::codec
