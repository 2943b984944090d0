#include "server/service/limits.h"

#include "absl/strings/str_cat.h"

namespace ogive::service {

absl::Status ServiceLimits::Validate() const {
  struct Field {
    const char* name;
    double value;
  };
  for (const Field& f : {Field{"max_message_bytes", static_cast<double>(max_message_bytes)},
                         Field{"max_ask_count", static_cast<double>(max_ask_count)},
                         Field{"max_reports_per_tell", static_cast<double>(max_reports_per_tell)},
                         Field{"max_parameters", static_cast<double>(max_parameters)},
                         Field{"max_options", static_cast<double>(max_options)},
                         Field{"max_name_bytes", static_cast<double>(max_name_bytes)},
                         Field{"max_note_bytes", static_cast<double>(max_note_bytes)},
                         Field{"max_studies", static_cast<double>(max_studies)},
                         Field{"max_page_size", static_cast<double>(max_page_size)},
                         Field{"max_lease_seconds", max_lease_seconds}}) {
    if (!(f.value >= 1)) return absl::InvalidArgumentError(absl::StrCat(f.name, ": must be at least 1, got ", f.value));
  }
  return absl::OkStatus();
}

}  // namespace ogive::service
