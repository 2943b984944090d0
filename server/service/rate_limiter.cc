#include "server/service/rate_limiter.h"

#include <algorithm>

#include "server/base/check.h"

namespace ogive::service {

TokenBucket::TokenBucket(double rate_per_second, double burst, absl::Time now)
    : rate_per_second_(rate_per_second), burst_(burst), available_(burst), updated_(now) {
  OGIVE_CHECK(rate_per_second > 0);
  OGIVE_CHECK(burst >= 1);
}

double TokenBucket::Available(absl::Time now) const {
  // available(t) = min(burst, available(updated) + rate * (t - updated)), with t - updated >= 0.
  const double elapsed_seconds = std::max(0.0, absl::ToDoubleSeconds(now - updated_));
  return std::min(burst_, available_ + rate_per_second_ * elapsed_seconds);
}

bool TokenBucket::TryTake(absl::Time now) {
  available_ = Available(now);
  updated_ = std::max(updated_, now);
  if (available_ < 1) return false;
  available_ -= 1;
  return true;
}

RequestRateLimiter::RequestRateLimiter(double rate_per_second, double burst)
    : rate_per_second_(rate_per_second), burst_(burst) {
  OGIVE_CHECK(rate_per_second >= 0);
  OGIVE_CHECK(burst >= 1);
}

bool RequestRateLimiter::Allow(absl::string_view key, absl::Time now) {
  if (rate_per_second_ == 0) return true;
  absl::MutexLock lock(&mu_);
  auto it = buckets_.find(key);
  if (it == buckets_.end()) it = buckets_.emplace(std::string(key), TokenBucket(rate_per_second_, burst_, now)).first;
  return it->second.TryTake(now);
}

}  // namespace ogive::service
