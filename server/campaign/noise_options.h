// NoiseOptions: how a campaign treats measurement noise (docs/math.md, "Noisy measurements"), parsed
// from the design's `noise` text. Owned by CampaignOptions.
#ifndef OGIVE_SERVER_CAMPAIGN_NOISE_OPTIONS_H_
#define OGIVE_SERVER_CAMPAIGN_NOISE_OPTIONS_H_

#include <optional>
#include <string>

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
};

// Parses "off" (also ""), "auto" or "replicates:K" with K in 2..16; nullopt for anything else.
std::optional<NoiseOptions> ParseNoise(absl::string_view text);
// The rule ParseNoise applies, for a refusal of `text`: "must be off, auto or replicates:K with K in
// 2..16, got '<text>'". Callers prefix the field's path.
std::string NoiseRule(absl::string_view text);

}  // namespace ogive::campaign

#endif  // OGIVE_SERVER_CAMPAIGN_NOISE_OPTIONS_H_
