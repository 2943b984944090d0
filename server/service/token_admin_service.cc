#include "server/service/token_admin_service.h"

#include <string>

#include "absl/strings/str_join.h"
#include "server/service/grpc_service.h"
#include "server/service/log.h"

namespace ogive::service {

grpc::Status TokenAdminService::CreateToken(grpc::ServerContext*, const v1::CreateTokenRequest* request,
                                            v1::CreateTokenResponse* response) {
  absl::StatusOr<v1::CreateTokenResponse> created = admin_->Create(*request);
  LogLine({{"event", "token_create"}, {"label", request->label()}, {"role", request->role()},
           {"campaigns", absl::StrJoin(request->campaigns(), ",")},
           {"code", absl::StatusCodeToString(created.status().code())},
           {"detail", std::string(created.status().message())}});
  if (!created.ok()) return ToGrpc(created.status());
  *response = *std::move(created);
  return grpc::Status::OK;
}

grpc::Status TokenAdminService::ListTokens(grpc::ServerContext*, const v1::ListTokensRequest*,
                                           v1::ListTokensResponse* response) {
  absl::StatusOr<v1::ListTokensResponse> listed = admin_->List();
  if (!listed.ok()) return ToGrpc(listed.status());
  *response = *std::move(listed);
  return grpc::Status::OK;
}

grpc::Status TokenAdminService::RevokeToken(grpc::ServerContext*, const v1::RevokeTokenRequest* request,
                                            v1::RevokeTokenResponse* response) {
  absl::StatusOr<v1::RevokeTokenResponse> revoked = admin_->Revoke(*request);
  LogLine({{"event", "token_revoke"}, {"label", request->label()},
           {"code", absl::StatusCodeToString(revoked.status().code())},
           {"detail", revoked.ok() ? (revoked->already_revoked() ? "already revoked" : "")
                                   : std::string(revoked.status().message())}});
  if (!revoked.ok()) return ToGrpc(revoked.status());
  *response = *std::move(revoked);
  return grpc::Status::OK;
}

}  // namespace ogive::service
