// The bookkeeping a study's stored state must satisfy after any request, checked from what the store
// holds (the state a restarted server would continue from) and from the study's view (what memory
// says). Used by the tell fuzz target after every operation. A broken invariant aborts
// (OGIVE_FUZZ_REQUIRE); nothing here changes the study.
#ifndef OGIVE_TESTS_FUZZ_STUDY_INVARIANTS_H_
#define OGIVE_TESTS_FUZZ_STUDY_INVARIANTS_H_

#include <cstdint>
#include <map>
#include <vector>

#include "absl/time/time.h"
#include "ogive/v1/service.pb.h"
#include "ogive/v1/study.pb.h"
#include "server/search/ranking.h"
#include "server/search/space.h"
#include "storage/store.h"

namespace ogive::fuzz {

// What the caller knows independently of the study: the design, and every outcome it was told
// (trial number -> the outcome as first reported, voids included).
struct StudyModel {
  const v1::StudyDesign* design = nullptr;
  const search::Space* space = nullptr;
  search::OutcomeOrder order;
  std::map<int64_t, search::Outcome> reported;
};

// `stored` is the store's copy of the study, `generations` its generation summaries, `view` the
// study's view from memory (GetStudy), `now` the time of the last request.
void RequireStudyInvariants(const StudyModel& model, const storage::StoredStudy& stored,
                            const std::vector<v1::GenerationSummary>& generations, const v1::StudyView& view,
                            absl::Time now);

// One trial as ListTrials shows it agrees with its stored record and the model.
void RequireTrialViewMatches(const StudyModel& model, const v1::Trial& view, const v1::TrialRecord& record);

}  // namespace ogive::fuzz

#endif  // OGIVE_TESTS_FUZZ_STUDY_INVARIANTS_H_
