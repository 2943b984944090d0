// Trial: one candidate handed to a worker under a lease, and what came back for it. Trials are
// numbered 1, 2, 3, ... within a campaign. The campaign engine owns its trials; the service and storage see
// copies.
#ifndef OGIVE_SERVER_CAMPAIGN_TRIAL_H_
#define OGIVE_SERVER_CAMPAIGN_TRIAL_H_

#include <cstdint>
#include <optional>
#include <string>

#include "Eigen/Core"
#include "absl/status/status.h"
#include "absl/time/time.h"
#include "server/search/ranking.h"

namespace ogive::campaign {

enum class TrialState { kLeased, kReported, kLapsed, kVoided };
const char* TrialStateName(TrialState state);  // "leased", "reported", "lapsed", "voided"

// What a consumed or unconsumed informative outcome is to the search.
enum class Use {
  kNone,      // no informative outcome yet (leased, lapsed, voided)
  kPending,   // waiting for a cohort
  kConsumed,  // entered the update of generation `consumed_by`
  kTooStale,  // older than the staleness limit (or from before a restart): kept, never used
  kAwaitingReplicates,  // noise handling: waits for repeated measurements of its candidate
};
const char* UseName(Use use);

struct Trial {
  int64_t number = 0;
  int64_t generation = 0;       // updates done when it was sampled
  int64_t epoch = 0;            // restarts done when it was sampled
  Eigen::VectorXd x;            // internal sample, inside the bounds
  bool repaired = false;        // the Gaussian sample was folded into the bounds
  TrialState state = TrialState::kLeased;
  std::string worker;           // who holds (or last held) the lease
  absl::Time leased_at;
  absl::Time lease_deadline;
  std::optional<search::Outcome> outcome;  // once reported (void included)
  std::string note;
  std::string reported_by;      // the label of the token that reported it ("" without tokens)
  absl::Time reported_at;
  int64_t report_sequence = 0;  // order of arrival of reports within the campaign (1, 2, ...)
  bool late = false;            // reported after its lease lapsed
  Use use = Use::kNone;
  int64_t consumed_by = -1;     // generation whose update consumed it, or -1
  // Noise handling (docs/math.md, "Noisy measurements"). A replicate measures the candidate of trial
  // `replicate_of` again (same x, generation and epoch); its outcome joins that trial's in the ranking.
  // An original waits (Use::kAwaitingReplicates) until 1 + replicates_wanted measurements are in.
  int64_t replicate_of = 0;     // 0: an original
  int replicates_wanted = 0;    // originals only
  // The surrogate (docs/math.md, "A surrogate of the ranking"): the candidate is the model's pick
  // among this many draws from the distribution (0: drawn plainly). A picked candidate is not a plain
  // sample of the distribution, so its update treats it as an injected one.
  int screened_from = 0;
};

// One report from a worker.
struct Report {
  int64_t trial = 0;
  search::Outcome outcome;
  std::string note;
  std::string reported_by = "";  // the label of the token that sent it, for the audit (none: "")
};

// What became of one report.
struct ReportResult {
  int64_t trial = 0;
  absl::Status status;     // OK; NOT_FOUND (unknown trial); ALREADY_EXISTS (a different outcome was
                           // already reported); INVALID_ARGUMENT (outcome does not fit the objective)
  bool duplicate = false;  // the same outcome had been stored before: accepted, nothing changed
  bool late = false;       // the trial had lapsed before this report
};

}  // namespace ogive::campaign

#endif  // OGIVE_SERVER_CAMPAIGN_TRIAL_H_
