#include "server/service/grpc_service.h"

#include <memory>
#include <optional>
#include <string>
#include <utility>
#include <vector>

#include "absl/strings/str_cat.h"
#include "absl/strings/string_view.h"
#include "google/rpc/error_details.pb.h"
#include "google/rpc/status.pb.h"
#include "server/base/reason.h"
#include "server/service/handlers.h"
#include "server/service/log.h"
#include "server/service/validation.h"

namespace ogive::service {
namespace {

std::string CodeName(const absl::Status& s) { return absl::StatusCodeToString(s.code()); }

template <typename Response>
grpc::Status Finish(const char* method, const std::string& campaign, const std::string& worker, const Caller& caller,
                    absl::StatusOr<Response> result, Response* out, std::string detail = "") {
  LogLine({{"event", method}, {"campaign", campaign}, {"worker", worker}, {"token", caller.label},
           {"code", CodeName(result.status())},
           {"detail", result.ok() ? detail : std::string(result.status().message())}});
  if (!result.ok()) return ToGrpc(result.status());
  *out = *std::move(result);
  return grpc::Status::OK;
}

// Reads answer without a log line when they succeed (they are many and change nothing).
template <typename Response>
grpc::Status FinishRead(const char* method, const std::string& campaign, const Caller& caller,
                        absl::StatusOr<Response> result, Response* out) {
  if (!result.ok()) return Finish(method, campaign, "", caller, std::move(result), out);
  *out = *std::move(result);
  return grpc::Status::OK;
}

}  // namespace

class OgiveService::CallScope {
 public:
  explicit CallScope(OgiveService* service) : service_(service) {
    absl::MutexLock lock(&service_->calls_mu_);
    admitted_ = !service_->draining_;
    if (admitted_) ++service_->calls_in_flight_;
  }
  ~CallScope() {
    if (!admitted_) return;
    absl::MutexLock lock(&service_->calls_mu_);
    --service_->calls_in_flight_;
  }
  CallScope(const CallScope&) = delete;
  CallScope& operator=(const CallScope&) = delete;

  bool admitted() const { return admitted_; }
  static grpc::Status Refusal() {
    return ToGrpc(WithReason(absl::UnavailableError("ogived is stopping; retry the call"),
                             {std::string(reason::kDraining), {}, std::nullopt}));
  }

 private:
  OgiveService* const service_;
  bool admitted_ = false;
};

bool OgiveService::Drain(absl::Duration timeout) {
  absl::MutexLock lock(&calls_mu_);
  draining_ = true;
  auto idle = [this]() ABSL_EXCLUSIVE_LOCKS_REQUIRED(calls_mu_) { return calls_in_flight_ == 0; };
  return calls_mu_.AwaitWithTimeout(absl::Condition(&idle), timeout);
}

grpc::Status ToGrpc(const absl::Status& status) {
  if (status.ok()) return grpc::Status::OK;
  std::string message(status.message());
  std::optional<Reason> why = ReasonOf(status);
  if (!why.has_value()) return grpc::Status(static_cast<grpc::StatusCode>(status.code()), std::move(message));
  // The standard rich error model: a google.rpc.Status in the grpc-status-details-bin trailer, whose
  // code and message repeat the call's, with an ErrorInfo and, for a reason that says when to come
  // back, a RetryInfo.
  google::rpc::Status details;
  details.set_code(static_cast<int>(status.code()));
  details.set_message(message);
  google::rpc::ErrorInfo info;
  info.set_reason(why->reason);
  info.set_domain(std::string(kReasonDomain));
  for (const auto& [key, value] : why->metadata) (*info.mutable_metadata())[key] = value;
  details.add_details()->PackFrom(info);
  if (why->retry_delay.has_value()) {
    google::rpc::RetryInfo retry;
    const int64_t nanos = absl::ToInt64Nanoseconds(*why->retry_delay);
    retry.mutable_retry_delay()->set_seconds(nanos / 1000000000);
    retry.mutable_retry_delay()->set_nanos(static_cast<int32_t>(nanos % 1000000000));
    details.add_details()->PackFrom(retry);
  }
  return grpc::Status(static_cast<grpc::StatusCode>(status.code()), std::move(message), details.SerializeAsString());
}

absl::StatusOr<Caller> OgiveService::Authorize(const grpc::ServerContextBase& context, Method method,
                                               const std::string& campaign) {
  std::vector<absl::string_view> authorization;
  const auto range = context.client_metadata().equal_range("authorization");
  for (auto it = range.first; it != range.second; ++it) {
    authorization.emplace_back(it->second.data(), it->second.size());
  }
  absl::StatusOr<Caller> caller = authorizer_->Check(authorization, method, campaign);
  if (!caller.ok()) {
    LogLine({{"event", "refused"}, {"method", MethodName(method)}, {"campaign", campaign}, {"peer", context.peer()},
             {"code", CodeName(caller.status())}, {"detail", std::string(caller.status().message())}});
  }
  return caller;
}

grpc::Status OgiveService::Counted(const char* method, Steady::time_point start, grpc::Status status) const {
  if (metrics_ != nullptr) {
    metrics_->ObserveRequest(method, static_cast<absl::StatusCode>(status.error_code()),
                             std::chrono::duration<double>(Steady::now() - start).count());
  }
  return status;
}

template <typename Body>
grpc::Status OgiveService::Guarded(const char* name, const grpc::ServerContextBase& context, Method method,
                                   const std::string& campaign, Body body) {
  const Steady::time_point start = Steady::now();
  return Counted(name, start, [&]() -> grpc::Status {
    CallScope scope(this);
    if (!scope.admitted()) return CallScope::Refusal();
    absl::StatusOr<Caller> caller = Authorize(context, method, campaign);
    if (!caller.ok()) return ToGrpc(caller.status());
    return body(*caller);
  }());
}

template <typename Request, typename Response, typename Start, typename Describe>
grpc::ServerUnaryReactor* OgiveService::ReplyAfterCommit(const char* name, const char* event, Method method,
                                                         grpc::CallbackServerContext* context, const Request* request,
                                                         Response* response, Start start_call, Describe describe) {
  const Steady::time_point start = Steady::now();
  grpc::ServerUnaryReactor* reactor = context->DefaultReactor();
  // Counted in flight until the reactor finishes: the reply continuation owns the scope.
  auto scope = std::make_unique<CallScope>(this);
  if (!scope->admitted()) {
    reactor->Finish(Counted(name, start, CallScope::Refusal()));
    return reactor;
  }
  absl::StatusOr<Caller> caller = Authorize(*context, method, request->campaign());
  if (!caller.ok()) {
    reactor->Finish(Counted(name, start, ToGrpc(caller.status())));
    return reactor;
  }
  const std::string label = caller->label;
  // `request` and `response` stay valid until the reactor finishes.
  start_call(label, [this, name, event, start, reactor, request, response, describe, who = *std::move(caller),
                     scope = std::move(scope)](absl::StatusOr<Response> result) mutable {
    const std::string detail = result.ok() ? describe(*result) : "";
    const grpc::Status status = Counted(
        name, start, Finish(event, request->campaign(), request->worker(), who, std::move(result), response, detail));
    // Out of flight before the reactor finishes: once every reactor finished, the server may go, and
    // this continuation may be destroyed later, on another thread. A Drain() that returns in the
    // microseconds between leaves this reply to the server's shutdown deadline (ogived: 200 ms); a
    // reply cut off there is one a retry gets again (request ids, duplicate reports).
    scope.reset();
    reactor->Finish(status);
  });
  return reactor;
}

grpc::Status OgiveService::CreateCampaign(grpc::ServerContext* context, const v1::CreateCampaignRequest* request,
                                       v1::CampaignView* response) {
  return Guarded("CreateCampaign", *context, Method::kCreateCampaign, request->design().name(), [&](const Caller& caller) {
    return Finish("create", request->design().name(), "", caller, service::CreateCampaign(*registry_, *request),
                response);
  });
}

grpc::Status OgiveService::GetCampaign(grpc::ServerContext* context, const v1::GetCampaignRequest* request,
                                    v1::CampaignView* response) {
  return Guarded("GetCampaign", *context, Method::kGetCampaign, request->campaign(), [&](const Caller& caller) {
    return FinishRead("get", request->campaign(), caller, service::GetCampaign(*registry_, *request), response);
  });
}

grpc::Status OgiveService::ListCampaigns(grpc::ServerContext* context, const v1::ListCampaignsRequest* request,
                                       v1::ListCampaignsResponse* response) {
  return Guarded("ListCampaigns", *context, Method::kListCampaigns, "", [&](const Caller& caller) {
    return FinishRead("list_campaigns", "", caller, service::ListCampaigns(*registry_, *request, caller.campaigns),
                    response);
  });
}

grpc::ServerUnaryReactor* OgiveService::Ask(grpc::CallbackServerContext* context, const v1::AskRequest* request,
                                             v1::AskResponse* response) {
  return ReplyAfterCommit(
      "Ask", "ask", Method::kAsk, context, request, response,
      [&](const std::string& label, Reply<v1::AskResponse> reply) {
        service::Ask(*registry_, *request, clock_(), label, std::move(reply));
      },
      [](const v1::AskResponse& asked) {
        std::string trials;
        for (const v1::Trial& t : asked.trials()) absl::StrAppend(&trials, trials.empty() ? "" : ",", t.number());
        return "trials=" + trials;
      });
}

grpc::ServerUnaryReactor* OgiveService::Tell(grpc::CallbackServerContext* context, const v1::TellRequest* request,
                                              v1::TellResponse* response) {
  return ReplyAfterCommit(
      "Tell", "tell", Method::kTell, context, request, response,
      [&](const std::string& label, Reply<v1::TellResponse> reply) {
        service::Tell(*registry_, *request, clock_(), label, std::move(reply));
      },
      [](const v1::TellResponse& told) {
        std::string detail;
        for (const v1::ReportResult& r : told.results()) {
          absl::StrAppend(&detail, detail.empty() ? "" : ",", r.trial(), ":",
                          absl::StatusCodeToString(static_cast<absl::StatusCode>(r.code())),
                          r.duplicate() ? "(dup)" : "", r.late() ? "(late)" : "");
        }
        return detail;
      });
}

grpc::Status OgiveService::Renew(grpc::ServerContext* context, const v1::RenewRequest* request,
                                 v1::RenewResponse* response) {
  return Guarded("Renew", *context, Method::kRenew, request->campaign(), [&](const Caller& caller) {
    return Finish("renew", request->campaign(), request->worker(), caller,
                service::Renew(*registry_, *request, clock_()), response);
  });
}

grpc::Status OgiveService::ListTrials(grpc::ServerContext* context, const v1::ListTrialsRequest* request,
                                      v1::ListTrialsResponse* response) {
  return Guarded("ListTrials", *context, Method::kListTrials, request->campaign(), [&](const Caller& caller) {
    return FinishRead("list_trials", request->campaign(), caller, service::ListTrials(*registry_, *request), response);
  });
}

grpc::Status OgiveService::ListGenerations(grpc::ServerContext* context, const v1::ListGenerationsRequest* request,
                                           v1::ListGenerationsResponse* response) {
  return Guarded("ListGenerations", *context, Method::kListGenerations, request->campaign(), [&](const Caller& caller) {
    return FinishRead("list_generations", request->campaign(), caller, service::ListGenerations(*registry_, *request),
                    response);
  });
}

grpc::Status OgiveService::SetPhase(grpc::ServerContext* context, const v1::SetPhaseRequest* request,
                                    v1::CampaignView* response) {
  return Guarded("SetPhase", *context, Method::kSetPhase, request->campaign(), [&](const Caller& caller) {
    return Finish("set_phase", request->campaign(), "", caller,
                service::SetPhase(*registry_, *request, clock_(), caller.label), response,
                v1::PhaseCommand_Name(request->command()));
  });
}

grpc::Status OgiveService::Watch(grpc::ServerContext* context, const v1::WatchRequest* request,
                                 grpc::ServerWriter<v1::CampaignView>* writer) {
  return Guarded("Watch", *context, Method::kWatch, request->campaign(), [&](const Caller& caller) -> grpc::Status {
    if (absl::Status s = ValidateWatch(*request, registry_->limits()); !s.ok()) return ToGrpc(s);
    absl::StatusOr<std::shared_ptr<CampaignHost>> host = registry_->Find(request->campaign());
    if (!host.ok()) return ToGrpc(host.status());
    // Each view comes with the version it shows, so no change is sent twice or missed. Wake up at
    // least every 200 ms to notice a cancelled call, a draining server or a revoked token. The view
    // after the change that ended the campaign is the last one sent.
    int64_t version = 0;
    v1::CampaignView view = (*host)->View(/*brief=*/false, &version);
    while (writer->Write(view) && view.status().phase() != v1::CAMPAIGN_PHASE_DONE) {
      for (;;) {
        if (context->IsCancelled()) return grpc::Status::OK;
        if (stopping_) return CallScope::Refusal();  // UNAVAILABLE, DRAINING: watch again, here or elsewhere
        if (!authorizer_->StillValid(caller.label)) {
          return ToGrpc(absl::UnauthenticatedError(
              absl::StrCat("authorization: the token '", caller.label, "' was revoked during the watch")));
        }
        if ((*host)->WaitForChange(version, absl::Now() + absl::Milliseconds(200)) != version) break;
      }
      view = (*host)->View(/*brief=*/true, &version);
    }
    return grpc::Status::OK;
  });
}

}  // namespace ogive::service
