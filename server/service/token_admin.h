// TokenAdmin: makes, lists and revokes access tokens in a Store. The one implementation behind
// `ogived token` — run on the database file directly when no server holds it, or by the running
// server for its admin socket (token_admin_service.h). Validates every field (errors name it and the
// allowed values), makes the secret (token_secret.h) and stores only its digest.
//
// Thread-safe when the store is. The store and the clock outlive it.
#ifndef OGIVE_SERVER_SERVICE_TOKEN_ADMIN_H_
#define OGIVE_SERVER_SERVICE_TOKEN_ADMIN_H_

#include <functional>

#include "absl/status/statusor.h"
#include "absl/time/time.h"
#include "ogive/v1/token_admin.pb.h"
#include "storage/store.h"

namespace ogive::service {

inline constexpr int kMaxTokenLabelBytes = 64;
inline constexpr int kMaxTokenCampaigns = 100;

class TokenAdmin {
 public:
  using Clock = std::function<absl::Time()>;
  // `on_change` (may be empty) runs after every successful create or revoke, e.g. to make the
  // server's Authorizer re-read the table at once.
  TokenAdmin(storage::Store* store, Clock clock, std::function<void()> on_change = {});

  // INVALID_ARGUMENT naming label, role or campaigns; ALREADY_EXISTS when the label is taken (revoked
  // tokens included); INTERNAL when no random secret could be made; the store's errors.
  absl::StatusOr<v1::CreateTokenResponse> Create(const v1::CreateTokenRequest& request);
  absl::StatusOr<v1::ListTokensResponse> List();
  // NOT_FOUND for an unknown label.
  absl::StatusOr<v1::RevokeTokenResponse> Revoke(const v1::RevokeTokenRequest& request);

 private:
  storage::Store* const store_;
  const Clock clock_;
  const std::function<void()> on_change_;
};

}  // namespace ogive::service

#endif  // OGIVE_SERVER_SERVICE_TOKEN_ADMIN_H_
