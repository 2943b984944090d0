#include "tests/fuzz/design_check.h"

#include <algorithm>
#include <string>

#include "google/protobuf/util/message_differencer.h"
#include "server/codec/design_codec.h"
#include "server/service/handlers.h"
#include "server/service/registry.h"
#include "tests/fuzz/candidate_check.h"
#include "tests/fuzz/memory_store.h"
#include "tests/fuzz/require.h"
#include "tests/support/status_activity.h"

namespace ogive::fuzz {
namespace {

// Asks per round: enough for an update with the default population of a small space, few enough that
// a design with a huge population stays quick.
constexpr int kMaxAskPerRound = 12;
constexpr int kRounds = 4;

// An outcome for the k-th candidate of a round: scores with some ties and an infeasible one now and
// then, or grades spread over the scale, so that updates see every kind of ranking.
v1::Outcome OutcomeFor(const v1::CampaignDesign& design, int round, int k) {
  v1::Outcome o;
  if (k % 5 == 4) {
    o.mutable_infeasible();
  } else if (design.objective().has_grade_scale()) {
    const auto& labels = design.objective().grade_scale().labels();
    o.set_grade(labels[(7 * k + round) % labels.size()]);
  } else {
    o.set_score((37 * k + round) % 11 - 5.0);
  }
  return o;
}

}  // namespace

void CheckDesign(const v1::CampaignDesign& design) {
  MemoryStore store;
  service::Registry registry(&store, service::ServiceLimits());
  v1::CreateCampaignRequest create;
  *create.mutable_design() = design;
  absl::StatusOr<v1::CampaignView> created = service::CreateCampaign(registry, create);
  if (!created.ok()) {
    const absl::StatusCode code = created.status().code();
    OGIVE_FUZZ_REQUIRE(code == absl::StatusCode::kInvalidArgument || code == absl::StatusCode::kResourceExhausted,
                       "a refused design must be INVALID_ARGUMENT or RESOURCE_EXHAUSTED, got ",
                       created.status().ToString());
    OGIVE_FUZZ_REQUIRE(!created.status().message().empty(), "a refusal must say why");
    OGIVE_FUZZ_REQUIRE(store.committed_writes() == 0, "a refused design stored something");
    return;
  }
  OGIVE_FUZZ_REQUIRE(design.parameters_size() >= 1, "a design without parameters was accepted");
  OGIVE_FUZZ_REQUIRE(google::protobuf::util::MessageDifferencer::Equals(created->design(), design),
                     "the campaign's design differs from the one created: ", created->design().ShortDebugString());
  absl::StatusOr<search::Space> space = codec::SpaceFromDesign(design);
  OGIVE_FUZZ_REQUIRE(space.ok(), "an accepted design has no valid space: ", space.status().ToString());

  const absl::Time start = absl::FromUnixSeconds(1800000000);
  for (int round = 0; round < kRounds; ++round) {
    const absl::Time now = start + absl::Seconds(round);
    v1::GetCampaignRequest get;
    get.set_campaign(design.name());
    absl::StatusOr<v1::CampaignView> view = service::GetCampaign(registry, get);
    OGIVE_FUZZ_REQUIRE(view.ok(), view.status().ToString());
    const int population = view->status().population_size();
    OGIVE_FUZZ_REQUIRE(population >= 2, "population size ", population);

    v1::AskRequest ask;
    ask.set_campaign(design.name());
    ask.set_count(std::min(population, kMaxAskPerRound));
    ask.set_worker("fuzz");
    absl::StatusOr<v1::AskResponse> asked = service::Ask(registry, ask, now);
    if (!asked.ok()) {
      // Done (target, budget) or the budget is taken up by outstanding trials.
      OGIVE_FUZZ_REQUIRE(asked.status().code() == absl::StatusCode::kFailedPrecondition, asked.status().ToString());
      break;
    }
    OGIVE_FUZZ_REQUIRE(asked->trials_size() >= 1 && asked->trials_size() <= ask.count(), "asked for ", ask.count(),
                       ", got ", asked->trials_size());
    v1::TellRequest tell;
    tell.set_campaign(design.name());
    tell.set_worker("fuzz");
    for (int k = 0; k < asked->trials_size(); ++k) {
      const v1::Trial& trial = asked->trials(k);
      RequireCandidateInDesign(trial.candidate(), design);
      absl::StatusOr<search::Candidate> back = codec::CandidateFromProto(trial.candidate(), *space);
      OGIVE_FUZZ_REQUIRE(back.ok(), "a candidate handed out does not read back: ", back.status().ToString(), " ",
                         trial.candidate().ShortDebugString());
      v1::Report* report = tell.add_reports();
      report->set_trial(trial.number());
      *report->mutable_outcome() = OutcomeFor(design, round, k);
    }
    absl::StatusOr<v1::TellResponse> told = service::Tell(registry, tell, now);
    OGIVE_FUZZ_REQUIRE(told.ok(), told.status().ToString());
    for (const v1::ReportResult& r : told->results()) {
      OGIVE_FUZZ_REQUIRE(r.code() == 0 && !r.duplicate(), r.ShortDebugString());
    }
  }
  OGIVE_FUZZ_REQUIRE(store.failed_writes() == 0, "the store refused a write the service made");

  // What is stored brings the campaign back as it was.
  service::Registry restarted(&store, service::ServiceLimits());
  absl::Status loaded = restarted.LoadAll();
  OGIVE_FUZZ_REQUIRE(loaded.ok(), loaded.ToString());
  v1::GetCampaignRequest get;
  get.set_campaign(design.name());
  absl::StatusOr<v1::CampaignView> before = service::GetCampaign(registry, get);
  absl::StatusOr<v1::CampaignView> after = service::GetCampaign(restarted, get);
  OGIVE_FUZZ_REQUIRE(before.ok() && after.ok(), before.status().ToString(), after.status().ToString());
  // Recent activity (workers seen, reports in the last hour) is kept in memory and dated by the clock:
  // a restart rebuilds it from the stored reports only, so it is not compared.
  for (v1::CampaignView* view : {&*before, &*after}) {
    testing::ClearActivity(view->mutable_status());
  }
  OGIVE_FUZZ_REQUIRE(google::protobuf::util::MessageDifferencer::Equals(*before, *after),
                     "the campaign reloaded from the store differs:\n", before->ShortDebugString(), "\nvs\n",
                     after->ShortDebugString());
}

}  // namespace ogive::fuzz
