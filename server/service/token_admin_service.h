// TokenAdminService: the gRPC adapter of TokenAdmin, served by ogived on its local Unix socket only
// (see token_admin.proto). It checks no bearer token: the socket's file mode (0600) is the check.
// Logs one line per call (label and role, never the secret).
//
// Thread-safe; the TokenAdmin outlives the service.
#ifndef OGIVE_SERVER_SERVICE_TOKEN_ADMIN_SERVICE_H_
#define OGIVE_SERVER_SERVICE_TOKEN_ADMIN_SERVICE_H_

#include "grpcpp/grpcpp.h"
#include "ogive/v1/token_admin.grpc.pb.h"
#include "server/service/token_admin.h"

namespace ogive::service {

class TokenAdminService final : public v1::TokenAdmin::Service {
 public:
  explicit TokenAdminService(TokenAdmin* admin) : admin_(admin) {}

  grpc::Status CreateToken(grpc::ServerContext*, const v1::CreateTokenRequest*, v1::CreateTokenResponse*) override;
  grpc::Status ListTokens(grpc::ServerContext*, const v1::ListTokensRequest*, v1::ListTokensResponse*) override;
  grpc::Status RevokeToken(grpc::ServerContext*, const v1::RevokeTokenRequest*, v1::RevokeTokenResponse*) override;

 private:
  TokenAdmin* const admin_;
};

}  // namespace ogive::service

#endif  // OGIVE_SERVER_SERVICE_TOKEN_ADMIN_SERVICE_H_
