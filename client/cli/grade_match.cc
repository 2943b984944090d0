#include "client/cli/grade_match.h"

#include <algorithm>
#include <limits>
#include <vector>

#include "absl/strings/ascii.h"
#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_join.h"

namespace ogive::cli {

size_t EditDistance(absl::string_view a, absl::string_view b) {
  // d[j] holds the distance between the first i characters of a and the first j of b.
  std::vector<size_t> d(b.size() + 1);
  for (size_t j = 0; j <= b.size(); ++j) d[j] = j;
  for (size_t i = 1; i <= a.size(); ++i) {
    size_t diagonal = d[0];  // d[i-1][j-1]
    d[0] = i;
    for (size_t j = 1; j <= b.size(); ++j) {
      const size_t above = d[j];  // d[i-1][j]
      const bool same = absl::ascii_tolower(static_cast<unsigned char>(a[i - 1])) ==
                        absl::ascii_tolower(static_cast<unsigned char>(b[j - 1]));
      d[j] = std::min({above + 1, d[j - 1] + 1, diagonal + (same ? 0 : 1)});
      diagonal = above;
    }
  }
  return d[b.size()];
}

absl::StatusOr<std::string> MatchGrade(absl::string_view typed, const v1::GradeScale& scale,
                                       absl::string_view field) {
  const absl::string_view text = absl::StripAsciiWhitespace(typed);
  for (const std::string& label : scale.labels()) {
    if (absl::EqualsIgnoreCase(text, label)) return label;
  }
  const std::string* closest = nullptr;
  size_t best = std::numeric_limits<size_t>::max();
  bool tie = false;
  for (const std::string& label : scale.labels()) {
    const size_t d = EditDistance(text, label);
    if (d < best) {
      best = d;
      closest = &label;
      tie = false;
    } else if (d == best) {
      tie = true;
    }
  }
  std::string message =
      absl::StrCat(field, ": '", text, "' is not a grade of the campaign's scale (worst first: ",
                   absl::StrJoin(scale.labels(), " < "), ")");
  const size_t allowed = std::max<size_t>(1, text.size() / 3);
  if (closest != nullptr && !tie && best <= allowed) {
    absl::StrAppend(&message, "; did you mean '", *closest, "'?");
  }
  return absl::InvalidArgumentError(message);
}

}  // namespace ogive::cli
