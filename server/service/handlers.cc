#include "server/service/handlers.h"

#include <algorithm>
#include <cmath>
#include <optional>
#include <string>
#include <vector>

#include "absl/functional/function_ref.h"
#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "absl/synchronization/notification.h"
#include "server/base/reason.h"
#include "server/codec/design_codec.h"
#include "server/codec/campaign_codec.h"
#include "server/service/page_token.h"
#include "server/service/validation.h"

namespace ogive::service {
namespace {

// REQUIRES: `seconds` passed validation (finite, within the limit).
std::optional<absl::Duration> LeaseOf(double seconds) {
  if (seconds == 0) return std::nullopt;
  return absl::Seconds(seconds);
}

// Runs `start` (which hands its Reply on) and blocks until the reply came.
template <typename Response>
absl::StatusOr<Response> AwaitReply(absl::FunctionRef<void(Reply<Response>)> start) {
  absl::StatusOr<Response> result;
  absl::Notification replied;
  start([&](absl::StatusOr<Response> r) {
    result = std::move(r);
    replied.Notify();
  });
  replied.WaitForNotification();
  return result;
}

}  // namespace

absl::StatusOr<v1::CampaignView> CreateCampaign(Registry& registry, const v1::CreateCampaignRequest& request) {
  if (absl::Status s = ValidateCreateCampaign(request, registry.limits()); !s.ok()) return s;
  absl::StatusOr<std::shared_ptr<CampaignHost>> host = registry.Create(request.design(), request.request_id());
  if (!host.ok()) return host.status();
  return (*host)->View(false);
}

absl::StatusOr<v1::CampaignView> GetCampaign(Registry& registry, const v1::GetCampaignRequest& request) {
  if (absl::Status s = ValidateGetCampaign(request, registry.limits()); !s.ok()) return s;
  absl::StatusOr<std::shared_ptr<CampaignHost>> host = registry.Find(request.campaign());
  if (!host.ok()) return host.status();
  return (*host)->View(false);
}

absl::StatusOr<v1::ListCampaignsResponse> ListCampaigns(Registry& registry, const v1::ListCampaignsRequest& request,
                                                        const std::vector<std::string>& scope) {
  if (absl::Status s = ValidateListCampaigns(request, registry.limits()); !s.ok()) return s;
  const PageScope page_scope{'c', "", ""};
  absl::StatusOr<std::string> after = ReadPageToken(page_scope, request.page_token());
  if (!after.ok()) return after.status();
  const int page_size = request.page_size() == 0 ? kDefaultPageSize : request.page_size();
  v1::ListCampaignsResponse response;
  std::vector<std::shared_ptr<CampaignHost>> hosts = registry.All();
  std::sort(hosts.begin(), hosts.end(), [](const auto& a, const auto& b) { return a->name() < b->name(); });
  for (const auto& host : hosts) {
    if (!after->empty() && host->name() <= *after) continue;
    if (!scope.empty() && std::find(scope.begin(), scope.end(), host->name()) == scope.end()) continue;
    if (response.campaigns_size() == page_size) {
      response.set_next_page_token(MakePageToken(page_scope, response.campaigns(page_size - 1).name()));
      break;
    }
    *response.add_campaigns() = host->View(true);
  }
  return response;
}

void Ask(Registry& registry, const v1::AskRequest& request, absl::Time now, const std::string& token_label,
         Reply<v1::AskResponse> reply) {
  if (absl::Status s = ValidateAsk(request, registry.limits()); !s.ok()) return reply(s);
  absl::StatusOr<std::shared_ptr<CampaignHost>> host = registry.Find(request.campaign());
  if (!host.ok()) return reply(host.status());
  (*host)->Ask(request.count(), request.worker(), LeaseOf(request.lease_seconds()), request.request_id(), now,
               token_label, [host = *host, reply = std::move(reply)](absl::StatusOr<v1::AskResponse> r) mutable {
                 reply(std::move(r));  // `host` stays alive until the reply is out
               });
}

void Tell(Registry& registry, const v1::TellRequest& request, absl::Time now, const std::string& token_label,
          Reply<v1::TellResponse> reply) {
  if (absl::Status s = ValidateTell(request, registry.limits()); !s.ok()) return reply(s);
  absl::StatusOr<std::shared_ptr<CampaignHost>> host = registry.Find(request.campaign());
  if (!host.ok()) return reply(host.status());
  const v1::Objective& objective = (*host)->design().objective();
  std::vector<campaign::Report> reports;
  for (int i = 0; i < request.reports_size(); ++i) {
    const v1::Report& r = request.reports(i);
    absl::StatusOr<search::Outcome> outcome = codec::OutcomeFromProto(r.outcome(), objective);
    if (!outcome.ok()) {
      // The codec's message starts with the outcome's own path ("outcome.grade: ...").
      return reply(WithReason(absl::InvalidArgumentError(absl::StrCat("reports[", i, "].", outcome.status().message())),
                              {std::string(reason::kInvalidField), {{"field", absl::StrCat("reports[", i, "].outcome")}},
                               std::nullopt}));
    }
    reports.push_back({r.trial(), *outcome, r.outcome().note(), token_label});
  }
  (*host)->Tell(reports, request.worker(), now, token_label,
                [host = *host, reply = std::move(reply)](absl::StatusOr<v1::TellResponse> r) mutable {
                  reply(std::move(r));
                });
}

absl::StatusOr<v1::AskResponse> Ask(Registry& registry, const v1::AskRequest& request, absl::Time now,
                                    const std::string& token_label) {
  return AwaitReply<v1::AskResponse>(
      [&](Reply<v1::AskResponse> reply) { Ask(registry, request, now, token_label, std::move(reply)); });
}

absl::StatusOr<v1::TellResponse> Tell(Registry& registry, const v1::TellRequest& request, absl::Time now,
                                      const std::string& token_label) {
  return AwaitReply<v1::TellResponse>(
      [&](Reply<v1::TellResponse> reply) { Tell(registry, request, now, token_label, std::move(reply)); });
}

absl::StatusOr<v1::RenewResponse> Renew(Registry& registry, const v1::RenewRequest& request, absl::Time now) {
  if (absl::Status s = ValidateRenew(request, registry.limits()); !s.ok()) return s;
  absl::StatusOr<std::shared_ptr<CampaignHost>> host = registry.Find(request.campaign());
  if (!host.ok()) return host.status();
  return (*host)->Renew(std::vector<int64_t>(request.trials().begin(), request.trials().end()), request.worker(),
                        LeaseOf(request.lease_seconds()), now);
}

absl::StatusOr<v1::ListTrialsResponse> ListTrials(Registry& registry, const v1::ListTrialsRequest& request) {
  if (absl::Status s = ValidateListTrials(request, registry.limits()); !s.ok()) return s;
  const PageScope page_scope{'t', request.campaign(), absl::StrCat(static_cast<int>(request.state()))};
  absl::StatusOr<int64_t> after = ReadPageNumber(page_scope, request.page_token());
  if (!after.ok()) return after.status();
  std::optional<campaign::TrialState> state;
  if (request.state() != v1::TRIAL_STATE_UNSPECIFIED) {
    absl::StatusOr<campaign::TrialState> s = codec::TrialStateFromProto(request.state());
    if (!s.ok()) return InvalidField("state", s.status().message());
    state = *s;
  }
  absl::StatusOr<std::shared_ptr<CampaignHost>> host = registry.Find(request.campaign());
  if (!host.ok()) return host.status();
  int64_t next_after = 0;
  v1::ListTrialsResponse response;
  for (v1::Trial& t : (*host)->Trials(state, *after, request.page_size() == 0 ? kDefaultPageSize : request.page_size(), &next_after)) {
    *response.add_trials() = std::move(t);
  }
  if (next_after > 0) response.set_next_page_token(MakePageToken(page_scope, absl::StrCat(next_after)));
  return response;
}

absl::StatusOr<v1::ListGenerationsResponse> ListGenerations(Registry& registry,
                                                            const v1::ListGenerationsRequest& request) {
  if (absl::Status s = ValidateListGenerations(request, registry.limits()); !s.ok()) return s;
  const PageScope page_scope{'g', request.campaign(), ""};
  absl::StatusOr<int64_t> after = ReadPageNumber(page_scope, request.page_token());
  if (!after.ok()) return after.status();
  absl::StatusOr<std::shared_ptr<CampaignHost>> host = registry.Find(request.campaign());
  if (!host.ok()) return host.status();
  int64_t next_after = 0;
  absl::StatusOr<std::vector<v1::GenerationView>> views =
      (*host)->Generations(*after, request.page_size() == 0 ? kDefaultPageSize : request.page_size(), &next_after);
  if (!views.ok()) return views.status();
  v1::ListGenerationsResponse response;
  for (v1::GenerationView& g : *views) *response.add_generations() = std::move(g);
  if (next_after > 0) response.set_next_page_token(MakePageToken(page_scope, absl::StrCat(next_after)));
  return response;
}

absl::StatusOr<v1::CampaignView> SetPhase(Registry& registry, const v1::SetPhaseRequest& request, absl::Time now,
                                       const std::string& token_label) {
  if (absl::Status s = ValidateSetPhase(request, registry.limits()); !s.ok()) return s;
  campaign::PhaseCommand command;
  switch (request.command()) {
    case v1::PHASE_COMMAND_PAUSE:
      command = campaign::PhaseCommand::kPause;
      break;
    case v1::PHASE_COMMAND_RESUME:
      command = campaign::PhaseCommand::kResume;
      break;
    case v1::PHASE_COMMAND_FINISH:
      command = campaign::PhaseCommand::kFinish;
      break;
    default:
      return InvalidField("command", "must be PHASE_COMMAND_PAUSE, PHASE_COMMAND_RESUME or PHASE_COMMAND_FINISH");
  }
  absl::StatusOr<std::shared_ptr<CampaignHost>> host = registry.Find(request.campaign());
  if (!host.ok()) return host.status();
  return (*host)->SetPhase(command, now, token_label);
}

}  // namespace ogive::service
