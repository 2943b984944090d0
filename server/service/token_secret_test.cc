// Tests of token secrets: SHA-256 against the FIPS 180-2 example vectors, base32 against the RFC 4648
// test vectors, and the shape and spread of new tokens.
#include "server/service/token_secret.h"

#include <set>
#include <string>

#include "absl/strings/escaping.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "server/service/bearer_header.h"

namespace ogive::service {
namespace {

using ::testing::StartsWith;

std::string HexDigest(absl::string_view text) { return absl::BytesToHexString(TokenDigest(text)); }

TEST(TokenDigest, MatchesThePublishedSha256Vectors) {
  // FIPS 180-2, Appendix B.1 (one-block message "abc").
  EXPECT_EQ(HexDigest("abc"), "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
  // FIPS 180-2, Appendix B.2 (two-block message).
  EXPECT_EQ(HexDigest("abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq"),
            "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1");
  // The empty message (the well-known SHA-256 of "", from memory).
  EXPECT_EQ(HexDigest(""), "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855");
  EXPECT_EQ(TokenDigest("abc").size(), 32u);
}

TEST(Base32, MatchesTheRfc4648TestVectorsInLowerCaseWithoutPadding) {
  // RFC 4648 section 10: BASE32("f") = "MY======", ... BASE32("foobar") = "MZXW6YTBOI======".
  EXPECT_EQ(Base32(""), "");
  EXPECT_EQ(Base32("f"), "my");
  EXPECT_EQ(Base32("fo"), "mzxq");
  EXPECT_EQ(Base32("foo"), "mzxw6");
  EXPECT_EQ(Base32("foob"), "mzxw6yq");
  EXPECT_EQ(Base32("fooba"), "mzxw6ytb");
  EXPECT_EQ(Base32("foobar"), "mzxw6ytboi");
}

TEST(NewTokenSecret, HasThePrefixAndOneHundredSixtyRandomBits) {
  std::set<std::string> seen;
  for (int i = 0; i < 1000; ++i) {
    absl::StatusOr<std::string> token = NewTokenSecret();
    ASSERT_TRUE(token.ok()) << token.status();
    ASSERT_THAT(*token, StartsWith("ogt_"));
    const std::string body = token->substr(4);
    // 20 bytes = 160 bits = 32 base32 characters exactly.
    ASSERT_EQ(body.size(), 32u) << *token;
    for (char c : body) ASSERT_TRUE((c >= 'a' && c <= 'z') || (c >= '2' && c <= '7')) << *token;
    // A valid RFC 6750 bearer token as it is.
    const std::string header = "Bearer " + *token;
    absl::StatusOr<absl::string_view> parsed = ParseBearerHeader(header);
    ASSERT_TRUE(parsed.ok()) << parsed.status();
    EXPECT_EQ(*parsed, *token);
    seen.insert(*token);
  }
  EXPECT_EQ(seen.size(), 1000u);  // 1000 draws of 160 bits: a repeat would mean a broken generator
}

TEST(NewTokenSecret, EveryCharacterPositionVaries) {
  // With 200 tokens each of the 32 positions takes many of its 32 values; a stuck position (a
  // generator filling only part of the buffer) would show one.
  std::vector<std::set<char>> values(32);
  for (int i = 0; i < 200; ++i) {
    const std::string token = *NewTokenSecret();
    for (int k = 0; k < 32; ++k) values[k].insert(token[4 + k]);
  }
  for (int k = 0; k < 32; ++k) EXPECT_GE(values[k].size(), 16u) << "position " << k;
}

TEST(DigestsEqual, ComparesContentsAndSizes) {
  const std::string a = TokenDigest("one");
  std::string b = a;
  EXPECT_TRUE(DigestsEqual(a, b));
  b[31] ^= 1;
  EXPECT_FALSE(DigestsEqual(a, b));
  b = a;
  b[0] ^= 0x80;
  EXPECT_FALSE(DigestsEqual(a, b));
  EXPECT_FALSE(DigestsEqual(a, a.substr(0, 31)));
  EXPECT_FALSE(DigestsEqual(a, TokenDigest("two")));
}

}  // namespace
}  // namespace ogive::service
