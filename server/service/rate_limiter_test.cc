// Tests of the token bucket and the per-token limiter on a hand-driven clock: the numbers follow from
// the bucket's definition (capacity `burst`, refilled at `rate` per second).
#include "server/service/rate_limiter.h"

#include "gtest/gtest.h"

namespace ogive::service {
namespace {

const absl::Time kStart = absl::FromUnixSeconds(1800000000);

TEST(TokenBucket, StartsFullAndRefusesOnceEmpty) {
  TokenBucket bucket(/*rate_per_second=*/10, /*burst=*/3, kStart);
  EXPECT_TRUE(bucket.TryTake(kStart));
  EXPECT_TRUE(bucket.TryTake(kStart));
  EXPECT_TRUE(bucket.TryTake(kStart));
  EXPECT_FALSE(bucket.TryTake(kStart));
  EXPECT_FALSE(bucket.TryTake(kStart));  // a refused request takes nothing, and adds nothing
}

TEST(TokenBucket, RefillsAtTheRate) {
  TokenBucket bucket(10, 3, kStart);
  for (int i = 0; i < 3; ++i) ASSERT_TRUE(bucket.TryTake(kStart));
  // 10 per second: one more every 100 ms.
  EXPECT_FALSE(bucket.TryTake(kStart + absl::Milliseconds(99)));
  EXPECT_TRUE(bucket.TryTake(kStart + absl::Milliseconds(100)));
  EXPECT_FALSE(bucket.TryTake(kStart + absl::Milliseconds(150)));
  EXPECT_NEAR(bucket.Available(kStart + absl::Milliseconds(150)), 0.5, 1e-9);
  EXPECT_TRUE(bucket.TryTake(kStart + absl::Milliseconds(200)));
}

TEST(TokenBucket, NeverHoldsMoreThanTheBurst) {
  TokenBucket bucket(10, 3, kStart);
  const absl::Time later = kStart + absl::Hours(1);
  EXPECT_DOUBLE_EQ(bucket.Available(later), 3);
  for (int i = 0; i < 3; ++i) EXPECT_TRUE(bucket.TryTake(later));
  EXPECT_FALSE(bucket.TryTake(later));
}

TEST(TokenBucket, AClockGoingBackRefillsNothing) {
  TokenBucket bucket(10, 2, kStart);
  ASSERT_TRUE(bucket.TryTake(kStart));
  ASSERT_TRUE(bucket.TryTake(kStart));
  EXPECT_FALSE(bucket.TryTake(kStart - absl::Seconds(5)));
  // Nor does coming back to the same moment count the time twice.
  EXPECT_FALSE(bucket.TryTake(kStart));
  EXPECT_TRUE(bucket.TryTake(kStart + absl::Milliseconds(100)));
}

TEST(TokenBucket, SustainedRateMatchesTheRate) {
  // Requests every 62.5 ms (16 per second) for 10 s against 4 per second, burst 5: the burst and
  // then 4 * 10 pass, 5 + 40 = 45. (Steps of 1/16 s keep the arithmetic exact in binary.)
  TokenBucket bucket(4, 5, kStart);
  int allowed = 0;
  for (int i = 0; i <= 160; ++i) allowed += bucket.TryTake(kStart + absl::Microseconds(62500 * i)) ? 1 : 0;
  EXPECT_EQ(allowed, 45);
}

TEST(RequestRateLimiter, KeepsOneBucketPerKey) {
  RequestRateLimiter limiter(/*rate_per_second=*/1, /*burst=*/2);
  EXPECT_TRUE(limiter.Allow("alice", kStart));
  EXPECT_TRUE(limiter.Allow("alice", kStart));
  EXPECT_FALSE(limiter.Allow("alice", kStart));
  EXPECT_TRUE(limiter.Allow("bob", kStart));  // bob's bucket is his own
  EXPECT_TRUE(limiter.Allow("bob", kStart));
  EXPECT_FALSE(limiter.Allow("bob", kStart));
  EXPECT_TRUE(limiter.Allow("alice", kStart + absl::Seconds(1)));
  EXPECT_FALSE(limiter.Allow("alice", kStart + absl::Seconds(1)));
}

TEST(RequestRateLimiter, RateZeroMeansNoLimit) {
  RequestRateLimiter limiter(0, 1);
  for (int i = 0; i < 10000; ++i) ASSERT_TRUE(limiter.Allow("alice", kStart));
}

}  // namespace
}  // namespace ogive::service
