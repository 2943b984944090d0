#include <cmath>
#include <cstring>
#include <string>
#include <vector>

#include "gmock/gmock.h"
#include "google/protobuf/text_format.h"
#include "gtest/gtest.h"
#include "server/codec/design_codec.h"
#include "server/codec/state_codec.h"
#include "server/codec/campaign_codec.h"
#include "server/search/random_stream.h"

namespace ogive::codec {
namespace {

using ::testing::HasSubstr;

v1::CampaignDesign ParseDesign(const std::string& text) {
  v1::CampaignDesign design;
  EXPECT_TRUE(google::protobuf::TextFormat::ParseFromString(text, &design)) << text;
  return design;
}

// A solver-farm style design: real and integer parameters only, so `model: auto` uses the surrogate.
constexpr char kSolverDesign[] = R"pb(
  name: "solver-farm"
  parameters { name: "relaxation" real { low: 0.1 high: 1.9 } }
  parameters { name: "tolerance" real { low: 1e-9 high: 1e-3 log: true } }
  parameters { name: "smoothing_steps" integer { low: 1 high: 8 } }
  parameters { name: "coarsening" real { low: 0.05 high: 0.6 } }
  objective { direction: DIRECTION_LOWER_IS_BETTER }
)pb";

// A kiln-firing style mixed design: every parameter kind.
constexpr char kMixedDesign[] = R"pb(
  name: "kiln-glaze"
  parameters { name: "peak_temp" unit: "degC" real { low: 1180 high: 1300 } }
  parameters { name: "cooling_rate" unit: "degC/h" real { low: 10 high: 1000 log: true } }
  parameters { name: "hold_minutes" integer { low: 0 high: 60 } }
  parameters { name: "reduction" flag {} }
  parameters { name: "glaze" categorical { options: "celadon" options: "tenmoku" options: "shino" } }
  objective { direction: DIRECTION_LOWER_IS_BETTER }
)pb";

TEST(DesignCodec, ConvertsEveryParameterKind) {
  const v1::CampaignDesign design = ParseDesign(kMixedDesign);
  absl::StatusOr<search::Space> space = SpaceFromDesign(design);
  ASSERT_TRUE(space.ok()) << space.status();
  ASSERT_EQ(space->size(), 5);
  EXPECT_EQ(space->parameter(1).kind, search::ParameterKind::kReal);
  EXPECT_TRUE(space->parameter(1).log);
  EXPECT_EQ(space->parameter(2).integer_high, 60);
  EXPECT_EQ(space->parameter(4).options.size(), 3u);
  EXPECT_EQ(space->gaussian_indices().size(), 3u);
}

struct BadDesign {
  std::string text;
  std::string message;
};

class BadDesignTest : public ::testing::TestWithParam<BadDesign> {};

TEST_P(BadDesignTest, IsRefusedWithAMessageNamingTheField) {
  const v1::CampaignDesign design = ParseDesign(GetParam().text);
  absl::Status status = SpaceFromDesign(design).status();
  if (status.ok()) status = OrderFromObjective(design.objective()).status();
  if (status.ok()) status = DistributionOptionsFromDesign(design, *SpaceFromDesign(design)).status();
  EXPECT_EQ(status.code(), absl::StatusCode::kInvalidArgument);
  EXPECT_THAT(std::string(status.message()), HasSubstr(GetParam().message));
}

INSTANTIATE_TEST_SUITE_P(
    Cases, BadDesignTest,
    ::testing::Values(
        BadDesign{R"pb(parameters { name: "t" real { low: 5 high: 5 } } objective { direction: DIRECTION_LOWER_IS_BETTER })pb",
                  "parameter 't' (real): low must be < high"},
        BadDesign{R"pb(parameters { name: "r" real { low: 0 high: 5 log: true } }
                       objective { direction: DIRECTION_LOWER_IS_BETTER })pb",
                  "log scale needs low > 0"},
        BadDesign{R"pb(parameters { name: "a" flag {} } parameters { name: "a" flag {} }
                       objective { direction: DIRECTION_LOWER_IS_BETTER })pb",
                  "parameter 'a': the name appears twice"},
        BadDesign{R"pb(parameters { name: "c" categorical {} } objective { direction: DIRECTION_LOWER_IS_BETTER })pb",
                  "needs at least two options"},
        BadDesign{R"pb(parameters { name: "k" } objective { direction: DIRECTION_LOWER_IS_BETTER })pb",
                  "parameters[0] 'k': kind must be set to one of real, integer, categorical, flag"},
        BadDesign{R"pb(parameters { name: "f" flag {} } objective { grade_scale { labels: "good" } })pb",
                  "objective.grade_scale.labels: needs at least two labels"},
        BadDesign{R"pb(parameters { name: "f" flag {} } objective { direction: DIRECTION_UNSPECIFIED })pb",
                  "objective.direction: must be DIRECTION_LOWER_IS_BETTER or DIRECTION_HIGHER_IS_BETTER"},
        BadDesign{R"pb(parameters { name: "f" flag {} })pb", "objective: set either direction"},
        BadDesign{R"pb(parameters { name: "f" flag {} } objective { direction: DIRECTION_LOWER_IS_BETTER }
                       initial_spread: 2)pb",
                  "initial_spread: must be 0 (default) or in (0, 1]"},
        BadDesign{R"pb(parameters { name: "f" flag {} } objective { direction: DIRECTION_LOWER_IS_BETTER }
                       population_size: 1)pb",
                  "population_size: must be 0 (default) or at least 2"},
        BadDesign{R"pb(parameters { name: "x" real { low: 0 high: 1 } } objective { direction: DIRECTION_LOWER_IS_BETTER }
                       start { values { key: "x" value { real: 3 } } })pb",
                  "start: parameter 'x' (real): value 3 is outside [0, 1]"},
        BadDesign{R"pb(parameters { name: "x" real { low: 0 high: 1 } } objective { direction: DIRECTION_LOWER_IS_BETTER }
                       start { values { key: "y" value { real: 0.5 } } })pb",
                  "start: unknown parameter 'y'"}));

TEST(DesignCodec, GradesAreLookedUpInTheScale) {
  v1::Objective objective;
  for (const char* label : {"cracked", "poor", "good"}) objective.mutable_grade_scale()->add_labels(label);
  v1::Outcome outcome;
  outcome.set_grade("good");
  absl::StatusOr<search::Outcome> o = OutcomeFromProto(outcome, objective);
  ASSERT_TRUE(o.ok()) << o.status();
  EXPECT_EQ(o->grade, 2);
  outcome.set_grade("excellent");
  EXPECT_THAT(std::string(OutcomeFromProto(outcome, objective).status().message()),
              HasSubstr("allowed: cracked, poor, good"));
  outcome.set_score(1.0);
  EXPECT_EQ(OutcomeFromProto(outcome, objective).status().code(), absl::StatusCode::kInvalidArgument);
}

TEST(DesignCodec, NonFiniteScoresAreRefused) {
  v1::Objective objective;
  objective.set_direction(v1::DIRECTION_HIGHER_IS_BETTER);
  v1::Outcome outcome;
  outcome.set_score(std::nan(""));
  EXPECT_THAT(std::string(OutcomeFromProto(outcome, objective).status().message()), HasSubstr("outcome.score"));
  outcome.set_score(INFINITY);
  EXPECT_EQ(OutcomeFromProto(outcome, objective).status().code(), absl::StatusCode::kInvalidArgument);
}

TEST(DesignCodec, CandidateRoundTrip) {
  const search::Space space = *SpaceFromDesign(ParseDesign(kMixedDesign));
  const search::Candidate c = {1234.5, 31.6, int64_t{17}, true, std::string("shino")};
  const v1::Candidate proto = CandidateToProto(c, space);
  absl::StatusOr<search::Candidate> back = CandidateFromProto(proto, space);
  ASSERT_TRUE(back.ok()) << back.status();
  EXPECT_EQ(*back, c);
  v1::Candidate missing = proto;
  missing.mutable_values()->erase("glaze");
  EXPECT_THAT(std::string(CandidateFromProto(missing, space).status().message()),
              HasSubstr("parameter 'glaze' is missing"));
}

TEST(DesignCodec, PartialStartSetsOnlyTheGivenParameters) {
  v1::CampaignDesign design = ParseDesign(kMixedDesign);
  (*design.mutable_start()->mutable_values())["peak_temp"].set_real(1270);
  (*design.mutable_start()->mutable_values())["glaze"].set_categorical("tenmoku");
  const search::Space space = *SpaceFromDesign(design);
  absl::StatusOr<search::DistributionOptions> options = DistributionOptionsFromDesign(design, space);
  ASSERT_TRUE(options.ok()) << options.status();
  ASSERT_EQ(options->start.size(), 5u);
  EXPECT_DOUBLE_EQ(*options->start[0], (1270.0 - 1180.0) / 120.0);
  EXPECT_FALSE(options->start[1].has_value());
  EXPECT_EQ(*options->start[4], 1.0);
  absl::StatusOr<search::SearchDistribution> d = search::SearchDistribution::Create(space, *options);
  ASSERT_TRUE(d.ok()) << d.status();
  // The given option starts with half the mass plus its uniform share: 1/2 + 1/6.
  EXPECT_NEAR(d->Summary().option_probabilities[0][1], 0.5 + 0.5 / 3, 1e-15);
}

bool BitIdentical(const search::DistributionState& a, const search::DistributionState& b) {
  const v1::DistributionState pa = DistributionStateToProto(a);
  const v1::DistributionState pb = DistributionStateToProto(b);
  return pa.SerializeAsString() == pb.SerializeAsString();
}

// Runs a few updates on a sphere-like objective so every field of the state has moved.
search::SearchDistribution RunSome(search::SearchDistribution d, search::RandomStream& random, int generations) {
  for (int g = 0; g < generations; ++g) {
    std::vector<search::CohortMember> cohort;
    std::vector<search::Outcome> outcomes;
    for (int i = 0; i < d.population_size(); ++i) {
      search::Draw draw = d.Sample(random);
      double f = (draw.x.head(3).array() - 0.3).square().sum() + draw.x[3] + (draw.x[4] == 2 ? 0 : 1);
      cohort.push_back({draw.x, draw.repaired});
      outcomes.push_back(search::Outcome::Score(f));
    }
    EXPECT_TRUE(d.Update(cohort, *search::RankCohort(outcomes, search::OutcomeOrder{})).ok());
  }
  return d;
}

TEST(StateCodec, RoundTripIsBitExactAndContinuesIdentically) {
  for (search::GaussianModel model : {search::GaussianModel::kFull, search::GaussianModel::kDiagonal}) {
    const search::Space space = *SpaceFromDesign(ParseDesign(kMixedDesign));
    search::DistributionOptions options;
    options.gaussian_model = model;
    search::RandomStream random(7);
    search::SearchDistribution d = RunSome(*search::SearchDistribution::Create(space, options), random, 12);

    // Through the wire format, as storage will keep it.
    const std::string bytes = DistributionStateToProto(d.state()).SerializeAsString();
    v1::DistributionState parsed;
    ASSERT_TRUE(parsed.ParseFromString(bytes));
    absl::StatusOr<search::DistributionState> state = DistributionStateFromProto(parsed);
    ASSERT_TRUE(state.ok()) << state.status();
    absl::StatusOr<search::SearchDistribution> restored = search::SearchDistribution::FromState(space, *state);
    ASSERT_TRUE(restored.ok()) << restored.status();
    EXPECT_TRUE(BitIdentical(d.state(), restored->state()));

    search::RandomStream random_copy = search::RandomStream::FromState(random.state());
    const search::SearchDistribution a = RunSome(d, random, 5);
    const search::SearchDistribution b = RunSome(*restored, random_copy, 5);
    EXPECT_TRUE(BitIdentical(a.state(), b.state()));
  }
}

TEST(StateCodec, InconsistentSizesAreRefused) {
  const search::Space space = *SpaceFromDesign(ParseDesign(kMixedDesign));
  search::SearchDistribution d = *search::SearchDistribution::Create(space, {});
  v1::DistributionState proto = DistributionStateToProto(d.state());
  proto.mutable_gaussian()->mutable_covariance()->RemoveLast();
  EXPECT_THAT(std::string(DistributionStateFromProto(proto).status().message()), HasSubstr("covariance"));
}

// Drives a campaign with three workers on the kiln design: asks, out-of-order reports, a void, a lapse.
// With `noisy`, each measurement carries a scatter far above the spread of the objective, so repeated
// measurements of one candidate reorder the ranking.
void Drive(campaign::Campaign& s, absl::Time& now, int steps, bool noisy = false) {
  for (int k = 0; k < steps; ++k) {
    now += absl::Minutes(7);
    absl::StatusOr<std::vector<campaign::Trial>> asked = s.Ask(3, "node-" + std::to_string(k % 3), absl::Minutes(30), now);
    ASSERT_TRUE(asked.ok()) << asked.status();
    std::vector<campaign::Report> reports;
    for (size_t i = 0; i < asked->size(); ++i) {
      const campaign::Trial& t = (*asked)[asked->size() - 1 - i];
      if ((t.number % 11) == 0) continue;  // never reported: lapses later
      const double f = (t.x.head(3).array() - 0.4).square().sum() + t.x[3] +
                       (noisy ? 10 * std::sin(12.9898 * static_cast<double>(t.number)) : 0.0);
      reports.push_back({t.number, (t.number % 7) == 0 ? search::Outcome::Void() : search::Outcome::Score(f), "n"});
    }
    if (!reports.empty()) {
      ASSERT_TRUE(s.Tell(reports, now).ok());
    }
  }
}

TEST(CampaignCodec, SnapshotThroughTheWireContinuesBitIdentically) {
  const v1::CampaignDesign design = ParseDesign(kMixedDesign);
  const search::Space space = *SpaceFromDesign(design);
  const search::OutcomeOrder order = *OrderFromObjective(design.objective());
  const search::DistributionOptions options = *DistributionOptionsFromDesign(design, space);
  campaign::CampaignOptions campaign_options = *CampaignOptionsFromDesign(design);
  campaign_options.seed = 99;
  campaign::Campaign original = *campaign::Campaign::Create(space, order, options, campaign_options);
  absl::Time now = absl::FromUnixSeconds(1700000000);
  Drive(original, now, 20);
  ASSERT_GT(original.engine().generation, 3);

  v1::CampaignSnapshot parsed;
  ASSERT_TRUE(parsed.ParseFromString(SnapshotToProto(original.Snapshot()).SerializeAsString()));
  absl::StatusOr<campaign::CampaignSnapshot> snapshot = SnapshotFromProto(parsed, space);
  ASSERT_TRUE(snapshot.ok()) << snapshot.status();
  absl::StatusOr<campaign::Campaign> restored = campaign::Campaign::Restore(space, order, options, campaign_options, *snapshot);
  ASSERT_TRUE(restored.ok()) << restored.status();
  EXPECT_EQ(restored->counts().total(), original.counts().total());
  EXPECT_EQ(restored->counts().pending, original.counts().pending);

  absl::Time now_copy = now;
  Drive(original, now, 15);
  Drive(*restored, now_copy, 15);
  EXPECT_EQ(SnapshotToProto(original.Snapshot()).SerializeAsString(),
            SnapshotToProto(restored->Snapshot()).SerializeAsString());
}

// The same through the wire with noise handling: replicates, originals waiting for them, the noise
// measure, the grown population, the stagnation reference and a target waiting for confirmation are
// all in the stored records, so the restored campaign continues bit-identically.
TEST(CampaignCodec, SnapshotWithNoiseHandlingThroughTheWireContinuesBitIdentically) {
  for (const char* noise : {"auto", "replicates:3"}) {
    SCOPED_TRACE(noise);
    v1::CampaignDesign design = ParseDesign(kMixedDesign);
    design.set_noise(noise);
    design.set_target(-9.5);
    const search::Space space = *SpaceFromDesign(design);
    const search::OutcomeOrder order = *OrderFromObjective(design.objective());
    const search::DistributionOptions options = *DistributionOptionsFromDesign(design, space);
    campaign::CampaignOptions campaign_options = *CampaignOptionsFromDesign(design);
    campaign_options.seed = 5;
    campaign::Campaign original = *campaign::Campaign::Create(space, order, options, campaign_options);
    absl::Time now = absl::FromUnixSeconds(1700000000);
    Drive(original, now, 80, /*noisy=*/true);
    ASSERT_EQ(original.engine().phase, campaign::Phase::kOpen);
    ASSERT_GT(original.engine().generation, 3);
    int replicates = 0, wanted = 0;
    for (const campaign::Trial& t : original.trials()) {
      replicates += t.replicate_of != 0;
      wanted += t.replicates_wanted;
    }
    EXPECT_GT(replicates, 0);
    EXPECT_GT(wanted, 0);
    EXPECT_NE(original.engine().noise_rank_change, 0);
    if (std::strcmp(noise, "auto") == 0) {  // the stagnation reference and the growth are auto's
      EXPECT_GT(original.engine().stagnation_trial, 0);
      EXPECT_GT(original.engine().stagnation_generation, 0);
      EXPECT_GT(original.engine().noise_population, 0);
    }

    v1::CampaignSnapshot parsed;
    ASSERT_TRUE(parsed.ParseFromString(SnapshotToProto(original.Snapshot()).SerializeAsString()));
    absl::StatusOr<campaign::CampaignSnapshot> snapshot = SnapshotFromProto(parsed, space);
    ASSERT_TRUE(snapshot.ok()) << snapshot.status();
    absl::StatusOr<campaign::Campaign> restored =
        campaign::Campaign::Restore(space, order, options, campaign_options, *snapshot);
    ASSERT_TRUE(restored.ok()) << restored.status();
    EXPECT_EQ(restored->counts().awaiting_replicates, original.counts().awaiting_replicates);

    absl::Time now_copy = now;
    Drive(original, now, 25, /*noisy=*/true);
    Drive(*restored, now_copy, 25, /*noisy=*/true);
    EXPECT_EQ(SnapshotToProto(original.Snapshot()).SerializeAsString(),
              SnapshotToProto(restored->Snapshot()).SerializeAsString());
  }
}

TEST(CampaignCodec, TheReporterOfATrialRoundTrips) {
  campaign::Trial t;
  t.number = 4;
  t.state = campaign::TrialState::kReported;
  t.outcome = search::Outcome::Score(1.5);
  t.reported_by = "farm-a";
  v1::TrialRecord record;
  ASSERT_TRUE(record.ParseFromString(TrialToProto(t).SerializeAsString()));
  EXPECT_EQ(record.reported_by(), "farm-a");
  absl::StatusOr<campaign::Trial> back = TrialFromProto(record);
  ASSERT_TRUE(back.ok()) << back.status();
  EXPECT_EQ(back->reported_by, "farm-a");
}

// The same through the wire with the surrogate: the picked candidates (screened_from) and the model's
// agreement are stored, the model itself is rebuilt from the records, and the restored campaign
// continues bit-identically.
TEST(CampaignCodec, SnapshotWithTheSurrogateThroughTheWireContinuesBitIdentically) {
  const v1::CampaignDesign design = ParseDesign(kSolverDesign);  // model unset: auto
  const search::Space space = *SpaceFromDesign(design);
  const search::OutcomeOrder order = *OrderFromObjective(design.objective());
  const search::DistributionOptions options = *DistributionOptionsFromDesign(design, space);
  campaign::CampaignOptions campaign_options = *CampaignOptionsFromDesign(design);
  ASSERT_TRUE(campaign_options.surrogate);
  campaign_options.seed = 17;
  campaign_options.restarts = true;  // the drive's function is linear in one coordinate: C degenerates
  campaign::Campaign original = *campaign::Campaign::Create(space, order, options, campaign_options);
  absl::Time now = absl::FromUnixSeconds(1700000000);
  Drive(original, now, 40);
  int screened = 0;
  for (const campaign::Trial& t : original.trials()) screened += t.screened_from > 1;
  EXPECT_GT(screened, 0);
  EXPECT_GT(original.engine().model_agreement, 0);

  v1::CampaignSnapshot parsed;
  ASSERT_TRUE(parsed.ParseFromString(SnapshotToProto(original.Snapshot()).SerializeAsString()));
  absl::StatusOr<campaign::CampaignSnapshot> snapshot = SnapshotFromProto(parsed, space);
  ASSERT_TRUE(snapshot.ok()) << snapshot.status();
  absl::StatusOr<campaign::Campaign> restored =
      campaign::Campaign::Restore(space, order, options, campaign_options, *snapshot);
  ASSERT_TRUE(restored.ok()) << restored.status();
  absl::Time now_copy = now;
  Drive(original, now, 30);
  Drive(*restored, now_copy, 30);
  EXPECT_EQ(SnapshotToProto(original.Snapshot()).SerializeAsString(),
            SnapshotToProto(restored->Snapshot()).SerializeAsString());
}

TEST(CampaignCodec, DesignModelSetting) {
  v1::CampaignDesign solver = ParseDesign(kSolverDesign);
  EXPECT_TRUE(CampaignOptionsFromDesign(solver)->surrogate);  // auto: 4 real and integer parameters
  solver.set_model("off");
  EXPECT_FALSE(CampaignOptionsFromDesign(solver)->surrogate);
  solver.clear_model();
  solver.mutable_objective()->mutable_grade_scale()->add_labels("poor");
  solver.mutable_objective()->mutable_grade_scale()->add_labels("good");
  EXPECT_FALSE(CampaignOptionsFromDesign(solver)->surrogate);  // auto: graded campaigns only with "on"
  solver.set_model("on");
  EXPECT_TRUE(CampaignOptionsFromDesign(solver)->surrogate);
  v1::CampaignDesign wide = ParseDesign(kSolverDesign);
  for (int k = 0; k < 8; ++k) {
    v1::Parameter* p = wide.add_parameters();
    p->set_name("extra_" + std::to_string(k));
    p->mutable_real()->set_low(0);
    p->mutable_real()->set_high(1);
  }
  EXPECT_FALSE(CampaignOptionsFromDesign(wide)->surrogate);  // auto stops at 10
  wide.set_model("on");
  EXPECT_TRUE(CampaignOptionsFromDesign(wide)->surrogate);
  wide.set_model("maybe");
  EXPECT_THAT(std::string(CampaignOptionsFromDesign(wide).status().message()),
              HasSubstr("model: must be one of \"auto\" (or empty), \"on\", \"off\", got \"maybe\""));
}

TEST(CampaignCodec, DesignEngineSettings) {
  v1::CampaignDesign design = ParseDesign(kMixedDesign);
  design.set_lease_seconds(90);
  design.set_trial_budget(500);
  design.set_target(12.5);
  absl::StatusOr<campaign::CampaignOptions> options = CampaignOptionsFromDesign(design);
  ASSERT_TRUE(options.ok()) << options.status();
  EXPECT_EQ(options->default_lease, absl::Seconds(90));
  EXPECT_EQ(options->trial_budget, 500);
  EXPECT_EQ(options->target->score, 12.5);
  design.set_target_grade("good");
  EXPECT_THAT(std::string(CampaignOptionsFromDesign(design).status().message()), HasSubstr("at most one"));
  design.clear_target();
  EXPECT_THAT(std::string(CampaignOptionsFromDesign(design).status().message()),
              HasSubstr("this campaign takes scores"));
  design.clear_target_grade();
  design.set_staleness_limit(-1);
  EXPECT_THAT(std::string(CampaignOptionsFromDesign(design).status().message()), HasSubstr("staleness_limit"));
  design.set_staleness_limit(0);
  design.set_noise("replicates:4");
  options = CampaignOptionsFromDesign(design);
  ASSERT_TRUE(options.ok()) << options.status();
  EXPECT_EQ(options->noise.mode, campaign::NoiseMode::kReplicates);
  EXPECT_EQ(options->noise.replicates, 4);
  EXPECT_TRUE(options->noise.confirms_target());  // unset: on with noise handling
  design.set_confirm_target(false);
  EXPECT_FALSE(CampaignOptionsFromDesign(design)->noise.confirms_target());
  design.set_noise("loud");
  EXPECT_THAT(std::string(CampaignOptionsFromDesign(design).status().message()),
              HasSubstr("noise: must be off, auto or replicates:K with K in 2..16, got 'loud'"));
}

}  // namespace
}  // namespace ogive::codec
