// NoiseOptions: how a campaign treats measurement noise (docs/math.md, "Noisy measurements"), parsed
// from the design's `noise` text. Owned by CampaignOptions.
#ifndef OGIVE_SERVER_CAMPAIGN_NOISE_OPTIONS_H_
#define OGIVE_SERVER_CAMPAIGN_NOISE_OPTIONS_H_

#include <optional>
#include <string>

#include "absl/status/statusor.h"
#include "absl/strings/string_view.h"

namespace ogive::campaign {

enum class NoiseMode {
  kOff,         // every candidate is measured once
  kAuto,        // uncertainty handling: a few repeats measure the noise; σ and repeats grow with it
  kReplicates,  // every candidate is measured `replicates` times and ranked by its median
};

struct NoiseOptions {
  // The most measurements one candidate gets, in either mode.
  static constexpr int kMaxMeasurements = 16;

  NoiseMode mode = NoiseMode::kOff;
  int replicates = 1;                   // measurements per candidate with kReplicates (2..16)
  std::optional<bool> confirm_target;   // unset: on exactly when noise handling is on

  bool on() const { return mode != NoiseMode::kOff; }
  bool confirms_target() const { return confirm_target.value_or(on()); }
  // "off", "auto", "replicates:3".
  std::string ToText() const;
};

// Parses "off" (also ""), "auto" or "replicates:K" with K in 2..16. INVALID_ARGUMENT naming `field`
// and the allowed values otherwise.
absl::StatusOr<NoiseOptions> ParseNoise(absl::string_view text, absl::string_view field = "noise");

}  // namespace ogive::campaign

#endif  // OGIVE_SERVER_CAMPAIGN_NOISE_OPTIONS_H_
