// Request rate limits per access token: one token bucket per token label.
//
// A bucket holds at most `burst` requests and refills at `rate_per_second`; a request takes one if
// one is there and is refused otherwise. So a token may send `burst` requests at once and
// `rate_per_second` on average. Pure logic: the time is passed in (a clock that goes back refills
// nothing), so tests need no sleeping.
//
// TokenBucket is a value type, not thread-safe; RequestRateLimiter is thread-safe and owns its
// buckets.
#ifndef OGIVE_SERVER_SERVICE_RATE_LIMITER_H_
#define OGIVE_SERVER_SERVICE_RATE_LIMITER_H_

#include <string>

#include "absl/base/thread_annotations.h"
#include "absl/container/flat_hash_map.h"
#include "absl/strings/string_view.h"
#include "absl/synchronization/mutex.h"
#include "absl/time/time.h"

namespace ogive::service {

class TokenBucket {
 public:
  // A full bucket at `now`. REQUIRES: rate_per_second > 0, burst >= 1.
  TokenBucket(double rate_per_second, double burst, absl::Time now);

  // Takes one request at `now`: true if the bucket held one.
  bool TryTake(absl::Time now);
  // Requests the bucket holds at `now` (a fraction while it refills).
  double Available(absl::Time now) const;

 private:
  double rate_per_second_;
  double burst_;
  double available_;  // at updated_
  absl::Time updated_;
};

class RequestRateLimiter {
 public:
  // rate_per_second == 0 turns the limit off (every request is allowed). REQUIRES: rate_per_second
  // >= 0 and finite; burst >= 1.
  RequestRateLimiter(double rate_per_second, double burst);

  // Counts one request of `key` at `now`: true if it is within the limit.
  bool Allow(absl::string_view key, absl::Time now);

  double rate_per_second() const { return rate_per_second_; }

 private:
  const double rate_per_second_;
  const double burst_;
  absl::Mutex mu_;
  absl::flat_hash_map<std::string, TokenBucket> buckets_ ABSL_GUARDED_BY(mu_);  // one per key seen
};

}  // namespace ogive::service

#endif  // OGIVE_SERVER_SERVICE_RATE_LIMITER_H_
