// Command-line parsing for `ogive`: options declared by a table, values by name, and the part after
// `--` kept apart for `ogive work`. Pure: no I/O, no process state, so every rule is unit-tested.
//
// Accepted forms: `--name VALUE`, `--name=VALUE`, `-n VALUE` (declared short names), switches
// without a value (`--json`), positional arguments anywhere, and `--`, after which nothing is an
// option. An option that takes a value always consumes the next argument, so `--score -3.5` works.
#ifndef OGIVE_CLIENT_CLI_ARGS_H_
#define OGIVE_CLIENT_CLI_ARGS_H_

#include <cstdint>
#include <map>
#include <optional>
#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "absl/strings/string_view.h"
#include "absl/types/span.h"

namespace ogive::cli {

// One option a command accepts.
struct OptionSpec {
  absl::string_view name;        // the long form, with its dashes: "--lease"
  absl::string_view short_name;  // an optional short form: "-n"; empty if none
  absl::string_view value_name;  // "SECONDS" for an option that takes a value; empty for a switch
  absl::string_view help;        // one line for --help
};

// What ParseArgs found.
struct ParsedArgs {
  std::vector<std::string> positional;
  std::map<std::string, std::string, std::less<>> options;  // by long name; switches map to ""
  bool has_separator = false;                               // `--` was given
  std::vector<std::string> after_separator;                 // the arguments after `--`

  bool Has(absl::string_view name) const { return options.find(name) != options.end(); }
  // The value of option `name`, if given.
  std::optional<std::string> Get(absl::string_view name) const;
};

// Parses `args` (without the program name) against `specs`. INVALID_ARGUMENT, naming the option,
// for an unknown option, a missing value, a value given to a switch, or an option given twice.
absl::StatusOr<ParsedArgs> ParseArgs(absl::Span<const std::string> args,
                                     absl::Span<const OptionSpec> specs);

// The spec of `arg` ("--name", "--name=value" or a short name) among `specs`, or nullptr.
const OptionSpec* FindOption(absl::string_view arg, absl::Span<const OptionSpec> specs);

// Value parsers. Each returns INVALID_ARGUMENT naming `what` (an option or argument), the value
// given and the values allowed.
//
// A finite number written as a whole (strtod syntax, surrounding blanks allowed): "3.25", "-1e-3".
absl::StatusOr<double> ParseFiniteNumber(absl::string_view what, absl::string_view text);
// A positive duration (ParseDurationText: "90s", "15m", "2h", "2d", or a bare number of seconds), in
// seconds.
absl::StatusOr<double> ParsePositiveSeconds(absl::string_view what, absl::string_view text);
// A whole number in [low, high].
absl::StatusOr<int64_t> ParseInteger(absl::string_view what, absl::string_view text, int64_t low,
                                     int64_t high);

}  // namespace ogive::cli

#endif  // OGIVE_CLIENT_CLI_ARGS_H_
