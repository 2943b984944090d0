#include "server/base/reason.h"

#include "gtest/gtest.h"

namespace ogive {
namespace {

TEST(ReasonTest, AReasonWithMetadataAndADelayRoundTripsThroughTheStatus) {
  absl::Status status = WithReason(absl::FailedPreconditionError("campaign is paused"),
                                   {std::string(reason::kCampaignPaused),
                                    {{"campaign", "kiln\nglaze"}, {"odd=key", "a\\b"}},
                                    absl::Milliseconds(1500)});
  EXPECT_EQ(status.code(), absl::StatusCode::kFailedPrecondition);
  EXPECT_EQ(status.message(), "campaign is paused");
  std::optional<Reason> got = ReasonOf(status);
  ASSERT_TRUE(got.has_value());
  EXPECT_EQ(got->reason, "CAMPAIGN_PAUSED");
  EXPECT_EQ(got->metadata.at("campaign"), "kiln\nglaze");
  EXPECT_EQ(got->metadata.at("odd=key"), "a\\b");
  ASSERT_TRUE(got->retry_delay.has_value());
  EXPECT_EQ(*got->retry_delay, absl::Milliseconds(1500));
}

TEST(ReasonTest, NoReasonIsNoneAndOkStaysOk) {
  EXPECT_FALSE(ReasonOf(absl::NotFoundError("x")).has_value());
  EXPECT_TRUE(WithReason(absl::OkStatus(), {"CAMPAIGN_DONE", {}, std::nullopt}).ok());
  EXPECT_FALSE(ReasonOf(WithReason(absl::OkStatus(), {"CAMPAIGN_DONE", {}, std::nullopt})).has_value());
  std::optional<Reason> plain = ReasonOf(WithReason(absl::AbortedError("x"), {"DRAINING", {}, std::nullopt}));
  ASSERT_TRUE(plain.has_value());
  EXPECT_TRUE(plain->metadata.empty());
  EXPECT_FALSE(plain->retry_delay.has_value());
}

TEST(ReasonTest, ALaterReasonReplacesAnEarlierOne) {
  absl::Status status = WithReason(absl::NotFoundError("x"), {"TRIAL_NOT_FOUND", {}, std::nullopt});
  status = WithReason(status, {"CAMPAIGN_NOT_FOUND", {{"campaign", "c"}}, std::nullopt});
  EXPECT_EQ(ReasonOf(status)->reason, "CAMPAIGN_NOT_FOUND");
}

}  // namespace
}  // namespace ogive
