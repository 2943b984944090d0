// RandomStream: the seeded source of randomness that the search core draws from.
//
// The generator is xoshiro256** (Blackman and Vigna, "Scrambled linear pseudorandom number generators",
// ACM TOMS 47(4), 2021), seeded through splitmix64. Its whole position is four 64-bit words, so a campaign
// can store where its stream stands and continue it bit-identically after a restart. Normal deviates use
// the Box-Muller transform without a cached spare, so the position alone determines every future draw.
//
// Not thread-safe; each campaign owns its stream.
#ifndef OGIVE_SERVER_SEARCH_RANDOM_STREAM_H_
#define OGIVE_SERVER_SEARCH_RANDOM_STREAM_H_

#include <array>
#include <cstdint>

namespace ogive::search {

class RandomStream {
 public:
  using State = std::array<uint64_t, 4>;

  explicit RandomStream(uint64_t seed);
  // Continues a stream from a position returned by state().
  static RandomStream FromState(const State& state);

  // The next 64 uniformly distributed bits.
  uint64_t NextBits();
  // Uniform on the open interval (0, 1); never returns 0 or 1.
  double Uniform();
  // Uniform integer in [0, bound). REQUIRES: bound > 0.
  uint64_t UniformBelow(uint64_t bound);
  // A standard normal deviate N(0, 1).
  double Normal();

  const State& state() const { return s_; }

 private:
  RandomStream() = default;
  State s_{};
};

}  // namespace ogive::search

#endif  // OGIVE_SERVER_SEARCH_RANDOM_STREAM_H_
