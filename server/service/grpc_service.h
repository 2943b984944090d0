// OgiveService: the gRPC adapter of the handlers (handlers.h). Each method converts absl::Status to
// grpc::Status (the codes are the same numbers), logs one structured line, and calls the handler
// with the server's clock. Ask and Tell, the calls workers make all day, use gRPC's callback API:
// the reply is finished from the CommitWaiter once the write committed, so no gRPC thread waits for
// an fsync. The other methods are synchronous.
//
// Thread-safe; the registry outlives the service.
#ifndef OGIVE_SERVER_SERVICE_GRPC_SERVICE_H_
#define OGIVE_SERVER_SERVICE_GRPC_SERVICE_H_

#include <atomic>
#include <functional>

#include "absl/time/time.h"
#include "grpcpp/grpcpp.h"
#include "ogive/v1/service.grpc.pb.h"
#include "server/service/registry.h"

namespace ogive::service {

grpc::Status ToGrpc(const absl::Status& status);

class OgiveService final
    : public v1::Ogive::WithCallbackMethod_Ask<v1::Ogive::WithCallbackMethod_Tell<v1::Ogive::Service>> {
 public:
  using Clock = std::function<absl::Time()>;
  OgiveService(Registry* registry, Clock clock) : registry_(registry), clock_(std::move(clock)) {}

  // Ends every Watch stream at its next wake-up (used when draining).
  void StopWatches() { stopping_ = true; }

  grpc::Status CreateStudy(grpc::ServerContext*, const v1::CreateStudyRequest*, v1::StudyView*) override;
  grpc::Status GetStudy(grpc::ServerContext*, const v1::GetStudyRequest*, v1::StudyView*) override;
  grpc::Status ListStudies(grpc::ServerContext*, const v1::ListStudiesRequest*, v1::ListStudiesResponse*) override;
  grpc::ServerUnaryReactor* Ask(grpc::CallbackServerContext*, const v1::AskRequest*, v1::AskResponse*) override;
  grpc::ServerUnaryReactor* Tell(grpc::CallbackServerContext*, const v1::TellRequest*, v1::TellResponse*) override;
  grpc::Status Renew(grpc::ServerContext*, const v1::RenewRequest*, v1::RenewResponse*) override;
  grpc::Status ListTrials(grpc::ServerContext*, const v1::ListTrialsRequest*, v1::ListTrialsResponse*) override;
  grpc::Status ListGenerations(grpc::ServerContext*, const v1::ListGenerationsRequest*,
                               v1::ListGenerationsResponse*) override;
  grpc::Status SetPhase(grpc::ServerContext*, const v1::SetPhaseRequest*, v1::StudyView*) override;
  grpc::Status Watch(grpc::ServerContext*, const v1::WatchRequest*, grpc::ServerWriter<v1::StudyView>*) override;

 private:
  Registry* const registry_;
  const Clock clock_;
  std::atomic<bool> stopping_{false};
};

}  // namespace ogive::service

#endif  // OGIVE_SERVER_SERVICE_GRPC_SERVICE_H_
