// OgiveService: the gRPC adapter of the handlers (handlers.h). Each method first has the Authorizer
// check the call's bearer token against the method and the campaign it names (nothing else happens for
// a refused call), then converts absl::Status to grpc::Status (the codes are the same numbers), logs
// one structured line (with the token's label, never the token), and calls the handler with the
// server's clock and the label for the audit. Ask and Tell, the calls workers make all day, use
// gRPC's callback API: the reply is finished from the CommitWaiter once the write committed, so no
// gRPC thread waits for an fsync. The other methods are synchronous. Each method's finished call is
// counted in the metrics in one place: when its status is returned, or for Ask and Tell when the
// reactor finishes.
//
// Every method reads its request body itself (raw bytes for Ask and Tell, gRPC's "streamed" form of
// the others, request_body.h), so a body that does not parse gets INVALID_ARGUMENT with a message and
// an oversized one RESOURCE_EXHAUSTED naming --max-message-bytes, never gRPC's bare INTERNAL or
// UNIMPLEMENTED.
//
// Thread-safe; the registry, the authorizer and the metrics outlive the service.
#ifndef OGIVE_SERVER_SERVICE_GRPC_SERVICE_H_
#define OGIVE_SERVER_SERVICE_GRPC_SERVICE_H_

#include <atomic>
#include <chrono>
#include <functional>
#include <string>

#include "absl/base/thread_annotations.h"
#include "absl/status/statusor.h"
#include "absl/synchronization/mutex.h"
#include "absl/time/time.h"
#include "grpcpp/grpcpp.h"
#include "ogive/v1/service.grpc.pb.h"
#include "server/service/authorizer.h"
#include "server/service/registry.h"
#include "server/service/service_metrics.h"

namespace ogive::service {

grpc::Status ToGrpc(const absl::Status& status);

// Every method in the form that hands its request body to OgiveService unparsed (see above).
using OgiveServiceBase = v1::Ogive::WithRawCallbackMethod_Ask<v1::Ogive::WithRawCallbackMethod_Tell<
    v1::Ogive::WithStreamedUnaryMethod_CreateCampaign<v1::Ogive::WithStreamedUnaryMethod_GetCampaign<
        v1::Ogive::WithStreamedUnaryMethod_ListCampaigns<v1::Ogive::WithStreamedUnaryMethod_Renew<
            v1::Ogive::WithStreamedUnaryMethod_ListTrials<v1::Ogive::WithStreamedUnaryMethod_ListGenerations<
                v1::Ogive::WithStreamedUnaryMethod_SetPhase<
                    v1::Ogive::WithSplitStreamingMethod_Watch<v1::Ogive::Service>>>>>>>>>>;

class OgiveService final : public OgiveServiceBase {
 public:
  using Clock = std::function<absl::Time()>;
  // `metrics` may be null: nothing is counted.
  OgiveService(Registry* registry, Authorizer* authorizer, Clock clock, ServiceMetrics* metrics = nullptr)
      : registry_(registry), authorizer_(authorizer), clock_(std::move(clock)), metrics_(metrics) {}

  // Ends every Watch stream at its next wake-up (used when draining).
  void StopWatches() { stopping_ = true; }

  // For a stop: from now on every new call is refused with UNAVAILABLE (the client retries, and
  // finds the restarted server); waits until the calls in flight have returned, at most `timeout`.
  // True when none is left. Lets ogived close its connections at once afterwards, instead of
  // waiting for idle clients to notice the server's goaway.
  bool Drain(absl::Duration timeout);

  template <typename Request, typename Response>
  using Streamer = grpc::ServerUnaryStreamer<Request, Response>;
  grpc::Status StreamedCreateCampaign(grpc::ServerContext*, Streamer<v1::CreateCampaignRequest, v1::CampaignView>*) override;
  grpc::Status StreamedGetCampaign(grpc::ServerContext*, Streamer<v1::GetCampaignRequest, v1::CampaignView>*) override;
  grpc::Status StreamedListCampaigns(grpc::ServerContext*,
                                     Streamer<v1::ListCampaignsRequest, v1::ListCampaignsResponse>*) override;
  grpc::ServerUnaryReactor* Ask(grpc::CallbackServerContext*, const grpc::ByteBuffer*, grpc::ByteBuffer*) override;
  grpc::ServerUnaryReactor* Tell(grpc::CallbackServerContext*, const grpc::ByteBuffer*, grpc::ByteBuffer*) override;
  grpc::Status StreamedRenew(grpc::ServerContext*, Streamer<v1::RenewRequest, v1::RenewResponse>*) override;
  grpc::Status StreamedListTrials(grpc::ServerContext*, Streamer<v1::ListTrialsRequest, v1::ListTrialsResponse>*) override;
  grpc::Status StreamedListGenerations(grpc::ServerContext*,
                                       Streamer<v1::ListGenerationsRequest, v1::ListGenerationsResponse>*) override;
  grpc::Status StreamedSetPhase(grpc::ServerContext*, Streamer<v1::SetPhaseRequest, v1::CampaignView>*) override;
  grpc::Status StreamedWatch(grpc::ServerContext*, grpc::ServerSplitStreamer<v1::WatchRequest, v1::CampaignView>*) override;

 private:
  // The Authorizer's verdict on this call; a refusal is logged here.
  absl::StatusOr<Caller> Authorize(const grpc::ServerContextBase& context, Method method, const std::string& campaign);
  class CallScope;  // counts one call in flight, unless draining
  using Steady = std::chrono::steady_clock;
  // Counts one finished call of `method` that arrived at `start`; returns `status`.
  grpc::Status Counted(const char* method, Steady::time_point start, grpc::Status status) const;
  // A refused request body (request_body.h), logged.
  absl::Status RefuseBody(const char* name, const grpc::ServerContextBase& context, absl::Status refusal);
  // A synchronous method's frame: counted in flight (refused while draining), the request read from
  // `stream` (refused when it does not parse or is too large), the caller checked, then
  // `body(request, caller)`; latency and code counted under `name`.
  template <typename Request, typename Stream, typename Body>
  grpc::Status Guarded(const char* name, grpc::ServerContext& context, Method method, Stream* stream, Body body);
  // A synchronous unary method: Guarded, with `body(request, caller)` returning the response or an
  // error; the response is written to `stream`.
  template <typename Request, typename Response, typename Body>
  grpc::Status Unary(const char* name, grpc::ServerContext& context, Method method,
                     Streamer<Request, Response>* stream, Body body);
  // A callback method (Ask, Tell): counted in flight (refused while draining), the request parsed
  // from `body`, the caller checked, then `start_call(request, token_label, reply)`; `reply`
  // finishes the call once the write committed, logging `event` with `describe(response)` as
  // detail; latency and code counted under `name`.
  template <typename Request, typename Response, typename Start, typename Describe>
  grpc::ServerUnaryReactor* ReplyAfterCommit(const char* name, const char* event, Method method,
                                             grpc::CallbackServerContext* context, const grpc::ByteBuffer* body,
                                             grpc::ByteBuffer* out, Start start_call, Describe describe);

  Registry* const registry_;
  Authorizer* const authorizer_;
  const Clock clock_;
  ServiceMetrics* const metrics_;
  std::atomic<bool> stopping_{false};
  absl::Mutex calls_mu_;
  int64_t calls_in_flight_ ABSL_GUARDED_BY(calls_mu_) = 0;
  bool draining_ ABSL_GUARDED_BY(calls_mu_) = false;
};

}  // namespace ogive::service

#endif  // OGIVE_SERVER_SERVICE_GRPC_SERVICE_H_
