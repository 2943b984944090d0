// Tests of reading a bearer token from `authorization` metadata, against the syntax and the example
// of RFC 6750 section 2.1.
#include "server/service/bearer_header.h"

#include <string>

#include "gmock/gmock.h"
#include "gtest/gtest.h"

namespace ogive::service {
namespace {

using ::testing::HasSubstr;
using ::testing::Not;

TEST(ParseBearerHeader, AcceptsTheRfc6750Example) {
  // RFC 6750 section 2.1: "Authorization: Bearer mF_9.B5f-4.1JqM".
  absl::StatusOr<absl::string_view> token = ParseBearerHeader("Bearer mF_9.B5f-4.1JqM");
  ASSERT_TRUE(token.ok()) << token.status();
  EXPECT_EQ(*token, "mF_9.B5f-4.1JqM");
}

TEST(ParseBearerHeader, AcceptsEveryB64TokenCharacterAndPadding) {
  // b64token = 1*( ALPHA / DIGIT / "-" / "." / "_" / "~" / "+" / "/" ) *"="
  EXPECT_EQ(*ParseBearerHeader("Bearer aZ09-._~+/"), "aZ09-._~+/");
  EXPECT_EQ(*ParseBearerHeader("Bearer abc=="), "abc==");
}

TEST(ParseBearerHeader, SchemeIsCaseInsensitiveAndSpacesMayRepeat) {
  // The auth-scheme is case-insensitive (RFC 7235 section 2.1); "Bearer" 1*SP b64token.
  EXPECT_EQ(*ParseBearerHeader("bearer tok"), "tok");
  EXPECT_EQ(*ParseBearerHeader("BEARER tok"), "tok");
  EXPECT_EQ(*ParseBearerHeader("Bearer   tok"), "tok");
  // Whitespace around a field value is not part of it (RFC 7230 section 3.2.4).
  EXPECT_EQ(*ParseBearerHeader("  Bearer tok \t"), "tok");
}

TEST(ParseBearerHeader, RefusesWhatIsNotABearerCredential) {
  for (const std::string value : {
           "",
           "Bearer",
           "Bearer ",
           "Bearertok",
           "Bearer\ttok",  // 1*SP: a tab does not separate
           "Basic QWxhZGRpbjpvcGVuIHNlc2FtZQ==",  // RFC 7617 section 2's example
           "Bearer tok tok",
           "Bearer a=b",
           "Bearer =",
           "Bearer tok\x01",
           "Bearer t\xc3\xb6k",
           "tok",
       }) {
    absl::StatusOr<absl::string_view> token = ParseBearerHeader(value);
    EXPECT_EQ(token.status().code(), absl::StatusCode::kUnauthenticated) << "'" << value << "'";
    EXPECT_THAT(std::string(token.status().message()), HasSubstr("authorization: expected 'Bearer <token>'"));
  }
}

TEST(ParseBearerHeader, MessagesNeverRepeatTheValue) {
  for (const std::string value : {"Basic s3cr3tvalue", "Bearer s3cr3tvalue!", "Bearer s3cr3tvalue s3cr3tvalue"}) {
    absl::StatusOr<absl::string_view> token = ParseBearerHeader(value);
    ASSERT_FALSE(token.ok()) << value;
    EXPECT_THAT(std::string(token.status().message()), Not(HasSubstr("s3cr3t")));
  }
}

}  // namespace
}  // namespace ogive::service
