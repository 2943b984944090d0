#include "server/service/authorizer.h"

#include <algorithm>
#include <cmath>
#include <optional>
#include <utility>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_join.h"
#include "server/base/reason.h"
#include "server/service/bearer_header.h"
#include "server/service/log.h"
#include "server/service/token_secret.h"

namespace ogive::service {

absl::Status AuthOptions::Validate() const {
  if (!std::isfinite(max_requests_per_second_per_token) || max_requests_per_second_per_token < 0) {
    return absl::InvalidArgumentError(
        absl::StrCat("max_requests_per_second_per_token: must be 0 (no limit) or a positive number, got ",
                     max_requests_per_second_per_token));
  }
  if (refresh_interval < absl::ZeroDuration()) {
    return absl::InvalidArgumentError(
        absl::StrCat("refresh_interval: must not be negative, got ", absl::FormatDuration(refresh_interval)));
  }
  if (miss_refresh_interval < absl::ZeroDuration()) {
    return absl::InvalidArgumentError(absl::StrCat("miss_refresh_interval: must not be negative, got ",
                                                   absl::FormatDuration(miss_refresh_interval)));
  }
  return absl::OkStatus();
}

bool Caller::MayUse(absl::string_view campaign) const {
  return campaigns.empty() || std::find(campaigns.begin(), campaigns.end(), campaign) != campaigns.end();
}

Authorizer::Authorizer(storage::Store* store, AuthOptions options, Clock clock)
    : store_(store),
      options_(options),
      clock_(std::move(clock)),
      limiter_(options.max_requests_per_second_per_token,
               std::max(1.0, 2 * options.max_requests_per_second_per_token)) {}

absl::StatusOr<std::unique_ptr<Authorizer>> Authorizer::Create(storage::Store* store, AuthOptions options,
                                                               Clock clock) {
  if (absl::Status s = options.Validate(); !s.ok()) return s;
  if (options.require_tokens && store == nullptr) {
    return absl::InvalidArgumentError("store: tokens are required, so a store to read them from is too");
  }
  std::unique_ptr<Authorizer> authorizer(new Authorizer(store, options, std::move(clock)));
  if (options.require_tokens) {
    if (absl::Status s = authorizer->Reload(); !s.ok()) return s;
  }
  return authorizer;
}

absl::Status Authorizer::Reload() {
  absl::MutexLock reloading(&reload_mu_);
  const absl::Time started = clock_();
  absl::StatusOr<std::vector<storage::StoredToken>> tokens = store_->ListTokens();
  if (!tokens.ok()) return tokens.status();
  absl::MutexLock lock(&mu_);
  tokens_ = *std::move(tokens);
  loaded_at_ = started;
  return absl::OkStatus();
}

void Authorizer::RefreshIfOlderThan(absl::Time not_before) {
  {
    absl::ReaderMutexLock lock(&mu_);
    if (loaded_at_ > not_before) return;
  }
  // One thread re-reads; the others go on with the copy they have (at most a refresh old).
  if (!reload_mu_.TryLock()) return;
  const absl::Time started = clock_();
  absl::StatusOr<std::vector<storage::StoredToken>> tokens = store_->ListTokens();
  if (tokens.ok()) {
    absl::MutexLock lock(&mu_);
    tokens_ = *std::move(tokens);
    loaded_at_ = started;
  }
  reload_mu_.Unlock();
  if (!tokens.ok()) {
    LogLine({{"event", "auth"}, {"code", absl::StatusCodeToString(tokens.status().code())},
             {"detail", absl::StrCat("cannot re-read the tokens table (the last copy stays in use): ",
                                     tokens.status().message())}});
  }
}

std::optional<storage::StoredToken> Authorizer::Find(absl::string_view digest) const {
  absl::ReaderMutexLock lock(&mu_);
  const storage::StoredToken* found = nullptr;
  // Every digest is compared, whatever matched before: the time does not depend on where (or how
  // nearly) a guess matched.
  for (const storage::StoredToken& token : tokens_) {
    if (DigestsEqual(token.digest, digest)) found = &token;
  }
  if (found == nullptr) return std::nullopt;
  return *found;
}

bool Authorizer::StillValid(const std::string& label) {
  if (!options_.require_tokens) return true;
  RefreshIfOlderThan(clock_() - options_.refresh_interval);
  absl::ReaderMutexLock lock(&mu_);
  for (const storage::StoredToken& token : tokens_) {
    if (token.label == label) return !token.revoked_at_ns.has_value();
  }
  return false;
}

int Authorizer::valid_tokens() const {
  absl::ReaderMutexLock lock(&mu_);
  return static_cast<int>(std::count_if(tokens_.begin(), tokens_.end(),
                                        [](const storage::StoredToken& t) { return !t.revoked_at_ns.has_value(); }));
}

absl::StatusOr<Caller> Authorizer::Check(absl::Span<const absl::string_view> authorization, Method method,
                                         absl::string_view campaign) {
  if (!options_.require_tokens) return Caller{};
  if (authorization.empty()) {
    return absl::UnauthenticatedError(absl::StrCat(
        MethodName(method), " needs a token (role ", RolesAllowed(method),
        "): send the metadata 'authorization: Bearer <token>' (ogive: --token-file or $OGIVE_TOKEN)"));
  }
  if (authorization.size() > 1) {
    return absl::UnauthenticatedError(
        absl::StrCat("authorization: sent ", authorization.size(), " times; send one bearer token"));
  }
  absl::StatusOr<absl::string_view> token = ParseBearerHeader(authorization[0]);
  if (!token.ok()) return token.status();
  const std::string digest = TokenDigest(*token);
  const absl::Time now = clock_();
  RefreshIfOlderThan(now - options_.refresh_interval);
  std::optional<storage::StoredToken> stored = Find(digest);
  if (!stored.has_value()) {
    // Perhaps made a moment ago (through another path than this server): look once more.
    RefreshIfOlderThan(now - options_.miss_refresh_interval);
    stored = Find(digest);
  }
  if (!stored.has_value()) {
    return absl::UnauthenticatedError("authorization: this server knows no such token (check the token file)");
  }
  if (stored->revoked_at_ns.has_value()) {
    return absl::UnauthenticatedError(absl::StrCat("authorization: the token '", stored->label, "' was revoked"));
  }
  if (!limiter_.Allow(stored->label, now)) {
    // One request's worth of refill is the shortest wait after which a retry can pass.
    return WithReason(absl::ResourceExhaustedError(absl::StrCat(
                          "token '", stored->label, "' sent more than ", limiter_.rate_per_second(),
                          " requests per second (ogived --max-requests-per-second-per-token); slow down and retry")),
                      {std::string(reason::kRateLimited),
                       {{"token", stored->label}},
                       absl::Seconds(1.0 / limiter_.rate_per_second())});
  }
  std::optional<Role> role = ParseRole(stored->role);
  if (!role.has_value()) {
    return absl::PermissionDeniedError(
        absl::StrCat("token '", stored->label, "' has an unknown role '", stored->role, "'"));
  }
  if (static_cast<int>(*role) < static_cast<int>(RequiredRole(method))) {
    return absl::PermissionDeniedError(absl::StrCat(MethodName(method), " needs role ", RolesAllowed(method),
                                                    "; token '", stored->label, "' has role ", stored->role));
  }
  Caller caller{stored->label, *role, std::move(stored->campaigns)};
  if (!campaign.empty() && !caller.MayUse(campaign)) {
    return absl::PermissionDeniedError(absl::StrCat("campaign '", campaign, "': token '", caller.label,
                                                    "' is limited to the campaigns ",
                                                    absl::StrJoin(caller.campaigns, ", ")));
  }
  return caller;
}

}  // namespace ogive::service
