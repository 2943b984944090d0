#include "server/search/ordinal_model.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <numeric>
#include <utility>

#include <cstdint>
#include "absl/strings/str_cat.h"

namespace ogive::search {
namespace {

// The dual coordinate descent stops when no comparison's projected gradient exceeds kSettled, or after
// kMaxSweeps passes. C = kMarginCost: a soft margin that lets a few contradicting comparisons (noise,
// a shape too poor for the function) stand. At most kMaxComparisons comparisons enter the fit.
constexpr int kMaxSweeps = 200;
constexpr double kSettled = 1e-3;
constexpr double kMarginCost = 1e3;
constexpr int64_t kMaxComparisons = 3000;

}  // namespace

const char* ModelShapeName(ModelShape shape) {
  switch (shape) {
    case ModelShape::kLinear: return "linear";
    case ModelShape::kDiagonalQuadratic: return "diagonal quadratic";
    case ModelShape::kFullQuadratic: return "full quadratic";
  }
  return "";
}

int ModelDegreesOfFreedom(ModelShape shape, int n) {
  switch (shape) {
    case ModelShape::kLinear: return 1 + n;
    case ModelShape::kDiagonalQuadratic: return 1 + 2 * n;
    case ModelShape::kFullQuadratic: return 1 + n + n * (n + 1) / 2;
  }
  return 0;
}

absl::StatusOr<ModelShape> ShapeFor(int n, int points) {
  if (n <= kMaxFullQuadraticDimension && points > ModelDegreesOfFreedom(ModelShape::kFullQuadratic, n)) {
    return ModelShape::kFullQuadratic;
  }
  if (points > ModelDegreesOfFreedom(ModelShape::kDiagonalQuadratic, n)) return ModelShape::kDiagonalQuadratic;
  if (points > ModelDegreesOfFreedom(ModelShape::kLinear, n)) return ModelShape::kLinear;
  return absl::FailedPreconditionError(absl::StrCat("ordinal model: ", points, " points are too few in ", n,
                                                    " dimensions (a linear model needs ", n + 2, ")"));
}

Eigen::VectorXd OrdinalModel::Features(const Eigen::VectorXd& x) const {
  const Eigen::VectorXd z = to_z_ * (x - mean_);
  const int n = static_cast<int>(z.size());
  Eigen::VectorXd phi(ModelDegreesOfFreedom(shape_, n));
  int k = 0;
  phi[k++] = 1.0;
  for (int i = 0; i < n; ++i) phi[k++] = z[i];
  if (shape_ == ModelShape::kDiagonalQuadratic) {
    for (int i = 0; i < n; ++i) phi[k++] = z[i] * z[i];
  } else if (shape_ == ModelShape::kFullQuadratic) {
    for (int i = 0; i < n; ++i) {
      for (int j = i; j < n; ++j) phi[k++] = z[i] * z[j];
    }
  }
  return phi;
}

absl::StatusOr<OrdinalModel> OrdinalModel::Fit(const GaussianFamily& metric, absl::Span<const Eigen::VectorXd> x,
                                               absl::Span<const double> rank) {
  const int n = metric.dimension();
  const int count = static_cast<int>(x.size());
  if (static_cast<int>(rank.size()) != count) {
    return absl::InvalidArgumentError(
        absl::StrCat("ordinal model: ", count, " points but ", rank.size(), " ranks"));
  }
  for (const Eigen::VectorXd& xi : x) {
    if (xi.size() != n || !xi.allFinite()) {
      return absl::InvalidArgumentError(absl::StrCat("ordinal model: a point is not a finite vector of ", n));
    }
  }
  for (const double r : rank) {
    if (!std::isfinite(r)) return absl::InvalidArgumentError("ordinal model: a rank is not a finite number");
  }
  absl::StatusOr<ModelShape> shape = ShapeFor(n, count);
  if (!shape.ok()) return shape.status();

  OrdinalModel model;
  model.shape_ = *shape;
  model.points_ = count;
  // z = D⁻¹ Bᵀ A⁻¹ (x − m)/σ.
  const GaussianState& st = metric.state();
  model.mean_ = st.mean;
  Eigen::VectorXd inv_d = st.eigenvalues.cwiseSqrt().cwiseInverse();
  if (st.diagonal) {
    model.to_z_ = inv_d.cwiseQuotient(st.margin_scale).asDiagonal();
  } else {
    model.to_z_ = inv_d.asDiagonal() * st.eigenvectors.transpose() *
                  st.margin_scale.cwiseInverse().asDiagonal();
  }
  model.to_z_ /= st.sigma;

  // The feature matrix without the constant (it cancels in every comparison), each column scaled to
  // unit standard deviation over the data so the margin weighs the features alike.
  const int p = ModelDegreesOfFreedom(model.shape_, n) - 1;
  model.scale_ = Eigen::VectorXd::Ones(p);
  Eigen::MatrixXd phi(count, p);
  for (int i = 0; i < count; ++i) phi.row(i) = model.Features(x[i]).tail(p).transpose();
  for (int j = 0; j < p; ++j) {
    const double sd = std::sqrt((phi.col(j).array() - phi.col(j).mean()).square().sum() / count);
    model.scale_[j] = sd > 0 ? sd : 1.0;
    phi.col(j) /= model.scale_[j];
  }

  // The comparisons to honour: every member of a class against every member of every worse class
  // (ties compare with nothing: the primary treatment), thinned by a stride when there are too many.
  std::vector<int> by_class(count);
  std::iota(by_class.begin(), by_class.end(), 0);
  std::stable_sort(by_class.begin(), by_class.end(), [&](int a, int b) { return rank[a] < rank[b]; });
  std::vector<std::pair<int, int>> blocks;  // [begin, end) in by_class
  for (int start = 0; start < count;) {
    int end = start + 1;
    while (end < count && rank[by_class[end]] == rank[by_class[start]]) ++end;
    blocks.emplace_back(start, end);
    start = end;
  }
  if (blocks.size() < 2) {
    return absl::FailedPreconditionError("ordinal model: every outcome ties, there is no order to fit");
  }
  int64_t all_pairs = 0;
  for (size_t b = 0; b + 1 < blocks.size(); ++b) {
    all_pairs += int64_t{blocks[b].second - blocks[b].first} * (count - blocks[b].second);
  }
  const int64_t stride = std::max<int64_t>(1, (all_pairs + kMaxComparisons - 1) / kMaxComparisons);
  Eigen::MatrixXd d(p, std::min<int64_t>(all_pairs, kMaxComparisons) + 1);
  int pairs = 0;
  int64_t serial = 0;
  for (size_t b = 0; b + 1 < blocks.size(); ++b) {
    for (int i = blocks[b].first; i < blocks[b].second; ++i) {
      for (int j = blocks[b].second; j < count; ++j, ++serial) {
        if (serial % stride != 0 || pairs >= d.cols()) continue;
        d.col(pairs++) = (phi.row(by_class[j]) - phi.row(by_class[i])).transpose();  // worse − better
      }
    }
  }

  // Ranking SVM (Joachims, KDD 2002; in CMA-ES's metric as in s*ACM-ES, Loshchilov, Schoenauer,
  // Sebag, GECCO 2012): minimize ½‖w‖² + C Σ_k ξ_k subject to w·d_k ≥ 1 − ξ_k, ξ_k ≥ 0, solved in the
  // dual by coordinate descent (Hsieh, Chang, Lin, Keerthi, Sundararajan, ICML 2008):
  // α_k ← clip(α_k − (w·d_k − 1)/‖d_k‖², 0, C), w = Σ_k α_k d_k.
  // Shrinking (the same paper, section 3.2): a comparison whose α sits at a bound with its gradient
  // pushing further out, by more than the largest violation of the previous sweep, leaves the active
  // set; when the active comparisons settle, every comparison is checked again, and the fit ends only
  // when all of them are within kSettled.
  Eigen::VectorXd alpha = Eigen::VectorXd::Zero(pairs);
  Eigen::VectorXd w = Eigen::VectorXd::Zero(p);
  Eigen::VectorXd q_diagonal(pairs);
  for (int k = 0; k < pairs; ++k) q_diagonal[k] = d.col(k).squaredNorm();
  std::vector<int> active(pairs);
  std::iota(active.begin(), active.end(), 0);
  double previous_largest = std::numeric_limits<double>::infinity();
  for (int sweep = 0; sweep < kMaxSweeps; ++sweep) {
    double largest_violation = 0;
    size_t kept = 0;
    for (size_t a = 0; a < active.size(); ++a) {
      const int k = active[a];
      if (!(q_diagonal[k] > 0)) {  // two points with the same features: nothing to fit
        active[kept++] = k;
        continue;
      }
      const double gradient = w.dot(d.col(k)) - 1.0;
      double projected = gradient;
      if (alpha[k] <= 0) {
        if (gradient > previous_largest) continue;  // shrunk: satisfied with room to spare
        projected = std::min(gradient, 0.0);
      } else if (alpha[k] >= kMarginCost) {
        if (gradient < -previous_largest) continue;  // shrunk: violated at full cost
        projected = std::max(gradient, 0.0);
      }
      active[kept++] = k;
      largest_violation = std::max(largest_violation, std::abs(projected));
      if (projected == 0) continue;
      const double next = std::clamp(alpha[k] - gradient / q_diagonal[k], 0.0, kMarginCost);
      w += (next - alpha[k]) * d.col(k);
      alpha[k] = next;
    }
    const bool all_active = kept == active.size() && static_cast<int>(kept) == pairs;
    active.resize(kept);
    if (largest_violation < kSettled) {
      if (all_active) break;
      active.resize(pairs);  // settled on the active set: check every comparison once more
      std::iota(active.begin(), active.end(), 0);
      previous_largest = std::numeric_limits<double>::infinity();
      continue;
    }
    previous_largest = largest_violation;
  }
  model.beta_ = w;
  int honoured = 0;
  for (int k = 0; k < pairs; ++k) honoured += w.dot(d.col(k)) > 0 ? 1 : 0;
  model.order_misfit_ = pairs > 0 ? 1.0 - static_cast<double>(honoured) / pairs : 0.0;
  return model;
}

double OrdinalModel::Predict(const Eigen::VectorXd& x) const {
  const Eigen::VectorXd phi = Features(x);
  return phi.tail(phi.size() - 1).cwiseQuotient(scale_).dot(beta_);
}

double KendallTauB(absl::Span<const double> a, absl::Span<const double> b) {
  const size_t count = std::min(a.size(), b.size());
  double concordant_minus_discordant = 0;
  double pairs = 0, tied_a = 0, tied_b = 0;
  for (size_t i = 0; i < count; ++i) {
    for (size_t j = i + 1; j < count; ++j) {
      pairs += 1;
      const double da = a[i] - a[j], db = b[i] - b[j];
      if (da == 0) tied_a += 1;
      if (db == 0) tied_b += 1;
      if (da != 0 && db != 0) concordant_minus_discordant += (da > 0) == (db > 0) ? 1 : -1;
    }
  }
  const double denominator = std::sqrt((pairs - tied_a) * (pairs - tied_b));
  if (!(denominator > 0)) return std::numeric_limits<double>::quiet_NaN();
  return concordant_minus_discordant / denominator;
}

}  // namespace ogive::search
