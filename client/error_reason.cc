#include "client/error_reason.h"

#include <string>

#include "google/rpc/error_details.pb.h"
#include "google/rpc/status.pb.h"

namespace ogive::client {
namespace {

constexpr absl::string_view kDetailsUrl = "type.googleapis.com/google.rpc.Status";

}  // namespace

absl::Status StatusFromGrpc(const grpc::Status& status) {
  if (status.ok()) return absl::OkStatus();
  absl::Status out(static_cast<absl::StatusCode>(status.error_code()), status.error_message());
  if (!status.error_details().empty()) out.SetPayload(kDetailsUrl, absl::Cord(status.error_details()));
  return out;
}

std::optional<ErrorReason> ErrorReasonOf(const absl::Status& status) {
  auto payload = status.GetPayload(kDetailsUrl);
  if (!payload.has_value()) return std::nullopt;
  google::rpc::Status details;
  if (!details.ParseFromString(std::string(*payload))) return std::nullopt;
  std::optional<ErrorReason> out;
  std::optional<absl::Duration> delay;
  for (const google::protobuf::Any& any : details.details()) {
    google::rpc::ErrorInfo info;
    google::rpc::RetryInfo retry;
    if (any.Is<google::rpc::ErrorInfo>() && any.UnpackTo(&info) && !out.has_value()) {
      out = ErrorReason{info.reason(), info.domain(), {info.metadata().begin(), info.metadata().end()}, std::nullopt};
    } else if (any.Is<google::rpc::RetryInfo>() && any.UnpackTo(&retry)) {
      delay = absl::Seconds(retry.retry_delay().seconds()) + absl::Nanoseconds(retry.retry_delay().nanos());
    }
  }
  if (out.has_value()) out->retry_delay = delay;
  return out;
}

bool HasReason(const absl::Status& status, absl::string_view reason) {
  std::optional<ErrorReason> got = ErrorReasonOf(status);
  return got.has_value() && got->reason == reason;
}

}  // namespace ogive::client
