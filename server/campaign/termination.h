// Termination: the tests that decide a campaign's search distribution has converged, after the
// termination criteria of N. Hansen, "The CMA Evolution Strategy: A Tutorial", arXiv:1604.00772,
// Appendix B (from memory), extended to the discrete blocks:
//   ConditionCov   condition number of C above 1e14
//   NoEffectAxis   adding 0.1 σ along principal axis (g mod n) leaves the mean unchanged
//   NoEffectCoord  adding 0.2 σ √C_jj to any coordinate leaves it unchanged
//   TolX           every real coordinate's σ √C_jj below 1e-12 σ0, and integers' below a thousandth of
//                  their cell (the margin keeps sampling wider, but the distribution has settled)
//   EqualValues    every cohort ranking flat for 10 + ⌈30 n / λ⌉ generations
//   collapsed      every flag probability at its margin, every categorical at one option
// The Gaussian tests count only when the discrete blocks have collapsed too (or are absent), so a
// settled continuous block does not stop a search that is still choosing options; EqualValues stops
// on its own. The tutorial's TolUpSigma has no place here: the campaign holds σ √(max eigenvalue)
// at the width of the box after every update (Campaign::kMaxStepSpread), so it cannot run away.
#ifndef OGIVE_SERVER_CAMPAIGN_TERMINATION_H_
#define OGIVE_SERVER_CAMPAIGN_TERMINATION_H_

#include <optional>
#include <string>

#include "server/search/search_distribution.h"

namespace ogive::campaign {

// Why the distribution counts as converged, or nullopt. `flat_generations` is the number of
// consecutive updates whose cohort had all outcomes tied; sigma0 the initial step size.
std::optional<std::string> ConvergenceReason(const search::SearchDistribution& distribution,
                                             int64_t flat_generations, double sigma0);

}  // namespace ogive::campaign

#endif  // OGIVE_SERVER_CAMPAIGN_TERMINATION_H_
