// Reading a request body in ogived's own code, so that a body that is not the method's message, or
// one larger than --max-message-bytes, is refused with a message that says so and a reason a client
// can act on. (gRPC's own handlers answer bytes that do not parse with INTERNAL and no message, and
// with UNIMPLEMENTED on the callback API; its size check names no flag.)
//
// The transport's own receive limit is set to TransportReceiveLimit(): twice --max-message-bytes, so
// that a request up to that size reaches this check, and only a larger one is cut off by gRPC itself
// ("Received message larger than max").
#ifndef OGIVE_SERVER_SERVICE_REQUEST_BODY_H_
#define OGIVE_SERVER_SERVICE_REQUEST_BODY_H_

#include <cstddef>

#include "absl/status/status.h"
#include "absl/strings/string_view.h"
#include "grpcpp/support/byte_buffer.h"
#include "grpcpp/support/proto_buffer_reader.h"
#include "server/service/limits.h"

namespace ogive::service {

// gRPC's receive limit for a server with these limits (ServerBuilder::SetMaxReceiveMessageSize).
int TransportReceiveLimit(const ServiceLimits& limits);

// INVALID_ARGUMENT, reason INVALID_FIELD with field "request": the body is not a `message_type`.
absl::Status UnparseableBody(absl::string_view message_type);

// RESOURCE_EXHAUSTED, reason LIMIT_EXCEEDED with limit "max_message_bytes", when `bytes` is over
// `limits.max_message_bytes`; OK otherwise.
absl::Status CheckBodySize(size_t bytes, const ServiceLimits& limits);

// Parses `body` into `*message` after checking its size.
template <typename Message>
absl::Status ParseBody(const grpc::ByteBuffer& body, const ServiceLimits& limits, Message* message) {
  if (absl::Status s = CheckBodySize(body.Length(), limits); !s.ok()) return s;
  grpc::ByteBuffer copy(body);  // the reader takes slices from a buffer it may consume
  grpc::ProtoBufferReader reader(&copy);
  if (!reader.status().ok() || !message->ParseFromZeroCopyStream(&reader)) {
    return UnparseableBody(Message::descriptor()->full_name());
  }
  return absl::OkStatus();
}

}  // namespace ogive::service

#endif  // OGIVE_SERVER_SERVICE_REQUEST_BODY_H_
