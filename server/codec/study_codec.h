// Conversion of the study engine's state (EngineState, trials, StudySnapshot) to the messages of
// study.proto and back, and of a StudyDesign's engine settings to StudyOptions. Round trips are exact:
// a restored study continues bit-identically.
#ifndef OGIVE_SERVER_CODEC_STUDY_CODEC_H_
#define OGIVE_SERVER_CODEC_STUDY_CODEC_H_

#include "absl/status/statusor.h"
#include "ogive/v1/study.pb.h"
#include "server/search/space.h"
#include "server/study/study.h"

namespace ogive::codec {

// The engine settings of a design: seed, staleness limit (0 = default), trial budget, target (a score,
// or a grade label on the scale), lease length (0 = default), restarts. INVALID_ARGUMENT naming the
// field.
absl::StatusOr<study::StudyOptions> StudyOptionsFromDesign(const v1::StudyDesign& design);

v1::TrialState TrialStateToProto(study::TrialState state);
absl::StatusOr<study::TrialState> TrialStateFromProto(v1::TrialState state);  // DATA_LOSS if unknown
v1::OutcomeUse OutcomeUseToProto(study::Use use);
v1::StudyPhase PhaseToProto(study::Phase phase);
v1::DoneReason DoneReasonToProto(study::DoneReason reason);

v1::TrialRecord TrialToProto(const study::Trial& trial);
absl::StatusOr<study::Trial> TrialFromProto(const v1::TrialRecord& record);

// With include_distribution = false the distribution field is left empty (storage keeps it apart).
v1::EngineState EngineStateToProto(const study::EngineState& engine, bool include_distribution = true);
absl::StatusOr<study::EngineState> EngineStateFromProto(const v1::EngineState& proto, const search::Space& space);

v1::StudySnapshot SnapshotToProto(const study::StudySnapshot& snapshot);
absl::StatusOr<study::StudySnapshot> SnapshotFromProto(const v1::StudySnapshot& proto, const search::Space& space);

// One update's record for history and plots, stamped with `at`.
v1::GenerationSummary GenerationToProto(const study::GenerationRecord& record, absl::Time at);

// A search outcome as a message; grades take their label from the objective's scale.
v1::Outcome OutcomeToProto(const search::Outcome& outcome, const v1::Objective& objective);

}  // namespace ogive::codec

#endif  // OGIVE_SERVER_CODEC_STUDY_CODEC_H_
