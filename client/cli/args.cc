#include "client/cli/args.h"

#include <cerrno>
#include <cmath>
#include <cstdlib>

#include "absl/strings/ascii.h"
#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "absl/time/time.h"
#include "server/base/duration_text.h"

namespace ogive::cli {

std::optional<std::string> ParsedArgs::Get(absl::string_view name) const {
  auto it = options.find(name);
  if (it == options.end()) return std::nullopt;
  return it->second;
}

const OptionSpec* FindOption(absl::string_view arg, absl::Span<const OptionSpec> specs) {
  const absl::string_view name = arg.substr(0, arg.find('='));
  for (const OptionSpec& spec : specs) {
    if (name == spec.name) return &spec;
    // Short names take their value as the next argument only; "-n=3" is not a form anyone expects.
    if (!spec.short_name.empty() && arg == spec.short_name) return &spec;
  }
  return nullptr;
}

absl::StatusOr<ParsedArgs> ParseArgs(absl::Span<const std::string> args,
                                     absl::Span<const OptionSpec> specs) {
  ParsedArgs parsed;
  for (size_t i = 0; i < args.size(); ++i) {
    const std::string& arg = args[i];
    if (arg == "--") {
      parsed.has_separator = true;
      parsed.after_separator.assign(args.begin() + i + 1, args.end());
      break;
    }
    // A lone "-" and anything not starting with '-' is positional; so is a negative number, which
    // is never an option name.
    double ignored;
    if (arg.size() < 2 || arg[0] != '-' || absl::SimpleAtod(arg, &ignored)) {
      parsed.positional.push_back(arg);
      continue;
    }
    const OptionSpec* spec = FindOption(arg, specs);
    if (spec == nullptr) {
      return absl::InvalidArgumentError(
          absl::StrCat("unknown option '", arg.substr(0, arg.find('=')), "'"));
    }
    const std::string name(spec->name);
    if (parsed.Has(name)) {
      return absl::InvalidArgumentError(absl::StrCat("option ", name, " is given more than once"));
    }
    const size_t eq = arg.find('=');
    const bool inline_value = arg.rfind("--", 0) == 0 && eq != std::string::npos;
    if (spec->value_name.empty()) {
      if (inline_value) {
        return absl::InvalidArgumentError(
            absl::StrCat("option ", name, " takes no value, got '", arg, "'"));
      }
      parsed.options[name] = "";
    } else if (inline_value) {
      parsed.options[name] = arg.substr(eq + 1);
    } else if (i + 1 < args.size() && args[i + 1] != "--") {
      parsed.options[name] = args[++i];
    } else {
      return absl::InvalidArgumentError(
          absl::StrCat("option ", name, " needs a value (", name, " ", spec->value_name, ")"));
    }
  }
  return parsed;
}

absl::StatusOr<double> ParseFiniteNumber(absl::string_view what, absl::string_view text) {
  const std::string trimmed(absl::StripAsciiWhitespace(text));
  if (!trimmed.empty()) {
    errno = 0;
    char* end = nullptr;
    const double value = std::strtod(trimmed.c_str(), &end);
    if (end == trimmed.c_str() + trimmed.size() && std::isfinite(value)) return value;
  }
  return absl::InvalidArgumentError(
      absl::StrCat(what, ": must be a finite number such as 3.25 or -1.5e-3, got '", text, "'"));
}

absl::StatusOr<double> ParsePositiveSeconds(absl::string_view what, absl::string_view text) {
  absl::StatusOr<absl::Duration> duration = ParseDurationText(what, text);
  if (!duration.ok()) return duration.status();
  return absl::ToDoubleSeconds(*duration);
}

absl::StatusOr<int64_t> ParseInteger(absl::string_view what, absl::string_view text, int64_t low,
                                     int64_t high) {
  int64_t value = 0;
  if (!absl::SimpleAtoi(text, &value) || value < low || value > high) {
    return absl::InvalidArgumentError(
        absl::StrCat(what, ": must be a whole number in ", low, "..", high, ", got '", text, "'"));
  }
  return value;
}

}  // namespace ogive::cli
