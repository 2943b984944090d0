// SearchDistribution: the product distribution of a whole search space (product IGO). One ranking of a
// cohort drives every block: a GaussianFamily over the real and integer parameters (CMA-ES, full or
// diagonal), a BernoulliFamily over the flags and a CategoricalFamily over the categorical parameters.
//
// The Gaussian block weighs the cohort with CMA-ES's recombination weights, the discrete blocks with
// the logarithmic IGO quantile weights (ranking.h), both tie-averaged over the same tie spans.
//
// Samples are full internal vectors in the space's parameter order (see space.h). Draw() returns them
// repaired into the bounds; Update() takes the cohort as it was evaluated.
//
// Update() is all-or-nothing: on any error no block has changed. A value type; not thread-safe.
#ifndef OGIVE_SERVER_SEARCH_SEARCH_DISTRIBUTION_H_
#define OGIVE_SERVER_SEARCH_SEARCH_DISTRIBUTION_H_

#include <optional>
#include <vector>

#include "Eigen/Core"
#include "absl/status/statusor.h"
#include "absl/types/span.h"
#include "server/search/bernoulli_family.h"
#include "server/search/categorical_family.h"
#include "server/search/gaussian_family.h"
#include "server/search/random_stream.h"
#include "server/search/ranking.h"
#include "server/search/space.h"

namespace ogive::search {

enum class GaussianModel { kAuto, kFull, kDiagonal };

// Above this many real and integer parameters kAuto picks the diagonal model: the full model's
// eigendecomposition costs O(n³) every few generations and its covariance needs O(n²) samples to learn,
// while the diagonal model stays O(n) per sample (Ros and Hansen, PPSN 2008, recommend it for large n).
inline constexpr int kDiagonalThreshold = 200;

// Default initial step size as a fraction of each range: common practice puts σ0 at a quarter to a third
// of the search interval so the first samples cover it.
inline constexpr double kDefaultInitialSpread = 0.3;

struct DistributionOptions {
  int population_size = 0;     // λ; 0 = 4 + ⌊3 ln n⌋ with n the number of parameters
  int expected_workers = 1;    // λ is raised to at least this
  double initial_spread = 0;   // σ0 as a fraction of each range; 0 = kDefaultInitialSpread
  GaussianModel gaussian_model = GaussianModel::kAuto;
  // Start point: empty, or one internal coordinate per parameter where nullopt takes the default. Real
  // and integer coordinates set the initial mean (default: the middle of the range). A flag or option
  // given here starts with half of the probability mass on it and half spread uniformly (P = 3/4 for a
  // flag); by default all values are equally likely.
  std::vector<std::optional<double>> start;
  double discrete_learning_rate = 0;     // δt of the Bernoulli and categorical blocks; 0 = default
};

// The full state: one entry per block present in the space.
struct DistributionState {
  int population_size = 0;
  std::optional<GaussianState> gaussian;
  std::optional<BernoulliState> bernoulli;
  std::optional<CategoricalState> categorical;
};

// One cohort member as evaluated.
struct CohortMember {
  Eigen::VectorXd x;      // full internal vector, inside the bounds
  bool external = false;  // not drawn from the current distribution (older generation or repaired)
};

// A fresh sample.
struct Draw {
  Eigen::VectorXd x;      // repaired into the bounds
  bool repaired = false;  // the Gaussian sample left the box and was folded back
};

// Status numbers of every block, in internal coordinates.
struct DistributionSummary {
  std::optional<GaussianSummary> gaussian;
  Eigen::VectorXd flag_probabilities;                 // P(on) per flag
  std::vector<Eigen::VectorXd> option_probabilities;  // per categorical parameter
};

class SearchDistribution {
 public:
  // INVALID_ARGUMENT if an option is out of range (population_size < 2 when given, initial_spread not in
  // (0, 1], start of the wrong size, outside the bounds, or not a valid flag or option index).
  static absl::StatusOr<SearchDistribution> Create(Space space, const DistributionOptions& options);
  static absl::StatusOr<SearchDistribution> FromState(Space space, DistributionState state);

  // The population size a campaign uses by default: max(4 + ⌊3 ln n⌋, expected_workers, 2).
  static int DefaultPopulationSize(const Space& space, int expected_workers);

  const Space& space() const { return space_; }
  int population_size() const { return population_size_; }
  DistributionState state() const;
  DistributionSummary Summary() const;
  const std::optional<GaussianFamily>& gaussian() const { return gaussian_; }

  Draw Sample(RandomStream& random) const;

  // One update from a cohort of population_size() members and their tie spans (RankCohort).
  absl::Status Update(absl::Span<const CohortMember> cohort, absl::Span<const TieSpan> spans);

  // Multiplies the Gaussian block's step size by `factor` (no effect without one). REQUIRES: factor > 0.
  void ScaleStepSize(double factor);

  // Changes λ for the next updates. REQUIRES: lambda >= 2.
  void SetPopulationSize(int lambda);

 private:
  SearchDistribution(Space space, int population_size) : space_(std::move(space)), population_size_(population_size) {}

  Space space_;
  int population_size_;
  std::optional<GaussianFamily> gaussian_;
  std::optional<BernoulliFamily> bernoulli_;
  std::optional<CategoricalFamily> categorical_;
};

}  // namespace ogive::search

#endif  // OGIVE_SERVER_SEARCH_SEARCH_DISTRIBUTION_H_
