#include "server/search/random_stream.h"

#include <cmath>
#include <numbers>

#include "server/base/check.h"

namespace ogive::search {
namespace {

uint64_t SplitMix64(uint64_t& x) {
  uint64_t z = (x += 0x9e3779b97f4a7c15ULL);
  z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ULL;
  z = (z ^ (z >> 27)) * 0x94d049bb133111ebULL;
  return z ^ (z >> 31);
}

uint64_t RotateLeft(uint64_t x, int k) { return (x << k) | (x >> (64 - k)); }

}  // namespace

RandomStream::RandomStream(uint64_t seed) {
  for (uint64_t& word : s_) word = SplitMix64(seed);
}

RandomStream RandomStream::FromState(const State& state) {
  RandomStream stream;
  stream.s_ = state;
  return stream;
}

uint64_t RandomStream::NextBits() {
  const uint64_t result = RotateLeft(s_[1] * 5, 7) * 9;
  const uint64_t t = s_[1] << 17;
  s_[2] ^= s_[0];
  s_[3] ^= s_[1];
  s_[1] ^= s_[2];
  s_[0] ^= s_[3];
  s_[2] ^= t;
  s_[3] = RotateLeft(s_[3], 45);
  return result;
}

double RandomStream::Uniform() {
  // 52 random bits centred in their cell: (k + 1/2) / 2^52 lies strictly inside (0, 1) and is exact
  // in a double (with 53 bits, k + 1/2 for k = 2^53 − 1 would round up to 2^53 and give 1).
  return (static_cast<double>(NextBits() >> 12) + 0.5) * 0x1.0p-52;
}

uint64_t RandomStream::UniformBelow(uint64_t bound) {
  OGIVE_CHECK(bound > 0);
  // Rejection keeps the result exactly uniform.
  const uint64_t limit = UINT64_MAX - UINT64_MAX % bound;
  uint64_t x;
  do {
    x = NextBits();
  } while (x >= limit);
  return x % bound;
}

double RandomStream::Normal() {
  const double u1 = Uniform();
  const double u2 = Uniform();
  return std::sqrt(-2.0 * std::log(u1)) * std::cos(2.0 * std::numbers::pi * u2);
}

}  // namespace ogive::search
