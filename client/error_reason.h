// The machine-readable reason of a refusal from ogived. The server sends, with the gRPC code and a
// message for people, a google.rpc.Status in the grpc-status-details-bin trailer holding a
// google.rpc.ErrorInfo (reason, domain, metadata) and, when it says how long to wait, a
// google.rpc.RetryInfo. Callers decide on the reason (CAMPAIGN_DONE, CAMPAIGN_PAUSED,
// BUDGET_COMMITTED, RATE_LIMITED, ...; the list is at the top of proto/ogive/v1/service.proto), never
// on the message text.
#ifndef OGIVE_CLIENT_ERROR_REASON_H_
#define OGIVE_CLIENT_ERROR_REASON_H_

#include <map>
#include <optional>
#include <string>

#include "absl/status/status.h"
#include "absl/strings/string_view.h"
#include "absl/time/time.h"
#include "grpcpp/grpcpp.h"

namespace ogive::client {

struct ErrorReason {
  std::string reason;                           // e.g. "CAMPAIGN_DONE"
  std::string domain;                           // "ogive.v1"
  std::map<std::string, std::string> metadata;  // e.g. {"campaign": "kiln-glaze"}
  std::optional<absl::Duration> retry_delay;    // from a google.rpc.RetryInfo, if one came
};

// `status` as an absl::Status with the same code and message; its error details, if any, are kept
// as a payload for ErrorReasonOf.
absl::Status StatusFromGrpc(const grpc::Status& status);

// The reason carried by a status that StatusFromGrpc made, if the server sent one.
std::optional<ErrorReason> ErrorReasonOf(const absl::Status& status);

// True when `status` carries `reason`.
bool HasReason(const absl::Status& status, absl::string_view reason);

}  // namespace ogive::client

#endif  // OGIVE_CLIENT_ERROR_REASON_H_
