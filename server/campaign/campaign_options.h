// CampaignOptions: the engine settings of one campaign (everything in a design besides the search space and
// the distribution's own options), with defaults and a validator whose messages name the field.
#ifndef OGIVE_SERVER_CAMPAIGN_CAMPAIGN_OPTIONS_H_
#define OGIVE_SERVER_CAMPAIGN_CAMPAIGN_OPTIONS_H_

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "absl/status/status.h"
#include "absl/time/time.h"
#include "server/campaign/noise_options.h"
#include "server/search/ranking.h"

namespace ogive::campaign {

// Outcomes sampled more generations before the update that would consume them are kept but never used.
// Ten generations: with as many workers as four populations, a typical outcome is about four generations
// old when it arrives, and stragglers up to ten still help (our choice; docs/math.md).
inline constexpr int kDefaultStalenessLimit = 10;
inline constexpr absl::Duration kDefaultLease = absl::Hours(1);

// The largest population the engine runs: λ never grows beyond it (concurrency, restarts), and a
// design may not ask for more (the service's validation takes this constant).
inline constexpr int kMaxPopulationSize = 4096;

// The design's `model` values: "auto" (or empty) uses the model for scored campaigns whose real and
// integer block has at most kAutoModelDimension parameters (a refit there costs a few milliseconds;
// beyond, tens), "on" for any campaign whose parameters are all real or integer (the service refuses it
// with flags or options), "off" never. Graded campaigns use it only with "on": on the
// graded rows of ogive-bench-search it moved successes between rows without adding any
// (docs/benchmarks.md). Returns nullopt for any other value.
inline constexpr int kAutoModelDimension = 10;
std::optional<bool> ParseModel(const std::string& value, int real_and_integer_parameters, bool graded);
inline constexpr const char* kModelRule = "must be one of \"auto\" (or empty), \"on\", \"off\"";

struct CampaignOptions {
  uint64_t seed = 0;
  int staleness_limit = kDefaultStalenessLimit;  // generations; >= 0
  int64_t trial_budget = 0;                      // informative outcomes before done; 0 = unlimited
  std::optional<search::Outcome> target;         // done once an outcome at least this good arrives
  absl::Duration default_lease = kDefaultLease;  // for asks that give no lease
  bool restarts = false;                         // IPOP: restart with 2λ when converged
  // The population adapts to the concurrency the engine observes: at each generation boundary λ is
  // raised to the largest number of trials that were out at once since the previous one (never below
  // the design's λ, never above max_population_size).
  bool adapt_population = true;
  int max_population_size = kMaxPopulationSize;
  // For messages only: the grade scale's labels, worst first (empty for scored campaigns), so that a
  // refusal names a grade as the technician wrote it, not by its place on the scale.
  std::vector<std::string> grade_labels;
  NoiseOptions noise;  // measurement noise handling; off by default
  // Use an ordinal model of the outcomes between true updates (surrogate_step.h). Only campaigns
  // whose parameters are all real or integer use it.
  bool surrogate = false;

  // INVALID_ARGUMENT naming the field when a value is out of range.
  absl::Status Validate() const;
};

}  // namespace ogive::campaign

#endif  // OGIVE_SERVER_CAMPAIGN_CAMPAIGN_OPTIONS_H_
