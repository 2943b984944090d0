#include "server/service/grpc_service.h"

#include <string>

#include "absl/strings/str_cat.h"
#include "server/service/handlers.h"
#include "server/service/log.h"

namespace ogive::service {
namespace {

std::string CodeName(const absl::Status& s) { return absl::StatusCodeToString(s.code()); }

template <typename Response>
grpc::Status Finish(const char* method, const std::string& study, const std::string& worker,
                    absl::StatusOr<Response> result, Response* out, std::string detail = "") {
  LogLine({{"event", method}, {"study", study}, {"worker", worker}, {"code", CodeName(result.status())},
           {"detail", result.ok() ? detail : std::string(result.status().message())}});
  if (!result.ok()) return ToGrpc(result.status());
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
    return grpc::Status(grpc::StatusCode::UNAVAILABLE, "ogived is stopping; retry the call");
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
  return grpc::Status(static_cast<grpc::StatusCode>(status.code()), std::string(status.message()));
}

grpc::Status OgiveService::CreateStudy(grpc::ServerContext*, const v1::CreateStudyRequest* request,
                                       v1::StudyView* response) {
  CallScope scope(this);
  if (!scope.admitted()) return CallScope::Refusal();
  return Finish("create", request->design().name(), "", service::CreateStudy(*registry_, *request),
                response);
}

grpc::Status OgiveService::GetStudy(grpc::ServerContext*, const v1::GetStudyRequest* request,
                                    v1::StudyView* response) {
  CallScope scope(this);
  if (!scope.admitted()) return CallScope::Refusal();
  absl::StatusOr<v1::StudyView> result = service::GetStudy(*registry_, *request);
  if (!result.ok()) return Finish("get", request->study(), "", std::move(result), response);
  *response = *std::move(result);
  return grpc::Status::OK;
}

grpc::Status OgiveService::ListStudies(grpc::ServerContext*, const v1::ListStudiesRequest* request,
                                       v1::ListStudiesResponse* response) {
  CallScope scope(this);
  if (!scope.admitted()) return CallScope::Refusal();
  absl::StatusOr<v1::ListStudiesResponse> result = service::ListStudies(*registry_, *request);
  if (!result.ok()) return ToGrpc(result.status());
  *response = *std::move(result);
  return grpc::Status::OK;
}

grpc::Status OgiveService::Ask(grpc::ServerContext*, const v1::AskRequest* request, v1::AskResponse* response) {
  CallScope scope(this);
  if (!scope.admitted()) return CallScope::Refusal();
  absl::StatusOr<v1::AskResponse> result = service::Ask(*registry_, *request, clock_());
  std::string trials;
  if (result.ok()) {
    for (const v1::Trial& t : result->trials()) absl::StrAppend(&trials, trials.empty() ? "" : ",", t.number());
  }
  return Finish("ask", request->study(), request->worker(), std::move(result), response, "trials=" + trials);
}

grpc::Status OgiveService::Tell(grpc::ServerContext*, const v1::TellRequest* request, v1::TellResponse* response) {
  CallScope scope(this);
  if (!scope.admitted()) return CallScope::Refusal();
  absl::StatusOr<v1::TellResponse> result = service::Tell(*registry_, *request, clock_());
  std::string detail;
  if (result.ok()) {
    for (const v1::ReportResult& r : result->results()) {
      absl::StrAppend(&detail, detail.empty() ? "" : ",", r.trial(), ":",
                      absl::StatusCodeToString(static_cast<absl::StatusCode>(r.code())), r.duplicate() ? "(dup)" : "",
                      r.late() ? "(late)" : "");
    }
  }
  return Finish("tell", request->study(), request->worker(), std::move(result), response, detail);
}

grpc::Status OgiveService::Renew(grpc::ServerContext*, const v1::RenewRequest* request,
                                 v1::RenewResponse* response) {
  CallScope scope(this);
  if (!scope.admitted()) return CallScope::Refusal();
  return Finish("renew", request->study(), request->worker(), service::Renew(*registry_, *request, clock_()),
                response);
}

grpc::Status OgiveService::ListTrials(grpc::ServerContext*, const v1::ListTrialsRequest* request,
                                      v1::ListTrialsResponse* response) {
  CallScope scope(this);
  if (!scope.admitted()) return CallScope::Refusal();
  absl::StatusOr<v1::ListTrialsResponse> result = service::ListTrials(*registry_, *request);
  if (!result.ok()) return Finish("list_trials", request->study(), "", std::move(result), response);
  *response = *std::move(result);
  return grpc::Status::OK;
}

grpc::Status OgiveService::SetPhase(grpc::ServerContext*, const v1::SetPhaseRequest* request,
                                    v1::StudyView* response) {
  CallScope scope(this);
  if (!scope.admitted()) return CallScope::Refusal();
  return Finish("set_phase", request->study(), "", service::SetPhase(*registry_, *request, clock_()), response,
                v1::PhaseCommand_Name(request->command()));
}

grpc::Status OgiveService::Watch(grpc::ServerContext* context, const v1::WatchRequest* request,
                                 grpc::ServerWriter<v1::StudyView>* writer) {
  CallScope scope(this);
  if (!scope.admitted()) return CallScope::Refusal();
  absl::StatusOr<std::shared_ptr<StudyHost>> host = registry_->Find(request->study());
  if (!host.ok()) return ToGrpc(host.status());
  int64_t version = (*host)->version();
  if (!writer->Write((*host)->View(false))) return grpc::Status::OK;
  // Wake up at least every 200 ms to notice a cancelled call or a draining server. The view after the
  // change that ended the study is the last one sent.
  while (!context->IsCancelled() && !stopping_ && !(*host)->done()) {
    const int64_t now_version = (*host)->WaitForChange(version, absl::Now() + absl::Milliseconds(200));
    if (now_version == version) continue;
    version = now_version;
    if (!writer->Write((*host)->View(true))) break;
  }
  return grpc::Status::OK;
}

}  // namespace ogive::service
