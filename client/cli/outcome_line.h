// Reading an outcome from what an evaluation program printed: `ogive work` takes the last non-empty
// line of the program's standard output and turns it into a score, a grade, `infeasible`, or a void
// with a note that says why nothing could be read. Pure, so every rule is unit-tested.
#ifndef OGIVE_CLIENT_CLI_OUTCOME_LINE_H_
#define OGIVE_CLIENT_CLI_OUTCOME_LINE_H_

#include <cstddef>
#include <string>

#include "absl/strings/string_view.h"
#include "ogive/v1/campaign.pb.h"

namespace ogive::cli {

// The outcome that `line` (the last non-empty line of output, without its newline) stands for on a
// campaign with `objective`:
//   - the word `infeasible` (any case)                  -> infeasible
//   - on a graded campaign, one of the scale's labels (any case) -> that grade, spelled as in the
//   scale
//   - on a scored campaign, a finite number (strtod syntax, the whole line) -> that score
//   - anything else, including an empty line, NaN or an infinity -> void, with a note quoting the
//   line
// Blanks around the line are ignored.
v1::Outcome ParseOutcomeLine(absl::string_view line, const v1::Objective& objective);

// Keeps the last non-empty line of a stream fed in arbitrary chunks, in bounded memory: lines
// longer than kMaxLineBytes are cut there (such a line is never a valid outcome, but the note
// quotes its start).
class LastLine {
 public:
  static constexpr size_t kMaxLineBytes = 4096;

  void Feed(absl::string_view chunk);
  // The last non-empty line so far, counting an unterminated final line.
  std::string Get() const;

 private:
  std::string last_;     // the last complete non-empty line
  std::string current_;  // the line being read
};

// `text` quoted for a note: in double quotes, control characters escaped, cut to `max_bytes`.
std::string QuoteForNote(absl::string_view text, size_t max_bytes = 200);

}  // namespace ogive::cli

#endif  // OGIVE_CLIENT_CLI_OUTCOME_LINE_H_
