#include "server/service/limits.h"

#include <cstdint>
#include <limits>

#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "absl/time/time.h"
#include "server/base/duration_text.h"

namespace ogive::service {

absl::Span<const LimitFlag> LimitFlags() {
  using L = ServiceLimits;
  static const LimitFlag kFlags[] = {
      {"--max-message-bytes", "max_message_bytes", "largest request accepted, bytes", &L::max_message_bytes, 1024},
      {"--max-ask-count", "max_ask_count", "trials per Ask, trial numbers per Renew", &L::max_ask_count, 1},
      {"--max-reports-per-tell", "max_reports_per_tell", "reports per Tell", &L::max_reports_per_tell, 1},
      {"--max-parameters", "max_parameters", "parameters per design", &L::max_parameters, 1},
      {"--max-options", "max_options", "options per categorical parameter, labels per grade scale",
       &L::max_options, 2},
      {"--max-name-bytes", "max_name_bytes", "campaign, parameter, option, grade and worker names, units",
       &L::max_name_bytes, 8},
      {"--max-request-id-bytes", "max_request_id_bytes", "request ids", &L::max_request_id_bytes, 32},
      {"--max-note-bytes", "max_note_bytes", "the note of a report", &L::max_note_bytes, 1},
      {"--max-description-bytes", "max_description_bytes", "a parameter's description",
       &L::max_description_bytes, 1},
      {"--max-campaigns", "max_campaigns", "campaigns per server", &L::max_campaigns, 1},
      {"--max-page-size", "max_page_size", "campaigns, trials or generations per list page", &L::max_page_size, 100},
      {"--max-lease", "max_lease_seconds", "longest lease", &L::max_lease_seconds, 1, /*seconds=*/true},
  };
  return kFlags;
}

absl::Status ServiceLimits::Validate() const {
  for (const LimitFlag& f : LimitFlags()) {
    if (this->*f.member < f.min) {
      return absl::InvalidArgumentError(absl::StrCat(f.field, ": must be at least ", f.min, ", got ", this->*f.member));
    }
  }
  return absl::OkStatus();
}

absl::Status SetLimitFromFlag(ServiceLimits& limits, absl::string_view flag, absl::string_view value) {
  for (const LimitFlag& f : LimitFlags()) {
    if (f.flag != flag) continue;
    int parsed = 0;
    if (f.seconds) {
      absl::StatusOr<absl::Duration> duration = ParseDurationText(flag, value);
      if (!duration.ok()) return duration.status();
      const int64_t whole = absl::ToInt64Seconds(*duration);
      if (whole < f.min || whole > std::numeric_limits<int>::max() || *duration != absl::Seconds(whole)) {
        return absl::InvalidArgumentError(absl::StrCat(flag, ": must be a whole number of seconds, at least ", f.min,
                                                       "s (", f.help, "), got '", value, "'"));
      }
      limits.*f.member = static_cast<int>(whole);
      return absl::OkStatus();
    }
    if (!absl::SimpleAtoi(value, &parsed) || parsed < f.min) {
      return absl::InvalidArgumentError(
          absl::StrCat(flag, ": must be a whole number >= ", f.min, " (", f.help, "), got '", value, "'"));
    }
    limits.*f.member = parsed;
    return absl::OkStatus();
  }
  return absl::NotFoundError(absl::StrCat("no limit has the flag ", flag));
}

std::string LimitFlagsHelp() {
  const ServiceLimits defaults;
  std::string out;
  for (const LimitFlag& f : LimitFlags()) {
    std::string left = absl::StrCat("  ", f.flag, f.seconds ? " DURATION" : " N");
    if (left.size() < 30) left.resize(30, ' ');
    absl::StrAppend(&out, left, f.help, " (default ", defaults.*f.member, f.seconds ? "s" : "", ")\n");
  }
  return out;
}

}  // namespace ogive::service
