// Request validation: checks every field of each request against the service's rules and limits
// before anything is looked up or stored, so a bad request changes nothing. Each error starts with the
// path of the field it refuses ("design.parameters[2].real.low: ...", "reports[0].outcome.score: ...")
// and says what is allowed. Codes: RESOURCE_EXHAUSTED for a repeated field or count beyond a server
// limit (ServiceLimits), INVALID_ARGUMENT for everything else (missing or malformed values, unknown
// enum values, NaN and infinities, strings too long or with characters not allowed).
//
// What depends on stored state (does the campaign exist, is the grade on this campaign's scale, is the trial
// leased to this worker) is checked later, by the codec and the campaign engine.
//
// Free functions over protos; no state.
#ifndef OGIVE_SERVER_SERVICE_VALIDATION_H_
#define OGIVE_SERVER_SERVICE_VALIDATION_H_

#include <string>

#include "absl/status/status.h"
#include "absl/strings/string_view.h"
#include "ogive/v1/service.pb.h"
#include "ogive/v1/campaign.pb.h"
#include "server/service/limits.h"

namespace ogive::service {

// The whole design, field by field (paths start with "design."): names and their characters, parameter
// kinds and bounds, options and grade labels, the objective, every number of the design, the start
// point against the parameters. Also refuses parameter names that would give the same OGIVE_<NAME>
// environment variable to `ogive work`'s programs (they differ only in case or '-' / '_'), or one the
// CLI uses itself (OGIVE_CAMPAIGN, OGIVE_TRIAL, ...).
absl::Status ValidateDesignShape(const v1::CampaignDesign& design, const ServiceLimits& limits);

// INVALID_ARGUMENT "<path>: <rule>" with reason INVALID_FIELD naming `path` (e.g. "reports[2].outcome"):
// the one way a malformed field is refused.
absl::Status InvalidField(absl::string_view path, absl::string_view rule);

// A campaign name as requests carry it (`field` is its path, e.g. "campaign"): 1..max_name_bytes of letters,
// digits, '_', '-' and '.'.
absl::Status ValidateCampaignName(absl::string_view field, const std::string& name, const ServiceLimits& limits);

absl::Status ValidateCreateCampaign(const v1::CreateCampaignRequest& request, const ServiceLimits& limits);
absl::Status ValidateGetCampaign(const v1::GetCampaignRequest& request, const ServiceLimits& limits);
absl::Status ValidateAsk(const v1::AskRequest& request, const ServiceLimits& limits);
// Counts, that each report has an outcome, finite scores, grade labels, note lengths. Whether a grade is
// on the campaign's scale is the codec's check; a trial number that names no trial is a per-report
// NOT_FOUND, left to the campaign.
absl::Status ValidateTell(const v1::TellRequest& request, const ServiceLimits& limits);
absl::Status ValidateRenew(const v1::RenewRequest& request, const ServiceLimits& limits);
absl::Status ValidateListCampaigns(const v1::ListCampaignsRequest& request, const ServiceLimits& limits);
absl::Status ValidateListTrials(const v1::ListTrialsRequest& request, const ServiceLimits& limits);
absl::Status ValidateListGenerations(const v1::ListGenerationsRequest& request, const ServiceLimits& limits);
absl::Status ValidateSetPhase(const v1::SetPhaseRequest& request, const ServiceLimits& limits);
absl::Status ValidateWatch(const v1::WatchRequest& request, const ServiceLimits& limits);

}  // namespace ogive::service

#endif  // OGIVE_SERVER_SERVICE_VALIDATION_H_
