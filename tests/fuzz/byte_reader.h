// ByteReader: reads a fuzz input as a stream of small decisions. Every read succeeds; past the end it
// returns zeros, so any byte string is a complete program for the targets that decode one. Not
// thread-safe; does not own the bytes.
#ifndef OGIVE_TESTS_FUZZ_BYTE_READER_H_
#define OGIVE_TESTS_FUZZ_BYTE_READER_H_

#include <cstddef>
#include <cstdint>
#include <cstring>
#include <string>

namespace ogive::fuzz {

class ByteReader {
 public:
  ByteReader(const uint8_t* data, size_t size) : data_(data), size_(size) {}

  bool empty() const { return at_ >= size_; }
  size_t remaining() const { return empty() ? 0 : size_ - at_; }

  // The next byte, or 0 past the end.
  uint8_t Byte() { return empty() ? 0 : data_[at_++]; }
  // A number in [0, n) from one byte. REQUIRES: 0 < n <= 256.
  int Below(int n) { return Byte() % n; }
  bool Bit() { return (Byte() & 1) != 0; }
  // Eight raw bytes as a double: every bit pattern, NaNs and infinities included.
  double RawDouble() {
    uint64_t bits = 0;
    for (int i = 0; i < 8; ++i) bits = (bits << 8) | Byte();
    double d;
    std::memcpy(&d, &bits, sizeof d);
    return d;
  }
  // One of the entries of a table, chosen by one byte.
  template <typename T, size_t N>
  const T& Pick(const T (&table)[N]) {
    return table[Byte() % N];
  }

 private:
  const uint8_t* data_;
  size_t size_;
  size_t at_ = 0;
};

}  // namespace ogive::fuzz

#endif  // OGIVE_TESTS_FUZZ_BYTE_READER_H_
