// What every candidate handed to a worker must satisfy, checked against the design as the worker
// reads it (not through the search space's own code): a value for each parameter and no other, of
// the parameter's kind, inside its bounds (reals finite), categorical values among the options.
// A violation aborts (OGIVE_FUZZ_REQUIRE).
#ifndef OGIVE_TESTS_FUZZ_CANDIDATE_CHECK_H_
#define OGIVE_TESTS_FUZZ_CANDIDATE_CHECK_H_

#include "ogive/v1/campaign.pb.h"

namespace ogive::fuzz {

void RequireCandidateInDesign(const v1::Candidate& candidate, const v1::CampaignDesign& design);

}  // namespace ogive::fuzz

#endif  // OGIVE_TESTS_FUZZ_CANDIDATE_CHECK_H_
