#include "server/campaign/campaign_options.h"

#include "absl/strings/str_cat.h"

namespace ogive::campaign {

absl::Status CampaignOptions::Validate() const {
  if (staleness_limit < 0) {
    return absl::InvalidArgumentError(absl::StrCat("staleness_limit: must be >= 0, got ", staleness_limit));
  }
  if (trial_budget < 0) {
    return absl::InvalidArgumentError(absl::StrCat("trial_budget: must be >= 0 (0 = none), got ", trial_budget));
  }
  if (default_lease <= absl::ZeroDuration()) {
    return absl::InvalidArgumentError(
        absl::StrCat("lease_seconds: must be positive, got ", absl::ToDoubleSeconds(default_lease)));
  }
  if (max_population_size < 2) {
    return absl::InvalidArgumentError(
        absl::StrCat("max_population_size: must be at least 2, got ", max_population_size));
  }
  if (target.has_value() && !target->informative()) {
    return absl::InvalidArgumentError("target: must be a score or a grade");
  }
  if (noise.mode == NoiseMode::kReplicates &&
      (noise.replicates < 2 || noise.replicates > NoiseOptions::kMaxMeasurements)) {
    return absl::InvalidArgumentError(absl::StrCat("noise: replicates must be in 2..",
                                                   NoiseOptions::kMaxMeasurements, ", got ", noise.replicates));
  }
  return absl::OkStatus();
}

std::optional<bool> ParseModel(const std::string& value, int real_and_integer_parameters, bool graded) {
  if (value.empty() || value == "auto") return !graded && real_and_integer_parameters <= kAutoModelDimension;
  if (value == "on") return true;
  if (value == "off") return false;
  return std::nullopt;
}

}  // namespace ogive::campaign
