// CategoricalFamily: one distribution over the options of each categorical parameter, adapted by
// categorical IGO.
//
// Natural-gradient step in expectation parameters (Ollivier, Arnold, Auger, Hansen, JMLR 18, 2017;
// the inverse Fisher matrix of a categorical distribution in these parameters is diag(θ) − θθᵀ, so the
// natural gradient of ln P(x) is e_x − θ):
//   θ ← θ + δt Σ_i ŵ_i (e_{x_i} − θ)
// After each step every probability is kept at least `margin` by the projection
//   θ_k ← margin + (max(θ_k, margin) − margin) · (1 − K·margin) / Σ_l (max(θ_l, margin) − margin),
// which keeps the sum 1 and moves no probability across the margin.
//
// A value type; not thread-safe.
#ifndef OGIVE_SERVER_SEARCH_CATEGORICAL_FAMILY_H_
#define OGIVE_SERVER_SEARCH_CATEGORICAL_FAMILY_H_

#include <vector>

#include "Eigen/Core"
#include "absl/status/statusor.h"
#include "absl/types/span.h"
#include "server/search/random_stream.h"

namespace ogive::search {

struct CategoricalState {
  std::vector<Eigen::VectorXd> probabilities;  // one distribution per parameter, over its options
  double learning_rate = 0.0;                  // δt
  double margin = 0.0;                         // the least probability of an option
};

class CategoricalFamily {
 public:
  // INVALID_ARGUMENT unless each distribution has K >= 2 options summing to 1 (within 1e-9), each at
  // least margin, 0 < learning_rate <= 1 and 0 <= margin < 1/K.
  static absl::StatusOr<CategoricalFamily> Create(std::vector<Eigen::VectorXd> start, double learning_rate,
                                                  double margin);
  static absl::StatusOr<CategoricalFamily> FromState(CategoricalState state);

  // Uniform start probabilities for parameters with the given option counts.
  static std::vector<Eigen::VectorXd> Uniform(absl::Span<const int> option_counts);

  int dimension() const { return static_cast<int>(state_.probabilities.size()); }
  const CategoricalState& state() const { return state_; }

  // One option index per parameter.
  Eigen::VectorXd Sample(RandomStream& random) const;

  // One IGO step: x_i the members' option indices, weights[i] their ŵ_i. INVALID_ARGUMENT on a size
  // mismatch or an index out of range.
  absl::Status Update(absl::Span<const Eigen::VectorXd> x, absl::Span<const double> weights);

 private:
  explicit CategoricalFamily(CategoricalState state) : state_(std::move(state)) {}
  CategoricalState state_;
};

}  // namespace ogive::search

#endif  // OGIVE_SERVER_SEARCH_CATEGORICAL_FAMILY_H_
