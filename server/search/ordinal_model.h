// OrdinalModel: a quadratic surrogate of a campaign's outcome over the real and integer block, fitted
// through the order of the outcomes only, so that it is invariant to any strictly increasing
// transform of the measured quantity and takes grades (ties) as they come.
//
// The fit is a ranking SVM (Joachims, KDD 2002), as in s*ACM-ES (Loshchilov, Schoenauer, Sebag, GECCO
// 2012): the flattest q (least ‖w‖ over standardized features) with q(better) + 1 ≤ q(worse) on every
// compared pair, softly (cost C per violated unit). Every pair of outcomes in different order classes
// is compared; tied outcomes are not compared at all, so a graded cohort constrains only the order
// across grades and the margin puts the model's best region in the middle of the best grade's points.
//
// Features are taken in the coordinates of a search distribution (the metric): z = D⁻¹ Bᵀ A⁻¹ (x − m)/σ
// for N(m, σ² A C A) with C = B D² Bᵀ, so the model has the affine invariance of CMA-ES and is well
// conditioned where the samples are (Hansen, "A global surrogate assisted CMA-ES", GECCO 2019, fits its
// linear-quadratic model in the same coordinates). The shape grows with the data as in that paper:
// linear, then quadratic without cross terms, then a full quadratic (ShapeFor).
//
// A value type: immutable once fitted; safe to read from several threads.
#ifndef OGIVE_SERVER_SEARCH_ORDINAL_MODEL_H_
#define OGIVE_SERVER_SEARCH_ORDINAL_MODEL_H_

#include <vector>

#include "Eigen/Core"
#include "absl/status/statusor.h"
#include "absl/types/span.h"
#include "server/search/gaussian_family.h"

namespace ogive::search {

enum class ModelShape { kLinear, kDiagonalQuadratic, kFullQuadratic };
const char* ModelShapeName(ModelShape shape);  // "linear", "diagonal quadratic", "full quadratic"

// Number of coefficients of a shape in n dimensions: 1 + n, 1 + 2n, 1 + n + n(n+1)/2.
int ModelDegreesOfFreedom(ModelShape shape, int n);

// The richest shape `points` data points support in n dimensions: a shape whose degrees of freedom
// are at most points − 1 (one point beyond the coefficients, so the order can contradict the fit);
// the full quadratic only up to kMaxFullQuadraticDimension. Fails (FAILED_PRECONDITION) when even the
// linear shape has too few points.
absl::StatusOr<ModelShape> ShapeFor(int n, int points);

// Above this dimension the model keeps to the diagonal quadratic: the full one has O(n²) coefficients
// and needs as many evaluations before it is worth anything (our choice, for a budget of a few hundred).
inline constexpr int kMaxFullQuadraticDimension = 20;

class OrdinalModel {
 public:
  // Fits the model to points x_i (coordinates of the real and integer block, as evaluated) whose
  // outcomes have the ranks r_i: smaller for better, equal for ties (any values; only their order counts).
  // INVALID_ARGUMENT on sizes that disagree; FAILED_PRECONDITION when all outcomes tie (no order to
  // fit) or there are too few points for any shape.
  static absl::StatusOr<OrdinalModel> Fit(const GaussianFamily& metric, absl::Span<const Eigen::VectorXd> x,
                                          absl::Span<const double> rank);

  // The model's value at x: smaller is predicted better. Only comparisons of values mean anything.
  double Predict(const Eigen::VectorXd& x) const;

  ModelShape shape() const { return shape_; }
  int points() const { return points_; }
  // The share of the compared pairs the fitted model orders wrongly (0: it orders the data exactly;
  // ties never count against it).
  double order_misfit() const { return order_misfit_; }

 private:
  OrdinalModel() = default;
  Eigen::VectorXd Features(const Eigen::VectorXd& x) const;

  ModelShape shape_ = ModelShape::kLinear;
  int points_ = 0;
  double order_misfit_ = 0;
  Eigen::VectorXd mean_;       // m of the metric
  Eigen::MatrixXd to_z_;       // D⁻¹ Bᵀ A⁻¹ / σ
  Eigen::VectorXd scale_;      // per non-constant feature: divide by this (its standard deviation over the data)
  Eigen::VectorXd beta_;       // w: coefficients of the scaled non-constant features
};

// Kendall's τ_b between two rankings given as values (smaller = better in both): (C − D) /
// √((P − T_a)(P − T_b)) over the P pairs, with T_a, T_b the pairs tied in a and in b (Kendall, "The
// treatment of ties in ranking problems", Biometrika 33, 1945). NaN when undefined (fewer than two
// items, or all tied in either).
double KendallTauB(absl::Span<const double> a, absl::Span<const double> b);

}  // namespace ogive::search

#endif  // OGIVE_SERVER_SEARCH_ORDINAL_MODEL_H_
