// Matching what a technician typed against a campaign's grade scale: labels match in any case, and a
// typo gets the closest label suggested (Levenshtein edit distance). Pure, unit-tested.
#ifndef OGIVE_CLIENT_CLI_GRADE_MATCH_H_
#define OGIVE_CLIENT_CLI_GRADE_MATCH_H_

#include <cstddef>
#include <string>

#include "absl/status/statusor.h"
#include "absl/strings/string_view.h"
#include "ogive/v1/campaign.pb.h"

namespace ogive::cli {

// The number of single-character insertions, deletions and substitutions that turn `a` into `b`,
// compared without regard to ASCII case (Levenshtein distance, computed with the Wagner-Fischer
// dynamic program).
size_t EditDistance(absl::string_view a, absl::string_view b);

// The scale's label that `typed` names (any case, blanks around ignored), spelled as in the scale.
// INVALID_ARGUMENT naming `field` and listing the labels otherwise, with "did you mean 'X'?" when
// one label is within max(1, length / 3) edits and closer than every other.
absl::StatusOr<std::string> MatchGrade(absl::string_view typed, const v1::GradeScale& scale,
                                       absl::string_view field);

}  // namespace ogive::cli

#endif  // OGIVE_CLIENT_CLI_GRADE_MATCH_H_
