// Text that goes into ogive's HTML and SVG output: escaping of user text (parameter units and
// descriptions, option and grade labels, notes, worker names are all user input) and compact
// numbers for coordinates. Pure functions.
#ifndef OGIVE_CLIENT_PLOT_MARKUP_H_
#define OGIVE_CLIENT_PLOT_MARKUP_H_

#include <string>

#include "absl/strings/string_view.h"

namespace ogive::plot {

// `text` safe inside an element or a quoted attribute of HTML or SVG: & < > " ' become entities;
// control characters other than tab and newline (not allowed in XML) become U+FFFD; bytes that are
// not valid UTF-8 become U+FFFD too.
std::string Escape(absl::string_view text);

// `text` cut to at most `max_chars` characters (UTF-8 aware), with "…" at the end when cut.
std::string Shorten(absl::string_view text, size_t max_chars);

// A pixel coordinate with at most one decimal: "12", "12.5", "-3.2". Non-finite values give "0".
std::string Px(double value);

}  // namespace ogive::plot

#endif  // OGIVE_CLIENT_PLOT_MARKUP_H_
