// Reading the bearer token out of an `authorization` call metadata value, by the syntax of RFC 6750
// section 2.1:
//
//   credentials = "Bearer" 1*SP b64token
//   b64token    = 1*( ALPHA / DIGIT / "-" / "." / "_" / "~" / "+" / "/" ) *"="
//
// The scheme is compared case-insensitively (RFC 7235 section 2.1); whitespace around the whole value
// is ignored, as HTTP ignores it around a field value (RFC 7230 section 3.2.4). Stateless.
#ifndef OGIVE_SERVER_SERVICE_BEARER_HEADER_H_
#define OGIVE_SERVER_SERVICE_BEARER_HEADER_H_

#include "absl/status/statusor.h"
#include "absl/strings/string_view.h"

namespace ogive::service {

// The token in `value` (a view into it). UNAUTHENTICATED naming what is wrong when the value is not
// of the form above; the message never repeats the value (it may be a secret).
absl::StatusOr<absl::string_view> ParseBearerHeader(absl::string_view value);

}  // namespace ogive::service

#endif  // OGIVE_SERVER_SERVICE_BEARER_HEADER_H_
