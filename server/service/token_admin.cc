#include "server/service/token_admin.h"

#include <algorithm>
#include <string>
#include <utility>

#include "absl/strings/str_cat.h"
#include "server/service/role.h"
#include "server/service/token_secret.h"

namespace ogive::service {
namespace {

bool LabelCharacterOk(char c) {
  return (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') || (c >= '0' && c <= '9') || c == '_' || c == '-' ||
         c == '.' || c == '@';
}

// The naming rule of campaign names (design.name; see ValidateDesignShape in registry.h).
bool CampaignNameOk(const std::string& name) {
  if (name.empty() || name.size() > 128) return false;
  return std::all_of(name.begin(), name.end(), [](char c) {
    return (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') || (c >= '0' && c <= '9') || c == '_' || c == '-' ||
           c == '.';
  });
}

int64_t UnixMillisOfNanos(int64_t ns) { return ns / 1000000; }

v1::TokenInfo InfoOf(const storage::StoredToken& t) {
  v1::TokenInfo info;
  info.set_label(t.label);
  info.set_role(t.role);
  for (const std::string& s : t.campaigns) info.add_campaigns(s);
  info.set_created_at_unix_ms(UnixMillisOfNanos(t.created_at_ns));
  info.set_revoked(t.revoked_at_ns.has_value());
  if (t.revoked_at_ns.has_value()) info.set_revoked_at_unix_ms(UnixMillisOfNanos(*t.revoked_at_ns));
  return info;
}

absl::Status ValidateTokenLabel(const std::string& label) {
  if (label.empty() || static_cast<int>(label.size()) > kMaxTokenLabelBytes ||
      !std::all_of(label.begin(), label.end(), LabelCharacterOk)) {
    return absl::InvalidArgumentError(absl::StrCat("label: '", label, "' must be 1..", kMaxTokenLabelBytes,
                                                   " letters, digits, '_', '-', '.' or '@'"));
  }
  return absl::OkStatus();
}

}  // namespace

TokenAdmin::TokenAdmin(storage::Store* store, Clock clock, std::function<void()> on_change)
    : store_(store), clock_(std::move(clock)), on_change_(std::move(on_change)) {}

absl::StatusOr<v1::CreateTokenResponse> TokenAdmin::Create(const v1::CreateTokenRequest& request) {
  if (absl::Status s = ValidateTokenLabel(request.label()); !s.ok()) return s;
  if (!ParseRole(request.role()).has_value()) {
    return absl::InvalidArgumentError(
        absl::StrCat("role: must be reader, worker or admin, got '", request.role(), "'"));
  }
  if (request.campaigns_size() > kMaxTokenCampaigns) {
    return absl::InvalidArgumentError(
        absl::StrCat("campaigns: at most ", kMaxTokenCampaigns, " per token, got ", request.campaigns_size()));
  }
  storage::StoredToken token;
  for (const std::string& campaign : request.campaigns()) {
    if (!CampaignNameOk(campaign)) {
      return absl::InvalidArgumentError(absl::StrCat(
          "campaigns: '", campaign, "' is not a campaign name (1..128 letters, digits, '_', '-' and '.')"));
    }
    if (std::find(token.campaigns.begin(), token.campaigns.end(), campaign) == token.campaigns.end()) {
      token.campaigns.push_back(campaign);
    }
  }
  absl::StatusOr<std::string> secret = NewTokenSecret();
  if (!secret.ok()) return secret.status();
  token.label = request.label();
  token.role = request.role();
  token.digest = TokenDigest(*secret);
  token.created_at_ns = absl::ToUnixNanos(clock_());
  if (absl::Status s = store_->CreateToken(token); !s.ok()) return s;
  if (on_change_) on_change_();
  v1::CreateTokenResponse response;
  *response.mutable_token() = InfoOf(token);
  response.set_secret(*std::move(secret));
  return response;
}

absl::StatusOr<v1::ListTokensResponse> TokenAdmin::List() {
  absl::StatusOr<std::vector<storage::StoredToken>> tokens = store_->ListTokens();
  if (!tokens.ok()) return tokens.status();
  v1::ListTokensResponse response;
  for (const storage::StoredToken& t : *tokens) *response.add_tokens() = InfoOf(t);
  return response;
}

absl::StatusOr<v1::RevokeTokenResponse> TokenAdmin::Revoke(const v1::RevokeTokenRequest& request) {
  if (request.label().empty()) return absl::InvalidArgumentError("label: must not be empty");
  absl::StatusOr<bool> revoked = store_->RevokeToken(request.label(), absl::ToUnixNanos(clock_()));
  if (!revoked.ok()) return revoked.status();
  if (*revoked && on_change_) on_change_();
  absl::StatusOr<std::vector<storage::StoredToken>> tokens = store_->ListTokens();
  if (!tokens.ok()) return tokens.status();
  v1::RevokeTokenResponse response;
  for (const storage::StoredToken& t : *tokens) {
    if (t.label == request.label()) *response.mutable_token() = InfoOf(t);
  }
  response.set_already_revoked(!*revoked);
  return response;
}

}  // namespace ogive::service
