// Conversion of the campaign engine's state (EngineState, trials, CampaignSnapshot) to the messages of
// campaign.proto and back, and of a CampaignDesign's engine settings to CampaignOptions. Round trips are exact:
// a restored campaign continues bit-identically.
#ifndef OGIVE_SERVER_CODEC_CAMPAIGN_CODEC_H_
#define OGIVE_SERVER_CODEC_CAMPAIGN_CODEC_H_

#include "absl/status/statusor.h"
#include "ogive/v1/campaign.pb.h"
#include "server/search/space.h"
#include "server/campaign/campaign.h"

namespace ogive::codec {

// The engine settings of a design: seed, staleness limit (0 = default), trial budget, target (a score,
// or a grade label on the scale), lease length (0 = default), restarts. INVALID_ARGUMENT naming the
// field.
absl::StatusOr<campaign::CampaignOptions> CampaignOptionsFromDesign(const v1::CampaignDesign& design);

v1::TrialState TrialStateToProto(campaign::TrialState state);
absl::StatusOr<campaign::TrialState> TrialStateFromProto(v1::TrialState state);  // DATA_LOSS if unknown
v1::OutcomeUse OutcomeUseToProto(campaign::Use use);
v1::CampaignPhase PhaseToProto(campaign::Phase phase);
v1::DoneReason DoneReasonToProto(campaign::DoneReason reason);

v1::TrialRecord TrialToProto(const campaign::Trial& trial);
absl::StatusOr<campaign::Trial> TrialFromProto(const v1::TrialRecord& record);

// With include_distribution = false the distribution field is left empty (storage keeps it apart).
v1::EngineState EngineStateToProto(const campaign::EngineState& engine, bool include_distribution = true);
absl::StatusOr<campaign::EngineState> EngineStateFromProto(const v1::EngineState& proto, const search::Space& space);

v1::CampaignSnapshot SnapshotToProto(const campaign::CampaignSnapshot& snapshot);
absl::StatusOr<campaign::CampaignSnapshot> SnapshotFromProto(const v1::CampaignSnapshot& proto, const search::Space& space);

// One update's record for history and plots, stamped with `at`.
v1::GenerationSummary GenerationToProto(const campaign::GenerationRecord& record, absl::Time at);

// A search outcome as a message; grades take their label from the objective's scale.
v1::Outcome OutcomeToProto(const search::Outcome& outcome, const v1::Objective& objective);

}  // namespace ogive::codec

#endif  // OGIVE_SERVER_CODEC_CAMPAIGN_CODEC_H_
