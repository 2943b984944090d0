// Ranking: turns the outcomes of a cohort into ranks with ties, and ranks into weights.
//
// Only the order of outcomes is used (Ollivier, Arnold, Auger, Hansen, "Information-Geometric
// Optimization Algorithms: A Unifying Picture via Invariance Principles", JMLR 18, 2017; the IGO
// paper). Scores compare by the campaign's direction, grades by their place in the scale; an infeasible
// outcome ranks below every score or grade, and infeasible outcomes tie with each other. Void outcomes
// carry no information and never enter a ranking.
//
// Ties: a member with k⁻ members strictly better and k⁺ members better or equal (itself included)
// occupies ranks k⁻ .. k⁺-1 (0-based) and receives the average of the weights of those ranks (IGO
// paper, the tie rule for the quantile weights). The same rule is applied to the CMA-ES recombination
// weights.
#ifndef OGIVE_SERVER_SEARCH_RANKING_H_
#define OGIVE_SERVER_SEARCH_RANKING_H_

#include <vector>

#include "absl/status/statusor.h"
#include "absl/types/span.h"

namespace ogive::search {

enum class Direction { kLowerIsBetter, kHigherIsBetter };

// How a campaign orders outcomes: by a direction for scores, or by a scale of `grade_count` grades where
// grade 0 is the worst.
struct OutcomeOrder {
  bool graded = false;
  Direction direction = Direction::kLowerIsBetter;  // used when !graded
  int grade_count = 0;                              // used when graded
};

// One outcome as the search sees it.
struct Outcome {
  enum class Kind { kScore, kGrade, kInfeasible, kVoid };
  Kind kind = Kind::kVoid;
  double score = 0.0;  // kScore; finite
  int grade = 0;       // kGrade; 0 (worst) .. grade_count - 1 (best)

  static Outcome Score(double value) { return {Kind::kScore, value, 0}; }
  static Outcome Grade(int index) { return {Kind::kGrade, 0.0, index}; }
  static Outcome Infeasible() { return {Kind::kInfeasible, 0.0, 0}; }
  static Outcome Void() { return {Kind::kVoid, 0.0, 0}; }
  bool informative() const { return kind != Kind::kVoid; }
};

// The ranks a cohort member occupies: better = k⁻ (members strictly better), better_or_equal = k⁺
// (members better or equal, itself included). A member without ties has better_or_equal = better + 1.
struct TieSpan {
  int better = 0;
  int better_or_equal = 1;
};

// Checks that an outcome fits the order: a score for a direction (finite), a grade within the scale
// for a graded campaign, or infeasible. INVALID_ARGUMENT otherwise.
absl::Status CheckOutcome(const Outcome& outcome, const OutcomeOrder& order);

// -1 if a is better than b, +1 if worse, 0 if they tie. REQUIRES: both pass CheckOutcome, none void.
int CompareOutcomes(const Outcome& a, const Outcome& b, const OutcomeOrder& order);

// The tie spans of a cohort, one per member in the given order. INVALID_ARGUMENT if a member is void
// or does not fit the order.
absl::StatusOr<std::vector<TieSpan>> RankCohort(absl::Span<const Outcome> cohort, const OutcomeOrder& order);

// The weight of each member: the average of rank_weights[k⁻ .. k⁺-1] over its span.
// REQUIRES: every span lies within rank_weights.
std::vector<double> TieAveragedWeights(absl::Span<const TieSpan> spans, absl::Span<const double> rank_weights);

// IGO quantile weights for N ranks with truncation selection w(q) = 2·1{q <= 1/2}:
// ŵ_k = (1/N) w((k + 1/2)/N), k = 0..N-1 (IGO paper, the quantile-weight definition). With truncation
// weights the Bernoulli IGO update is PBIL.
std::vector<double> TruncationQuantileWeights(int n);

// IGO quantile weights for N ranks with the logarithmic selection function w(q) = max(0, −2 ln(2q)),
// which integrates to 1 over [0, 1] and gives weight to the better half only:
// ŵ_k = (1/N) w((k + 1/2)/N). Its shape is that of CMA-ES's recombination weights
// ln((λ+1)/2) − ln i (Hansen's tutorial, arXiv:1604.00772), which put more weight on the best ranks than
// truncation does. The discrete families use these by default.
std::vector<double> LogQuantileWeights(int n);

}  // namespace ogive::search

#endif  // OGIVE_SERVER_SEARCH_RANKING_H_
