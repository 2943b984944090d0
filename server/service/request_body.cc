#include "server/service/request_body.h"

#include <algorithm>
#include <limits>
#include <optional>
#include <string>

#include "absl/strings/str_cat.h"
#include "server/base/reason.h"

namespace ogive::service {

int TransportReceiveLimit(const ServiceLimits& limits) {
  return static_cast<int>(std::min<int64_t>(2 * static_cast<int64_t>(limits.max_message_bytes),
                                            std::numeric_limits<int>::max()));
}

absl::Status UnparseableBody(absl::string_view message_type) {
  return WithReason(
      absl::InvalidArgumentError(absl::StrCat(
          "request: the body is not a valid ", message_type,
          " (its bytes do not parse as that protocol buffers message; is the client built from this server's "
          "proto/ogive/v1/service.proto?)")),
      {std::string(reason::kInvalidField), {{"field", "request"}}, std::nullopt});
}

absl::Status CheckBodySize(size_t bytes, const ServiceLimits& limits) {
  if (bytes <= static_cast<size_t>(limits.max_message_bytes)) return absl::OkStatus();
  return WithReason(absl::ResourceExhaustedError(absl::StrCat(
                        "request: ", bytes, " bytes, more than this server's limit of ", limits.max_message_bytes,
                        " bytes per request (ogived --max-message-bytes); send fewer trials or reports per call, or "
                        "shorter notes")),
                    {std::string(reason::kLimitExceeded), {{"limit", "max_message_bytes"}}, std::nullopt});
}

}  // namespace ogive::service
