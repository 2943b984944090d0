#include "server/service/token_secret.h"

#include <openssl/crypto.h>
#include <openssl/rand.h>
#include <openssl/sha.h>

#include <cstdint>

#include "absl/strings/str_cat.h"

namespace ogive::service {

std::string Base32(absl::string_view bytes) {
  static constexpr char kAlphabet[] = "abcdefghijklmnopqrstuvwxyz234567";
  std::string out;
  out.reserve((bytes.size() * 8 + 4) / 5);
  uint32_t buffer = 0;  // bits not yet written, in the low `bits` bits
  int bits = 0;
  for (unsigned char byte : bytes) {
    buffer = (buffer << 8) | byte;
    bits += 8;
    while (bits >= 5) {
      out.push_back(kAlphabet[(buffer >> (bits - 5)) & 31]);
      bits -= 5;
    }
  }
  // The last group is padded with zero bits on the right (RFC 4648 section 6).
  if (bits > 0) out.push_back(kAlphabet[(buffer << (5 - bits)) & 31]);
  return out;
}

absl::StatusOr<std::string> NewTokenSecret() {
  unsigned char random[kTokenRandomBytes];
  if (RAND_bytes(random, sizeof random) != 1) {
    return absl::InternalError("the random generator (OpenSSL RAND_bytes) failed; no token was made");
  }
  std::string token =
      absl::StrCat(kTokenPrefix, Base32(absl::string_view(reinterpret_cast<const char*>(random), sizeof random)));
  OPENSSL_cleanse(random, sizeof random);
  return token;
}

std::string TokenDigest(absl::string_view token) {
  unsigned char digest[SHA256_DIGEST_LENGTH];
  SHA256(reinterpret_cast<const unsigned char*>(token.data()), token.size(), digest);
  return std::string(reinterpret_cast<const char*>(digest), sizeof digest);
}

bool DigestsEqual(absl::string_view a, absl::string_view b) {
  if (a.size() != b.size()) return false;
  return CRYPTO_memcmp(a.data(), b.data(), a.size()) == 0;
}

}  // namespace ogive::service
