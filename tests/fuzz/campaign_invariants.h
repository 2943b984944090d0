// The bookkeeping a campaign's stored state must satisfy after any request, checked from what the store
// holds (the state a restarted server would continue from) and from the campaign's view (what memory
// says). Used by the tell fuzz target after every operation. A broken invariant aborts
// (OGIVE_FUZZ_REQUIRE); nothing here changes the campaign.
#ifndef OGIVE_TESTS_FUZZ_CAMPAIGN_INVARIANTS_H_
#define OGIVE_TESTS_FUZZ_CAMPAIGN_INVARIANTS_H_

#include <cstdint>
#include <map>
#include <vector>

#include "absl/time/time.h"
#include "ogive/v1/service.pb.h"
#include "ogive/v1/campaign.pb.h"
#include "server/search/ranking.h"
#include "server/search/space.h"
#include "storage/store.h"

namespace ogive::fuzz {

// What the caller knows independently of the campaign: the design, and every outcome it was told
// (trial number -> the outcome as first reported, voids included).
struct CampaignModel {
  const v1::CampaignDesign* design = nullptr;
  const search::Space* space = nullptr;
  search::OutcomeOrder order;
  std::map<int64_t, search::Outcome> reported;
};

// `stored` is the store's copy of the campaign, `generations` its generation summaries, `view` the
// campaign's view from memory (GetCampaign), `now` the time of the last request.
void RequireCampaignInvariants(const CampaignModel& model, const storage::StoredCampaign& stored,
                            const std::vector<v1::GenerationSummary>& generations, const v1::CampaignView& view,
                            absl::Time now);

// One trial as ListTrials shows it agrees with its stored record and the model.
void RequireTrialViewMatches(const CampaignModel& model, const v1::Trial& view, const v1::TrialRecord& record);

}  // namespace ogive::fuzz

#endif  // OGIVE_TESTS_FUZZ_CAMPAIGN_INVARIANTS_H_
