// Rank change under re-measurement: the noise measure of uncertainty handling (Hansen, Niederberger,
// Guzzella, Koumoutsakos, "A Method for Handling Uncertainty in Evolutionary Optimization With an
// Application to Feedback Control of Combustion", IEEE TEC 13(1), 2009; "UH" below). A few members of
// a cohort are measured a second time; all first measurements and the repeats are ranked together,
// and the rank changes of the repeated members are compared with those a random reordering would
// produce. The measure is positive when the noise reorders the cohort more than the threshold θ allows.
// Pure: outcomes in, a number out; only the order of outcomes is used.
#ifndef OGIVE_SERVER_SEARCH_RANK_CHANGE_H_
#define OGIVE_SERVER_SEARCH_RANK_CHANGE_H_

#include <vector>

#include "absl/types/span.h"
#include "server/search/ranking.h"

namespace ogive::search {

// 1-based ranks of `values` among themselves, best first; tied values share the average of the ranks
// they occupy. REQUIRES: every value passes CheckOutcome, none void.
std::vector<double> JointRanks(absl::Span<const Outcome> values, const OutcomeOrder& order);

// One re-measured cohort member: its index among the first measurements and the repeat's outcome.
struct Remeasurement {
  int member = 0;
  Outcome repeat;
};

// UH's θ (from memory of the paper's defaults: 0.2).
inline constexpr double kRankChangeTheta = 0.2;

// The rank-change measure s of UH, with L_old the first measurements `firsts` (λ of them) and L_new the
// repeats (λ_reev of them), ranked together (N = λ + λ_reev values):
//   Δ_i = rank(L_new,i) − rank(L_old,i) − sign(rank(L_new,i) − rank(L_old,i))
//   s   = (1/λ_reev) Σ_i [ 2|Δ_i| − Δlim_θ(rank(L_new,i) − 1{L_new,i worse than L_old,i})
//                                 − Δlim_θ(rank(L_old,i) − 1{L_old,i worse than L_new,i}) ]
//   Δlim_θ(R) = the θ·50-th percentile of {|1 − R|, |2 − R|, ..., |N − 1 − R|}
// (the formulas as we remember them from the paper, written for ties too: tied values share the
// average rank). REQUIRES: at least one repeat, members within `firsts`.
double RankChangeMeasure(absl::Span<const Outcome> firsts, absl::Span<const Remeasurement> repeats,
                         const OutcomeOrder& order, double theta = kRankChangeTheta);

}  // namespace ogive::search

#endif  // OGIVE_SERVER_SEARCH_RANK_CHANGE_H_
