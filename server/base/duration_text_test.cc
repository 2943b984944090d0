#include "server/base/duration_text.h"

#include "gmock/gmock.h"
#include "gtest/gtest.h"

namespace ogive {
namespace {

TEST(DurationTextTest, UnitsAndBareSecondsAreRead) {
  const struct {
    const char* text;
    absl::Duration want;
  } cases[] = {{"90s", absl::Seconds(90)},          {"15m", absl::Minutes(15)},
               {"2h", absl::Hours(2)},              {"2d", absl::Hours(48)},
               {"1h30m", absl::Minutes(90)},        {"250ms", absl::Milliseconds(250)},
               {"90", absl::Seconds(90)},           {"0.5", absl::Milliseconds(500)},
               {" 1.5d ", absl::Hours(36)},         {"1d12h", absl::Hours(36)},
               {"1e3", absl::Seconds(1000)},        {"3650d", absl::Hours(24 * 3650)},
               {"0d12h", absl::Hours(12)}};
  for (const auto& c : cases) {
    absl::StatusOr<absl::Duration> got = ParseDurationText("--lease", c.text);
    ASSERT_TRUE(got.ok()) << c.text << ": " << got.status();
    EXPECT_EQ(*got, c.want) << c.text;
  }
}

TEST(DurationTextTest, AnythingElseIsRefusedNamingTheFlagTheTextAndTheForms) {
  for (const char* text : {"", " ", "0", "0s", "-5", "-5s", "5x", "d", "2dd", "inf", "nan", "1e400", "s", "5 m",
                           "1d-3h", "0d90", "1d90", "3651d", "300000d", "1e300", "99999999999h"}) {
    absl::StatusOr<absl::Duration> got = ParseDurationText("--lease", text);
    ASSERT_FALSE(got.ok()) << "'" << text << "' was accepted as " << *got;
    EXPECT_EQ(got.status().code(), absl::StatusCode::kInvalidArgument);
    EXPECT_THAT(std::string(got.status().message()),
                testing::AllOf(testing::HasSubstr("--lease"), testing::HasSubstr(absl::StrCat("'", text, "'")),
                               testing::HasSubstr("at most 3650d, such as 90s, 15m, 2h, 2d")));
  }
}

}  // namespace
}  // namespace ogive
