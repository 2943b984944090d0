// ServiceLimits: the bounds ogived puts on requests, with defaults. Units are in the names; Validate()
// names the field it refuses. Requests beyond a limit get RESOURCE_EXHAUSTED (sizes and counts a client
// chose) or INVALID_ARGUMENT (malformed values), with the limit in the message.
#ifndef OGIVE_SERVER_SERVICE_LIMITS_H_
#define OGIVE_SERVER_SERVICE_LIMITS_H_

#include <cstdint>

#include "absl/status/status.h"

namespace ogive::service {

struct ServiceLimits {
  int max_message_bytes = 4 << 20;   // gRPC receive limit per message
  int max_ask_count = 1000;          // trials per Ask
  int max_reports_per_tell = 1000;   // reports per Tell
  int max_parameters = 1000;         // parameters per design
  int max_options = 1000;            // options per categorical parameter, labels per grade scale
  int max_name_bytes = 128;          // study, parameter, option, label and worker names
  int max_note_bytes = 4096;         // the note of a report
  int max_studies = 10000;           // studies per server
  int max_page_size = 1000;          // trials per ListTrials page
  double max_lease_seconds = 30 * 24 * 3600.0;  // 30 days

  absl::Status Validate() const;
};

}  // namespace ogive::service

#endif  // OGIVE_SERVER_SERVICE_LIMITS_H_
