// The ogive service's methods as plain functions over the Registry: each validates its request (errors
// name the field and the allowed values), converts it to domain types, calls the campaign host and
// converts back. The gRPC layer (grpc_service.h) checks the caller's token first (authorizer.h) and
// only adapts these; tests call them directly. Ask and Tell come in two forms: one that replies
// through a continuation once the write committed (the gRPC layer's, so that no thread waits for an
// fsync), and one that blocks until then.
//
// `token_label` is the label of the caller's token, stored for the audit with what the call writes:
// in the events of Ask, Tell and SetPhase, and as each reported trial's reported_by. Empty without
// tokens.
#ifndef OGIVE_SERVER_SERVICE_HANDLERS_H_
#define OGIVE_SERVER_SERVICE_HANDLERS_H_

#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "absl/time/time.h"
#include "ogive/v1/service.pb.h"
#include "server/service/registry.h"

namespace ogive::service {

absl::StatusOr<v1::CampaignView> CreateCampaign(Registry& registry, const v1::CreateCampaignRequest& request);
absl::StatusOr<v1::CampaignView> GetCampaign(Registry& registry, const v1::GetCampaignRequest& request);
// Only the campaigns named in `scope` when it is not empty (the caller's token is limited to them).
absl::StatusOr<v1::ListCampaignsResponse> ListCampaigns(Registry& registry, const v1::ListCampaignsRequest& request,
                                                    const std::vector<std::string>& scope = {});
void Ask(Registry& registry, const v1::AskRequest& request, absl::Time now, const std::string& token_label,
         Reply<v1::AskResponse> reply);
absl::StatusOr<v1::AskResponse> Ask(Registry& registry, const v1::AskRequest& request, absl::Time now,
                                    const std::string& token_label = "");
// Malformed reports (a NaN or infinite score, a grade not on the scale, no outcome, a note too long)
// fail the whole call with INVALID_ARGUMENT naming reports[i] and store nothing; unknown trials
// (NOT_FOUND) and different outcomes for reported trials (ALREADY_EXISTS) are per-report results.
void Tell(Registry& registry, const v1::TellRequest& request, absl::Time now, const std::string& token_label,
          Reply<v1::TellResponse> reply);
absl::StatusOr<v1::TellResponse> Tell(Registry& registry, const v1::TellRequest& request, absl::Time now,
                                      const std::string& token_label = "");
absl::StatusOr<v1::RenewResponse> Renew(Registry& registry, const v1::RenewRequest& request, absl::Time now);
absl::StatusOr<v1::ListTrialsResponse> ListTrials(Registry& registry, const v1::ListTrialsRequest& request);
// Generation views of a campaign from the store, in generation order, page by page.
absl::StatusOr<v1::ListGenerationsResponse> ListGenerations(Registry& registry,
                                                            const v1::ListGenerationsRequest& request);
absl::StatusOr<v1::CampaignView> SetPhase(Registry& registry, const v1::SetPhaseRequest& request, absl::Time now,
                                       const std::string& token_label = "");

}  // namespace ogive::service

#endif  // OGIVE_SERVER_SERVICE_HANDLERS_H_
