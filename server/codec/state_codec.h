// Conversion of a search distribution's full state to the DistributionState message of campaign.proto and
// back. Doubles are copied as they are, so a round trip is bit-exact and a restored distribution
// continues exactly where the stored one stopped.
#ifndef OGIVE_SERVER_CODEC_STATE_CODEC_H_
#define OGIVE_SERVER_CODEC_STATE_CODEC_H_

#include "absl/status/statusor.h"
#include "ogive/v1/campaign.pb.h"
#include "server/search/search_distribution.h"

namespace ogive::codec {

v1::DistributionState DistributionStateToProto(const search::DistributionState& state);

// INVALID_ARGUMENT (naming the block and field) when sizes are inconsistent; semantic checks are left
// to SearchDistribution::FromState.
absl::StatusOr<search::DistributionState> DistributionStateFromProto(const v1::DistributionState& proto);

}  // namespace ogive::codec

#endif  // OGIVE_SERVER_CODEC_STATE_CODEC_H_
