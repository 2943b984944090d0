#include "server/campaign/noise_options.h"

#include "absl/strings/ascii.h"
#include "absl/strings/match.h"
#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"

namespace ogive::campaign {

std::optional<NoiseOptions> ParseNoise(absl::string_view text) {
  const absl::string_view trimmed = absl::StripAsciiWhitespace(text);
  NoiseOptions options;
  if (trimmed.empty() || trimmed == "off") return options;
  if (trimmed == "auto") {
    options.mode = NoiseMode::kAuto;
    return options;
  }
  constexpr absl::string_view kPrefix = "replicates:";
  int k = 0;
  if (absl::StartsWith(trimmed, kPrefix) && absl::SimpleAtoi(trimmed.substr(kPrefix.size()), &k) && k >= 2 &&
      k <= NoiseOptions::kMaxMeasurements) {
    options.mode = NoiseMode::kReplicates;
    options.replicates = k;
    return options;
  }
  return std::nullopt;
}

std::string NoiseRule(absl::string_view text) {
  return absl::StrCat("must be off, auto or replicates:K with K in 2..", NoiseOptions::kMaxMeasurements, ", got '",
                      text, "'");
}

}  // namespace ogive::campaign
