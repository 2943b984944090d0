// ServiceLimits: the bounds ogived puts on requests, with their defaults, and the ogived flag of each
// (LimitFlags(): one table gives the flag, the help line, the default shown and the smallest value
// allowed, so --help and the code cannot disagree). Units are in the names; Validate() names the
// field it refuses.
//
// Requests beyond a count limit (message bytes, parameters, options, labels, trials per Ask or Renew,
// reports per Tell, campaigns) get RESOURCE_EXHAUSTED; strings beyond their length limit and other
// malformed values get INVALID_ARGUMENT. Either message names the field and the limit.
#ifndef OGIVE_SERVER_SERVICE_LIMITS_H_
#define OGIVE_SERVER_SERVICE_LIMITS_H_

#include <string>

#include "absl/status/status.h"
#include "absl/strings/string_view.h"
#include "absl/types/span.h"

namespace ogive::service {

struct ServiceLimits {
  int max_message_bytes = 4 << 20;      // bytes of one request (request_body.h)
  int max_ask_count = 1000;             // trials per Ask, trial numbers per Renew
  int max_reports_per_tell = 1000;      // reports per Tell
  int max_parameters = 1000;            // parameters per design
  int max_options = 1000;               // options per categorical parameter, labels per grade scale
  int max_name_bytes = 128;             // campaign, parameter, option, grade and worker names; units
  int max_request_id_bytes = 128;       // request ids (the C++ client sends 32)
  int max_note_bytes = 4096;            // the note of a report
  int max_description_bytes = 1024;     // a parameter's description
  int max_campaigns = 10000;            // campaigns per server
  int max_page_size = 1000;             // rows per page of ListCampaigns, ListTrials and ListGenerations
  int max_lease_seconds = 30 * 24 * 3600;  // longest lease, 30 days

  // INVALID_ARGUMENT naming the first field below its smallest allowed value (LimitFlag::min).
  absl::Status Validate() const;
};

// One limit as an ogived flag.
struct LimitFlag {
  absl::string_view flag;   // "--max-ask-count"
  absl::string_view field;  // "max_ask_count"
  absl::string_view help;   // "trials per Ask"
  int ServiceLimits::*member;
  int min;                  // smallest value that leaves the server usable
  bool seconds = false;     // a duration in whole seconds: the flag takes 90s, 15m, 2h, 2d or a number
};

// Every limit, in --help order.
absl::Span<const LimitFlag> LimitFlags();

// Sets the limit whose flag is `flag` from `value`. NOT_FOUND when no limit has that flag;
// INVALID_ARGUMENT naming the flag when `value` is not a whole number >= the limit's minimum (or, for
// a duration, not a whole number of seconds of at least that many).
absl::Status SetLimitFromFlag(ServiceLimits& limits, absl::string_view flag, absl::string_view value);

// The --help lines of every limit flag, each with its default:
// "  --max-ask-count N           trials per Ask, trial numbers per Renew (default 1000)\n".
std::string LimitFlagsHelp();

}  // namespace ogive::service

#endif  // OGIVE_SERVER_SERVICE_LIMITS_H_
