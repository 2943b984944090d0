// Conversion between the wire messages of campaign.proto and the search core's domain types. This is the
// one place where CampaignDesign, Candidate and Outcome messages become Space, Candidate and Outcome
// values (and back); the campaign engine and the service call it, the search core never sees protobuf.
//
// Every error is INVALID_ARGUMENT and names the field (with its index or parameter name) and what is
// allowed.
#ifndef OGIVE_SERVER_CODEC_DESIGN_CODEC_H_
#define OGIVE_SERVER_CODEC_DESIGN_CODEC_H_

#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "ogive/v1/campaign.pb.h"
#include "server/search/ranking.h"
#include "server/search/search_distribution.h"
#include "server/search/space.h"

namespace ogive::codec {

// The validated search space of a design's parameters.
absl::StatusOr<search::Space> SpaceFromDesign(const v1::CampaignDesign& design);

// The outcome order of a design's objective: a direction, or a grade scale of at least two distinct
// non-empty labels (worst first).
absl::StatusOr<search::OutcomeOrder> OrderFromObjective(const v1::Objective& objective);

// The distribution options of a design (population size, expected workers, start point, initial
// spread, Gaussian model). REQUIRES: space == SpaceFromDesign(design).
absl::StatusOr<search::DistributionOptions> DistributionOptionsFromDesign(const v1::CampaignDesign& design,
                                                                         const search::Space& space);

// A candidate message as domain values in the space's parameter order. Every parameter must be
// present, of its kind, and inside its bounds; unknown names are refused.
absl::StatusOr<search::Candidate> CandidateFromProto(const v1::Candidate& candidate, const search::Space& space);
v1::Candidate CandidateToProto(const search::Candidate& candidate, const search::Space& space);

// An outcome message as the search sees it. Grades are looked up in the objective's scale.
absl::StatusOr<search::Outcome> OutcomeFromProto(const v1::Outcome& outcome, const v1::Objective& objective);

}  // namespace ogive::codec

#endif  // OGIVE_SERVER_CODEC_DESIGN_CODEC_H_
