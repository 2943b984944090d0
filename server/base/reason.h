// Machine-readable reasons for refusals a client has to act on (the campaign is done for good, paused
// for a while, its budget taken by outstanding trials, the caller is rate limited, ...). The domain
// attaches a reason to the absl::Status it returns; the gRPC adapter turns it into a
// google.rpc.ErrorInfo detail (and a google.rpc.RetryInfo when a retry delay is set), so clients decide
// on the reason and never on the message text. Abseil only: the campaign engine may use it.
//
// The reasons and their codes are listed at the top of proto/ogive/v1/service.proto.
#ifndef OGIVE_SERVER_BASE_REASON_H_
#define OGIVE_SERVER_BASE_REASON_H_

#include <map>
#include <optional>
#include <string>

#include "absl/status/status.h"
#include "absl/strings/string_view.h"
#include "absl/time/time.h"

namespace ogive {

// The reasons (google.rpc.ErrorInfo.reason), in the domain kReasonDomain.
namespace reason {
inline constexpr absl::string_view kCampaignDone = "CAMPAIGN_DONE";
inline constexpr absl::string_view kCampaignPaused = "CAMPAIGN_PAUSED";
inline constexpr absl::string_view kBudgetCommitted = "BUDGET_COMMITTED";
inline constexpr absl::string_view kRateLimited = "RATE_LIMITED";
inline constexpr absl::string_view kOutcomeConflict = "OUTCOME_CONFLICT";
inline constexpr absl::string_view kLeaseHeldByOther = "LEASE_HELD_BY_OTHER";
inline constexpr absl::string_view kDraining = "DRAINING";
inline constexpr absl::string_view kCampaignNotFound = "CAMPAIGN_NOT_FOUND";
inline constexpr absl::string_view kTrialNotFound = "TRIAL_NOT_FOUND";
inline constexpr absl::string_view kInvalidField = "INVALID_FIELD";
inline constexpr absl::string_view kLimitExceeded = "LIMIT_EXCEEDED";
inline constexpr absl::string_view kTrialAlreadyReported = "TRIAL_ALREADY_REPORTED";
inline constexpr absl::string_view kCampaignExists = "CAMPAIGN_EXISTS";
inline constexpr absl::string_view kReadOnly = "READ_ONLY";
}  // namespace reason

// google.rpc.ErrorInfo.domain of every reason above.
inline constexpr absl::string_view kReasonDomain = "ogive.v1";

// A reason with its metadata (e.g. {"campaign": "kiln-glaze"}) and, for reasons that say "wait",
// how long to wait before retrying.
struct Reason {
  std::string reason;
  std::map<std::string, std::string> metadata;
  std::optional<absl::Duration> retry_delay;
};

// `status` with `reason` attached (replacing any reason it had). An OK status is returned unchanged.
absl::Status WithReason(absl::Status status, Reason reason);

// The reason attached to `status`, if any.
std::optional<Reason> ReasonOf(const absl::Status& status);

}  // namespace ogive

#endif  // OGIVE_SERVER_BASE_REASON_H_
