#include "server/service/grpc_service.h"

#include <string>

#include "absl/strings/str_cat.h"
#include "server/service/handlers.h"
#include "server/service/log.h"
#include "server/service/validation.h"

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

grpc::Status ToGrpc(const absl::Status& status) {
  if (status.ok()) return grpc::Status::OK;
  return grpc::Status(static_cast<grpc::StatusCode>(status.code()), std::string(status.message()));
}

grpc::Status OgiveService::CreateStudy(grpc::ServerContext*, const v1::CreateStudyRequest* request,
                                       v1::StudyView* response) {
  return Finish("create", request->design().name(), "", service::CreateStudy(*registry_, *request),
                response);
}

grpc::Status OgiveService::GetStudy(grpc::ServerContext*, const v1::GetStudyRequest* request,
                                    v1::StudyView* response) {
  absl::StatusOr<v1::StudyView> result = service::GetStudy(*registry_, *request);
  if (!result.ok()) return Finish("get", request->study(), "", std::move(result), response);
  *response = *std::move(result);
  return grpc::Status::OK;
}

grpc::Status OgiveService::ListStudies(grpc::ServerContext*, const v1::ListStudiesRequest* request,
                                       v1::ListStudiesResponse* response) {
  absl::StatusOr<v1::ListStudiesResponse> result = service::ListStudies(*registry_, *request);
  if (!result.ok()) return ToGrpc(result.status());
  *response = *std::move(result);
  return grpc::Status::OK;
}

grpc::ServerUnaryReactor* OgiveService::Ask(grpc::CallbackServerContext* context, const v1::AskRequest* request,
                                             v1::AskResponse* response) {
  grpc::ServerUnaryReactor* reactor = context->DefaultReactor();
  // `request` and `response` stay valid until the reactor finishes.
  service::Ask(*registry_, *request, clock_(), [reactor, request, response](absl::StatusOr<v1::AskResponse> result) {
    std::string trials;
    if (result.ok()) {
      for (const v1::Trial& t : result->trials()) absl::StrAppend(&trials, trials.empty() ? "" : ",", t.number());
    }
    reactor->Finish(
        Finish("ask", request->study(), request->worker(), std::move(result), response, "trials=" + trials));
  });
  return reactor;
}

grpc::ServerUnaryReactor* OgiveService::Tell(grpc::CallbackServerContext* context, const v1::TellRequest* request,
                                              v1::TellResponse* response) {
  grpc::ServerUnaryReactor* reactor = context->DefaultReactor();
  service::Tell(*registry_, *request, clock_(), [reactor, request, response](absl::StatusOr<v1::TellResponse> result) {
    std::string detail;
    if (result.ok()) {
      for (const v1::ReportResult& r : result->results()) {
        absl::StrAppend(&detail, detail.empty() ? "" : ",", r.trial(), ":",
                        absl::StatusCodeToString(static_cast<absl::StatusCode>(r.code())),
                        r.duplicate() ? "(dup)" : "", r.late() ? "(late)" : "");
      }
    }
    reactor->Finish(Finish("tell", request->study(), request->worker(), std::move(result), response, detail));
  });
  return reactor;
}

grpc::Status OgiveService::Renew(grpc::ServerContext*, const v1::RenewRequest* request,
                                 v1::RenewResponse* response) {
  return Finish("renew", request->study(), request->worker(), service::Renew(*registry_, *request, clock_()),
                response);
}

grpc::Status OgiveService::ListTrials(grpc::ServerContext*, const v1::ListTrialsRequest* request,
                                      v1::ListTrialsResponse* response) {
  absl::StatusOr<v1::ListTrialsResponse> result = service::ListTrials(*registry_, *request);
  if (!result.ok()) return Finish("list_trials", request->study(), "", std::move(result), response);
  *response = *std::move(result);
  return grpc::Status::OK;
}

grpc::Status OgiveService::ListGenerations(grpc::ServerContext*, const v1::ListGenerationsRequest* request,
                                           v1::ListGenerationsResponse* response) {
  absl::StatusOr<v1::ListGenerationsResponse> result = service::ListGenerations(*registry_, *request);
  if (!result.ok()) return Finish("list_generations", request->study(), "", std::move(result), response);
  *response = *std::move(result);
  return grpc::Status::OK;
}

grpc::Status OgiveService::SetPhase(grpc::ServerContext*, const v1::SetPhaseRequest* request,
                                    v1::StudyView* response) {
  return Finish("set_phase", request->study(), "", service::SetPhase(*registry_, *request, clock_()), response,
                v1::PhaseCommand_Name(request->command()));
}

grpc::Status OgiveService::Watch(grpc::ServerContext* context, const v1::WatchRequest* request,
                                 grpc::ServerWriter<v1::StudyView>* writer) {
  if (absl::Status s = ValidateWatch(*request, registry_->limits()); !s.ok()) return ToGrpc(s);
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
