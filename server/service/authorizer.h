// Authorizer: decides, before a handler does anything else, whether a call may proceed — who sent it
// (the bearer token in its `authorization` metadata), whether that token's role may call the method,
// whether its campaign scope covers the campaign, and whether the token is within its request rate.
//
// It runs inside the service, not as a gRPC AuthMetadataProcessor, because gRPC skips those on
// insecure credentials (loopback development without TLS) and every call must be checked.
//
// Tokens live in the store as SHA-256 digests (storage::StoredToken). The Authorizer keeps a copy of
// the tokens table and re-reads it when its copy is older than `refresh_interval`, when a token it
// does not know is presented (at most once per `miss_refresh_interval`, so a flood of wrong tokens
// cannot flood the database), and when Reload() is called (after a token write through this server).
// So a revocation is in force at once when made through the server, and within refresh_interval
// when the table changed any other way. A presented token is hashed and compared against every
// stored digest in constant time (no early exit), so the time taken does not tell how close a guess
// came.
//
// Codes: UNAUTHENTICATED for a missing, malformed, unknown or revoked token; PERMISSION_DENIED for a
// role that may not call the method or a campaign outside the token's scope; RESOURCE_EXHAUSTED beyond
// the rate. Messages name the role needed and never contain a token.
//
// Thread-safe. The store and the clock outlive the Authorizer.
#ifndef OGIVE_SERVER_SERVICE_AUTHORIZER_H_
#define OGIVE_SERVER_SERVICE_AUTHORIZER_H_

#include <functional>
#include <memory>
#include <string>
#include <vector>

#include "absl/base/thread_annotations.h"
#include "absl/status/statusor.h"
#include "absl/strings/string_view.h"
#include "absl/synchronization/mutex.h"
#include "absl/time/time.h"
#include "absl/types/span.h"
#include "server/service/rate_limiter.h"
#include "server/service/role.h"
#include "storage/store.h"

namespace ogive::service {

struct AuthOptions {
  // false only for `ogived --no-auth` (loopback development): every call is let through as an
  // unlimited admin with an empty audit label, and tokens sent are ignored.
  bool require_tokens = true;
  // Requests per second per token (0: no limit); bursts of twice as many (at least 1) pass at once.
  double max_requests_per_second_per_token = 1000;
  absl::Duration refresh_interval = absl::Seconds(1);
  absl::Duration miss_refresh_interval = absl::Milliseconds(100);

  // INVALID_ARGUMENT naming the field for a negative or non-finite rate or a negative interval.
  absl::Status Validate() const;
};

// Who is calling, once the Authorizer let a call through.
struct Caller {
  std::string label;                 // the token's label, recorded for the audit; "" without tokens
  Role role = Role::kAdmin;
  std::vector<std::string> campaigns;  // the token's campaign scope; empty: every campaign

  // Whether the scope covers the campaign named `campaign`.
  bool MayUse(absl::string_view campaign) const;
};

class Authorizer {
 public:
  using Clock = std::function<absl::Time()>;

  // Reads the tokens table once. `store` may be null only when !options.require_tokens. Errors:
  // INVALID_ARGUMENT from options.Validate(), or the store's error reading the table.
  static absl::StatusOr<std::unique_ptr<Authorizer>> Create(storage::Store* store, AuthOptions options,
                                                            Clock clock);

  // Checks one call of `method` about `campaign` ("" for ListCampaigns, which filters with
  // Caller::MayUse instead). `authorization` holds every value of the call's `authorization`
  // metadata (normally one).
  absl::StatusOr<Caller> Check(absl::Span<const absl::string_view> authorization, Method method,
                               absl::string_view campaign);

  // Whether the token labelled `label` that Check() let through is still valid (not revoked), as of
  // a copy of the table at most refresh_interval old. For long calls (Watch). Always true without
  // tokens.
  bool StillValid(const std::string& label) ABSL_LOCKS_EXCLUDED(reload_mu_, mu_);

  // Re-reads the tokens table now. The store's error when it cannot be read (the old copy stays).
  absl::Status Reload() ABSL_LOCKS_EXCLUDED(reload_mu_, mu_);

  bool require_tokens() const { return options_.require_tokens; }
  // Tokens in the copy that are not revoked.
  int valid_tokens() const ABSL_LOCKS_EXCLUDED(mu_);

 private:
  Authorizer(storage::Store* store, AuthOptions options, Clock clock);

  // Re-reads the table if the copy was loaded at or before `not_before`, unless another thread is
  // re-reading it right now. Failures are logged; the old copy stays.
  void RefreshIfOlderThan(absl::Time not_before) ABSL_LOCKS_EXCLUDED(reload_mu_, mu_);
  // The stored token whose digest is `digest`, copied; nullopt if none.
  std::optional<storage::StoredToken> Find(absl::string_view digest) const ABSL_LOCKS_EXCLUDED(mu_);

  storage::Store* const store_;
  const AuthOptions options_;
  const Clock clock_;
  RequestRateLimiter limiter_;

  absl::Mutex reload_mu_;  // held by the one thread re-reading the table
  mutable absl::Mutex mu_;
  std::vector<storage::StoredToken> tokens_ ABSL_GUARDED_BY(mu_);
  absl::Time loaded_at_ ABSL_GUARDED_BY(mu_) = absl::InfinitePast();
};

}  // namespace ogive::service

#endif  // OGIVE_SERVER_SERVICE_AUTHORIZER_H_
