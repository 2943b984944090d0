// GaussianFamily: the search distribution over the real and integer block, N(m, σ² A C A), adapted
// by CMA-ES.
//
// The update follows N. Hansen, "The CMA Evolution Strategy: A Tutorial", arXiv:1604.00772 (2016),
// equations (39)-(47) with the defaults of Table 1 (see cma_parameters.h): weighted recombination of the
// mean, cumulative step-size adaptation with h_σ, rank-one and rank-μ covariance updates with active
// (negative) weights, and a lazy eigendecomposition of C.
//
// Two extensions:
// * Samples that were not drawn from the current distribution (drawn under an older one, or repaired
//   into the bounds) are re-expressed against the current m and σ, y = (x − m)/σ, and clipped in
//   Mahalanobis norm, y ← y · min(1, c_y / ‖C^{-1/2} y‖), c_y = √n + 2n/(n + 2), before they enter the
//   mean, the paths and C (Hansen, "Injecting external solutions into CMA-ES", arXiv:1110.4181).
//   They receive only non-negative weights in the covariance update.
// * Integer coordinates carry a margin after CMA-ES with Margin (Hamano, Saito, Nomura, Shirakawa,
//   GECCO 2022, arXiv:2205.13482): a diagonal scale A ≥ 1 keeps the probability of sampling across each
//   threshold of the mean's integer cell at least α = 1/(n λ), so the search never freezes on one
//   integer. (The paper also moves the mean; we only scale, on both sides of the cell: our variant.)
//   Steps are measured in the unscaled space, y = A⁻¹ (x − m)/σ, so A never feeds back into C.
// The diagonal model (sep-CMA-ES, Ros and Hansen, PPSN 2008) keeps C diagonal.
//
// A GaussianFamily is a value type; it is not thread-safe.
#ifndef OGIVE_SERVER_SEARCH_GAUSSIAN_FAMILY_H_
#define OGIVE_SERVER_SEARCH_GAUSSIAN_FAMILY_H_

#include <cstdint>
#include <vector>

#include "Eigen/Core"
#include "absl/status/statusor.h"
#include "absl/types/span.h"
#include "server/search/cma_parameters.h"
#include "server/search/random_stream.h"
#include "server/search/ranking.h"

namespace ogive::search {

// The full state of a Gaussian block; everything a restored family needs to continue bit-identically.
struct GaussianState {
  bool diagonal = false;
  int population_size = 0;               // λ the strategy parameters are computed for
  Eigen::VectorXd mean;                  // m
  double sigma = 0.0;                    // σ
  Eigen::MatrixXd covariance;            // C (n×n; when diagonal, only the diagonal is used)
  Eigen::VectorXd p_sigma;               // conjugate evolution path p_σ
  Eigen::VectorXd p_c;                   // evolution path p_c
  Eigen::MatrixXd eigenvectors;          // B of the last eigendecomposition C = B D² Bᵀ
  Eigen::VectorXd eigenvalues;           // D² of the last eigendecomposition
  int64_t generation = 0;                // updates so far (g)
  int64_t eigen_generation = 0;          // g at the last eigendecomposition
  std::vector<int64_t> integer_levels;   // per coordinate: number of integer values, 0 for a real
  Eigen::VectorXd margin_scale;          // A (diagonal), 1 for reals
};

// Status numbers of a Gaussian block, in internal coordinates.
struct GaussianSummary {
  Eigen::VectorXd mean;
  Eigen::VectorXd spread;   // marginal standard deviations σ A_jj √C_jj
  double sigma = 0.0;
  double axis_ratio = 1.0;  // √(max eigenvalue / min eigenvalue) of C
  double condition_number = 1.0;
};

// One member of a cohort for the Gaussian block.
struct GaussianSample {
  Eigen::VectorXd x;        // internal coordinates, as evaluated
  bool external = false;    // not drawn from the current distribution: re-express and clip
};

class GaussianFamily {
 public:
  // A fresh distribution: m = start, σ = sigma0, C = I, zero paths. `integer_levels` has one entry per
  // coordinate (0 for real coordinates). INVALID_ARGUMENT if sizes disagree, sigma0 is not positive
  // and finite, or lambda < 2.
  static absl::StatusOr<GaussianFamily> Create(const Eigen::VectorXd& start, double sigma0, int lambda,
                                               bool diagonal, std::vector<int64_t> integer_levels);
  // Continues from a stored state. INVALID_ARGUMENT if the state is inconsistent.
  static absl::StatusOr<GaussianFamily> FromState(GaussianState state);

  int dimension() const { return static_cast<int>(state_.mean.size()); }
  const GaussianState& state() const { return state_; }
  const CmaParameters& parameters() const { return params_; }

  // x = m + σ A B D z with z ~ N(0, I).
  Eigen::VectorXd Sample(RandomStream& random) const;

  // One CMA-ES generation from a ranked cohort. REQUIRES: cohort.size() == spans.size() ==
  // population_size; spans from RankCohort. INVALID_ARGUMENT on a size mismatch or a non-finite sample;
  // FAILED_PRECONDITION if the update would leave a non-finite state (a degenerate distribution that
  // needs a restart). On error the state is unchanged.
  absl::Status Update(absl::Span<const GaussianSample> cohort, absl::Span<const TieSpan> spans);

  // σ ← σ · factor (the flat-fitness remedy: a cohort that ranked all alike says the step is too
  // small to see a difference). REQUIRES: factor > 0 and finite.
  void ScaleStepSize(double factor);

  // Changes λ (and the strategy parameters that depend on it) for the next update; m, σ, C and the
  // paths are kept. REQUIRES: lambda >= 2.
  void SetPopulationSize(int lambda);

  // The step y = A⁻¹ (x − m)/σ of a sample, clipped in Mahalanobis norm if `clip`.
  Eigen::VectorXd StepOf(const Eigen::VectorXd& x, bool clip) const;

  // ‖C^{-1/2} v‖ with the current eigendecomposition.
  double MahalanobisNorm(const Eigen::VectorXd& v) const;
  // C^{-1/2} v: Mahalanobis distances between many steps are Euclidean distances between these.
  Eigen::VectorXd InverseSqrtTimes(const Eigen::VectorXd& v) const;

  // c_y = √n + 2n/(n + 2): the clipping radius for external steps.
  double ClipRadius() const;

  // σ √(max eigenvalue of C): the standard deviation of samples along the longest principal axis,
  // with the eigendecomposition sampling uses (internal units, where a range is 1 wide).
  double LargestSpread() const;

  GaussianSummary Summary() const;

 private:
  GaussianFamily(GaussianState state, CmaParameters params);
  void Decompose();
  void UpdateMargin();

  GaussianState state_;
  CmaParameters params_;
};

}  // namespace ogive::search

#endif  // OGIVE_SERVER_SEARCH_GAUSSIAN_FAMILY_H_
