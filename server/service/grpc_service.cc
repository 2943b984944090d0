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
#include "server/service/request_body.h"
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

// The campaign a request names, for the Authorizer ("" for none).
const std::string& CampaignNamed(const v1::CreateCampaignRequest& request) { return request.design().name(); }
const std::string& CampaignNamed(const v1::ListCampaignsRequest&) {
  static const std::string* const kNone = new std::string();
  return *kNone;
}
template <typename Request>
const std::string& CampaignNamed(const Request& request) {
  return request.campaign();
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

absl::Status OgiveService::RefuseBody(const char* name, const grpc::ServerContextBase& context,
                                      absl::Status refusal) {
  LogLine({{"event", "bad_request"}, {"method", name}, {"peer", context.peer()}, {"code", CodeName(refusal)},
           {"detail", std::string(refusal.message())}});
  return refusal;
}

template <typename Request, typename Stream, typename Body>
grpc::Status OgiveService::Guarded(const char* name, grpc::ServerContext& context, Method method, Stream* stream,
                                   Body body) {
  const Steady::time_point start = Steady::now();
  return Counted(name, start, [&]() -> grpc::Status {
    CallScope scope(this);
    if (!scope.admitted()) return CallScope::Refusal();
    // gRPC parses the body in Read(): false when its bytes are not a Request (or none came).
    Request request;
    if (!stream->Read(&request)) {
      return ToGrpc(RefuseBody(name, context, UnparseableBody(Request::descriptor()->full_name())));
    }
    if (absl::Status s = CheckBodySize(request.ByteSizeLong(), registry_->limits()); !s.ok()) {
      return ToGrpc(RefuseBody(name, context, std::move(s)));
    }
    absl::StatusOr<Caller> caller = Authorize(context, method, CampaignNamed(request));
    if (!caller.ok()) return ToGrpc(caller.status());
    return body(request, *caller);
  }());
}

template <typename Request, typename Response, typename Body>
grpc::Status OgiveService::Unary(const char* name, grpc::ServerContext& context, Method method,
                                 Streamer<Request, Response>* stream, Body body) {
  return Guarded<Request>(name, context, method, stream, [&](const Request& request, const Caller& caller) {
    Response response;
    const grpc::Status status = body(request, caller, &response);
    if (status.ok()) stream->Write(response);  // false only when the caller is gone
    return status;
  });
}

template <typename Request, typename Response, typename Start, typename Describe>
grpc::ServerUnaryReactor* OgiveService::ReplyAfterCommit(const char* name, const char* event, Method method,
                                                         grpc::CallbackServerContext* context,
                                                         const grpc::ByteBuffer* body, grpc::ByteBuffer* out,
                                                         Start start_call, Describe describe) {
  const Steady::time_point start = Steady::now();
  grpc::ServerUnaryReactor* reactor = context->DefaultReactor();
  // Counted in flight until the reactor finishes: the reply continuation owns the scope.
  auto scope = std::make_unique<CallScope>(this);
  if (!scope->admitted()) {
    reactor->Finish(Counted(name, start, CallScope::Refusal()));
    return reactor;
  }
  // Shared by this frame and the reply, which may run (and be destroyed) before start_call returns.
  auto request = std::make_shared<Request>();
  if (absl::Status s = ParseBody(*body, registry_->limits(), request.get()); !s.ok()) {
    reactor->Finish(Counted(name, start, ToGrpc(RefuseBody(name, *context, std::move(s)))));
    return reactor;
  }
  absl::StatusOr<Caller> caller = Authorize(*context, method, request->campaign());
  if (!caller.ok()) {
    reactor->Finish(Counted(name, start, ToGrpc(caller.status())));
    return reactor;
  }
  const std::string label = caller->label;
  // `out` stays valid until the reactor finishes.
  start_call(*request, label, [this, name, event, start, reactor, request, out, describe, who = *std::move(caller),
                               scope = std::move(scope)](absl::StatusOr<Response> result) mutable {
    const std::string detail = result.ok() ? describe(*result) : "";
    Response response;
    grpc::Status status = Counted(
        name, start, Finish(event, request->campaign(), request->worker(), who, std::move(result), &response, detail));
    if (status.ok()) {
      bool own_buffer = false;
      status = grpc::SerializationTraits<Response>::Serialize(response, out, &own_buffer);
    }
    // Out of flight before the reactor finishes: once every reactor finished, the server may go, and
    // this continuation may be destroyed later, on another thread. A Drain() that returns in the
    // microseconds between leaves this reply to the server's shutdown deadline (ogived: 200 ms); a
    // reply cut off there is one a retry gets again (request ids, duplicate reports).
    scope.reset();
    reactor->Finish(status);
  });
  return reactor;
}

grpc::Status OgiveService::StreamedCreateCampaign(grpc::ServerContext* context,
                                                  Streamer<v1::CreateCampaignRequest, v1::CampaignView>* stream) {
  return Unary("CreateCampaign", *context, Method::kCreateCampaign, stream,
               [&](const v1::CreateCampaignRequest& request, const Caller& caller, v1::CampaignView* response) {
                 return Finish("create", request.design().name(), "", caller,
                               service::CreateCampaign(*registry_, request), response);
               });
}

grpc::Status OgiveService::StreamedGetCampaign(grpc::ServerContext* context,
                                               Streamer<v1::GetCampaignRequest, v1::CampaignView>* stream) {
  return Unary("GetCampaign", *context, Method::kGetCampaign, stream,
               [&](const v1::GetCampaignRequest& request, const Caller& caller, v1::CampaignView* response) {
                 return FinishRead("get", request.campaign(), caller, service::GetCampaign(*registry_, request),
                                   response);
               });
}

grpc::Status OgiveService::StreamedListCampaigns(grpc::ServerContext* context,
                                                 Streamer<v1::ListCampaignsRequest, v1::ListCampaignsResponse>* stream) {
  return Unary(
      "ListCampaigns", *context, Method::kListCampaigns, stream,
      [&](const v1::ListCampaignsRequest& request, const Caller& caller, v1::ListCampaignsResponse* response) {
        return FinishRead("list_campaigns", "", caller, service::ListCampaigns(*registry_, request, caller.campaigns),
                          response);
      });
}

grpc::ServerUnaryReactor* OgiveService::Ask(grpc::CallbackServerContext* context, const grpc::ByteBuffer* body,
                                             grpc::ByteBuffer* out) {
  return ReplyAfterCommit<v1::AskRequest, v1::AskResponse>(
      "Ask", "ask", Method::kAsk, context, body, out,
      [&](const v1::AskRequest& request, const std::string& label, Reply<v1::AskResponse> reply) {
        service::Ask(*registry_, request, clock_(), label, std::move(reply));
      },
      [](const v1::AskResponse& asked) {
        std::string trials;
        for (const v1::Trial& t : asked.trials()) absl::StrAppend(&trials, trials.empty() ? "" : ",", t.number());
        return "trials=" + trials;
      });
}

grpc::ServerUnaryReactor* OgiveService::Tell(grpc::CallbackServerContext* context, const grpc::ByteBuffer* body,
                                              grpc::ByteBuffer* out) {
  return ReplyAfterCommit<v1::TellRequest, v1::TellResponse>(
      "Tell", "tell", Method::kTell, context, body, out,
      [&](const v1::TellRequest& request, const std::string& label, Reply<v1::TellResponse> reply) {
        service::Tell(*registry_, request, clock_(), label, std::move(reply));
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

grpc::Status OgiveService::StreamedRenew(grpc::ServerContext* context,
                                         Streamer<v1::RenewRequest, v1::RenewResponse>* stream) {
  return Unary("Renew", *context, Method::kRenew, stream,
               [&](const v1::RenewRequest& request, const Caller& caller, v1::RenewResponse* response) {
                 return Finish("renew", request.campaign(), request.worker(), caller,
                               service::Renew(*registry_, request, clock_()), response);
               });
}

grpc::Status OgiveService::StreamedListTrials(grpc::ServerContext* context,
                                              Streamer<v1::ListTrialsRequest, v1::ListTrialsResponse>* stream) {
  return Unary("ListTrials", *context, Method::kListTrials, stream,
               [&](const v1::ListTrialsRequest& request, const Caller& caller, v1::ListTrialsResponse* response) {
                 return FinishRead("list_trials", request.campaign(), caller,
                                   service::ListTrials(*registry_, request), response);
               });
}

grpc::Status OgiveService::StreamedListGenerations(
    grpc::ServerContext* context, Streamer<v1::ListGenerationsRequest, v1::ListGenerationsResponse>* stream) {
  return Unary(
      "ListGenerations", *context, Method::kListGenerations, stream,
      [&](const v1::ListGenerationsRequest& request, const Caller& caller, v1::ListGenerationsResponse* response) {
        return FinishRead("list_generations", request.campaign(), caller,
                          service::ListGenerations(*registry_, request), response);
      });
}

grpc::Status OgiveService::StreamedSetPhase(grpc::ServerContext* context,
                                            Streamer<v1::SetPhaseRequest, v1::CampaignView>* stream) {
  return Unary("SetPhase", *context, Method::kSetPhase, stream,
               [&](const v1::SetPhaseRequest& request, const Caller& caller, v1::CampaignView* response) {
                 return Finish("set_phase", request.campaign(), "", caller,
                               service::SetPhase(*registry_, request, clock_(), caller.label), response,
                               v1::PhaseCommand_Name(request.command()));
               });
}

grpc::Status OgiveService::StreamedWatch(grpc::ServerContext* context,
                                         grpc::ServerSplitStreamer<v1::WatchRequest, v1::CampaignView>* stream) {
  return Guarded<v1::WatchRequest>(
      "Watch", *context, Method::kWatch, stream,
      [&](const v1::WatchRequest& request, const Caller& caller) -> grpc::Status {
        if (absl::Status s = ValidateWatch(request, registry_->limits()); !s.ok()) return ToGrpc(s);
        absl::StatusOr<std::shared_ptr<CampaignHost>> host = registry_->Find(request.campaign());
        if (!host.ok()) return ToGrpc(host.status());
        // Each view comes with the version it shows, so no change is sent twice or missed. Wake up at
        // least every 200 ms to notice a cancelled call, a draining server or a revoked token. The view
        // after the change that ended the campaign is the last one sent.
        int64_t version = 0;
        v1::CampaignView view = (*host)->View(/*brief=*/false, &version);
        while (stream->Write(view) && view.status().phase() != v1::CAMPAIGN_PHASE_DONE) {
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
