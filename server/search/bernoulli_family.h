// BernoulliFamily: independent on/off probabilities for the flag block, adapted by Bernoulli IGO.
//
// Natural-gradient step in expectation parameters (Ollivier, Arnold, Auger, Hansen, JMLR 18, 2017,
// the Bernoulli example of the IGO paper):
//   p ← p + δt Σ_i ŵ_i (x_i − p)
// with ŵ the tie-averaged quantile weights; with truncation weights this is PBIL with learning rate δt.
// After each step p is kept in [margin, 1 − margin] so no value's probability reaches 0 or 1.
//
// A value type; not thread-safe.
#ifndef OGIVE_SERVER_SEARCH_BERNOULLI_FAMILY_H_
#define OGIVE_SERVER_SEARCH_BERNOULLI_FAMILY_H_

#include <vector>

#include "Eigen/Core"
#include "absl/status/statusor.h"
#include "absl/types/span.h"
#include "server/search/random_stream.h"

namespace ogive::search {

struct BernoulliState {
  Eigen::VectorXd probabilities;  // P(x_j = 1)
  double learning_rate = 0.0;     // δt
  double margin = 0.0;            // probabilities stay within [margin, 1 − margin]
};

class BernoulliFamily {
 public:
  // INVALID_ARGUMENT unless 0 < learning_rate <= 1, 0 <= margin < 1/2 and every start probability lies
  // in [margin, 1 − margin].
  static absl::StatusOr<BernoulliFamily> Create(const Eigen::VectorXd& start, double learning_rate, double margin);
  static absl::StatusOr<BernoulliFamily> FromState(BernoulliState state);

  int dimension() const { return static_cast<int>(state_.probabilities.size()); }
  const BernoulliState& state() const { return state_; }

  // A vector of 0/1 values, bit j on with probability p_j.
  Eigen::VectorXd Sample(RandomStream& random) const;

  // One IGO step: x_i the members' bits (0 or 1), weights[i] their ŵ_i. INVALID_ARGUMENT on a size
  // mismatch or a coordinate that is not 0 or 1.
  absl::Status Update(absl::Span<const Eigen::VectorXd> x, absl::Span<const double> weights);

 private:
  explicit BernoulliFamily(BernoulliState state) : state_(std::move(state)) {}
  BernoulliState state_;
};

}  // namespace ogive::search

#endif  // OGIVE_SERVER_SEARCH_BERNOULLI_FAMILY_H_
