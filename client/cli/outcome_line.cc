#include "client/cli/outcome_line.h"

#include <cerrno>
#include <cmath>
#include <cstdio>
#include <cstdlib>

#include "absl/strings/ascii.h"
#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_join.h"

namespace ogive::cli {
namespace {

v1::Outcome Void(std::string note) {
  v1::Outcome outcome;
  outcome.mutable_void_();
  outcome.set_note(std::move(note));
  return outcome;
}

bool IsBlank(absl::string_view s) { return absl::StripAsciiWhitespace(s).empty(); }

}  // namespace

v1::Outcome ParseOutcomeLine(absl::string_view line, const v1::Objective& objective) {
  const absl::string_view text = absl::StripAsciiWhitespace(line);
  if (text.empty()) return Void("the program printed nothing to standard output");

  v1::Outcome outcome;
  if (objective.has_grade_scale()) {
    for (const std::string& label : objective.grade_scale().labels()) {
      if (absl::EqualsIgnoreCase(text, label)) {
        outcome.set_grade(label);
        return outcome;
      }
    }
  }
  if (absl::EqualsIgnoreCase(text, "infeasible")) {
    outcome.mutable_infeasible();
    return outcome;
  }

  const std::string copy(text);
  char* end = nullptr;
  errno = 0;
  const double value = std::strtod(copy.c_str(), &end);
  const bool is_number = end == copy.c_str() + copy.size();
  if (is_number && !std::isfinite(value)) {
    return Void(
        absl::StrCat("the last line of output is not a finite number: ", QuoteForNote(text)));
  }
  if (objective.has_grade_scale()) {
    return Void(absl::StrCat("the last line of output is not a grade of the campaign's scale (",
                             absl::StrJoin(objective.grade_scale().labels(), ", "),
                             ") nor 'infeasible': ", QuoteForNote(text)));
  }
  if (is_number) {
    outcome.set_score(value);
    return outcome;
  }
  return Void(absl::StrCat("the last line of output is not a number nor 'infeasible': ",
                           QuoteForNote(text)));
}

void LastLine::Feed(absl::string_view chunk) {
  while (!chunk.empty()) {
    const size_t newline = chunk.find('\n');
    const absl::string_view piece = chunk.substr(0, newline);
    if (current_.size() < kMaxLineBytes) {
      absl::StrAppend(&current_, piece.substr(0, kMaxLineBytes - current_.size()));
    }
    if (newline == absl::string_view::npos) return;
    if (!IsBlank(current_)) last_.swap(current_);
    current_.clear();
    chunk.remove_prefix(newline + 1);
  }
}

std::string LastLine::Get() const { return IsBlank(current_) ? last_ : current_; }

std::string QuoteForNote(absl::string_view text, size_t max_bytes) {
  std::string out = "\"";
  for (size_t i = 0; i < text.size(); ++i) {
    if (i == max_bytes) {
      out += "...";
      break;
    }
    const unsigned char c = static_cast<unsigned char>(text[i]);
    if (c == '"' || c == '\\') {
      out += '\\';
      out += static_cast<char>(c);
    } else if (c < 0x20 || c == 0x7f) {
      char buffer[8];
      std::snprintf(buffer, sizeof buffer, "\\x%02x", c);
      out += buffer;
    } else {
      out += static_cast<char>(c);
    }
  }
  out += '"';
  return out;
}

}  // namespace ogive::cli
