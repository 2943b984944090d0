// The search distribution in the user's units: each parameter's Marginal (campaign.proto's internal
// coordinates turned into the parameter's unit and bounds), for status views and for the stored
// per-generation history. The one place that knows how an internal coordinate maps back to a value:
// reals affinely onto [low, high] (after ln for log scales), integers onto [low - 1/2, high + 1/2].
//
// Pure functions; no state.
#ifndef OGIVE_SERVER_CODEC_MARGINAL_CODEC_H_
#define OGIVE_SERVER_CODEC_MARGINAL_CODEC_H_

#include <vector>

#include "absl/status/statusor.h"
#include "ogive/v1/service.pb.h"
#include "ogive/v1/campaign.pb.h"
#include "server/search/search_distribution.h"
#include "server/search/space.h"

namespace ogive::codec {

// One Marginal per parameter of `space`, in its order. Reals and integers: mean and one spread in
// the unit (a log parameter's spread is the distance from the mean to exp(ln mean + σ)), with the
// bounds; flags: P(on); categoricals: the options and their probabilities. Units come from
// `design`. REQUIRES: space == SpaceFromDesign(design) and `summary` is a summary over `space`.
std::vector<v1::Marginal> MarginalsToProto(const search::DistributionSummary& summary, const search::Space& space,
                                           const v1::CampaignDesign& design);

// OK when a stored GenerationSummary fits `space`: a mean and a spread per real and integer parameter,
// a probability per flag, one per option of every categorical parameter. DATA_LOSS saying which
// count is off otherwise.
absl::Status CheckGenerationFits(const v1::GenerationSummary& generation, const search::Space& space);

// The summary (internal coordinates) a stored GenerationSummary holds.
// REQUIRES: CheckGenerationFits(generation, space) is OK.
search::DistributionSummary SummaryFromGeneration(const v1::GenerationSummary& generation,
                                                  const search::Space& space);

// A stored generation summary as the service shows it, in user units; errors as CheckGenerationFits.
// REQUIRES: space == SpaceFromDesign(design).
absl::StatusOr<v1::GenerationView> GenerationViewFromSummary(const v1::GenerationSummary& generation,
                                                             const search::Space& space,
                                                             const v1::CampaignDesign& design);

}  // namespace ogive::codec

#endif  // OGIVE_SERVER_CODEC_MARGINAL_CODEC_H_
