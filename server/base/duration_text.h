// Durations as people write them on a command line: "90s", "15m", "2h", "2d", "1h30m", "250ms", or a
// bare number of seconds ("90", "0.5"). Every flag of ogive and ogived that takes a duration reads it
// here, so all accept the same forms and refuse the rest with the same message. Abseil only; the
// client links it too.
#ifndef OGIVE_SERVER_BASE_DURATION_TEXT_H_
#define OGIVE_SERVER_BASE_DURATION_TEXT_H_

#include "absl/status/statusor.h"
#include "absl/strings/string_view.h"
#include "absl/time/time.h"

namespace ogive {

// The longest duration accepted: ten years, far beyond any lease, deadline or interval, and far
// below what a clock's arithmetic can overflow on.
inline constexpr absl::Duration kMaxDurationText = absl::Hours(24 * 3650);

// The positive duration `text` names, at most kMaxDurationText. INVALID_ARGUMENT naming `what` (a
// flag, e.g. "--lease"), the text given and the forms allowed, for anything else (empty, zero,
// negative, too long, an unknown unit, an infinite or NaN number, "1d90").
absl::StatusOr<absl::Duration> ParseDurationText(absl::string_view what, absl::string_view text);

}  // namespace ogive

#endif  // OGIVE_SERVER_BASE_DURATION_TEXT_H_
