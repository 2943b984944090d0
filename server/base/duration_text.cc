#include "server/base/duration_text.h"

#include <cmath>
#include <string>

#include "absl/strings/ascii.h"
#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"

namespace ogive {

absl::StatusOr<absl::Duration> ParseDurationText(absl::string_view what, absl::string_view text) {
  const absl::string_view trimmed = absl::StripAsciiWhitespace(text);
  const absl::Status refused = absl::InvalidArgumentError(
      absl::StrCat(what, ": must be a positive duration of at most ", absl::ToInt64Hours(kMaxDurationText) / 24,
                   "d, such as 90s, 15m, 2h, 2d or 1h30m (a bare number is seconds), got '", text, "'"));
  absl::Duration total = absl::ZeroDuration();
  absl::string_view rest = trimmed;
  // Days first: absl::ParseDuration knows units up to hours only. "2d" or "1d12h".
  const size_t d = rest.find('d');
  const bool has_days = d != absl::string_view::npos;
  if (has_days) {
    double days = 0;
    if (!absl::SimpleAtod(rest.substr(0, d), &days) || !std::isfinite(days) || days < 0 || days > 1e6) {
      return refused;
    }
    total = absl::Hours(24 * days);
    rest = rest.substr(d + 1);
    if (!rest.empty() && (rest[0] == '-' || rest[0] == '+')) return refused;  // "1d-3h"
  }
  if (!rest.empty()) {
    double seconds = 0;
    absl::Duration part;
    if (!has_days && absl::SimpleAtod(rest, &seconds)) {  // a bare number: seconds ("1d90" is no form)
      if (!std::isfinite(seconds) || std::fabs(seconds) > 1e12) return refused;
      part = absl::Seconds(seconds);
    } else if (!absl::ParseDuration(std::string(rest), &part) || part == absl::InfiniteDuration() ||
               part == -absl::InfiniteDuration()) {
      return refused;
    }
    total += part;
  } else if (!has_days) {
    return refused;  // empty
  }
  if (total <= absl::ZeroDuration() || total > kMaxDurationText) return refused;
  return total;
}

}  // namespace ogive
