#include "server/campaign/termination.h"

#include <cmath>

#include "absl/strings/str_cat.h"

namespace ogive::campaign {
namespace {

constexpr double kMaxCondition = 1e14;
constexpr double kTolX = 1e-12;
constexpr double kIntegerCellFraction = 1e-3;
// Probabilities at their margin: the projection and clamping set them exactly; this absorbs rounding.
constexpr double kMarginSlack = 1e-12;

bool DiscreteCollapsed(const search::SearchDistribution& d) {
  const search::DistributionState s = d.state();
  if (s.bernoulli) {
    for (int j = 0; j < s.bernoulli->probabilities.size(); ++j) {
      const double p = s.bernoulli->probabilities[j];
      const double m = s.bernoulli->margin;
      if (p > m + kMarginSlack && p < 1.0 - m - kMarginSlack) return false;
    }
  }
  if (s.categorical) {
    for (const Eigen::VectorXd& theta : s.categorical->probabilities) {
      int above_margin = 0;
      for (int k = 0; k < theta.size(); ++k) above_margin += theta[k] > s.categorical->margin + kMarginSlack;
      if (above_margin > 1) return false;
    }
  }
  return true;
}

std::optional<std::string> GaussianReason(const search::GaussianFamily& g, double sigma0) {
  const search::GaussianState& s = g.state();
  const int n = g.dimension();
  const double max_ev = s.eigenvalues.maxCoeff();
  const double min_ev = s.eigenvalues.minCoeff();
  if (max_ev / min_ev > kMaxCondition) {
    return absl::StrCat("condition number of C is ", max_ev / min_ev, " > 1e14");
  }
  const Eigen::VectorXd c_diag = s.diagonal ? Eigen::VectorXd(s.covariance.col(0)) : Eigen::VectorXd(s.covariance.diagonal());
  bool all_small = true;
  for (int j = 0; j < n; ++j) {
    const double spread = s.sigma * std::sqrt(std::max(c_diag[j], 0.0));
    const double limit = s.integer_levels[j] > 0 ? kIntegerCellFraction / static_cast<double>(s.integer_levels[j])
                                                 : kTolX * sigma0;
    all_small = all_small && spread < limit;
    if (s.mean[j] + 0.2 * spread * s.margin_scale[j] == s.mean[j]) {
      return absl::StrCat("adding 0.2 sigma to coordinate ", j, " has no effect (NoEffectCoord)");
    }
  }
  if (all_small) return "every coordinate's spread is below its tolerance (TolX)";
  if (!s.diagonal) {
    const int axis = static_cast<int>(s.generation % n);
    const Eigen::VectorXd shifted =
        s.mean + 0.1 * s.sigma * std::sqrt(s.eigenvalues[axis]) * s.margin_scale.cwiseProduct(s.eigenvectors.col(axis));
    if (shifted == s.mean) return absl::StrCat("0.1 sigma along principal axis ", axis, " has no effect (NoEffectAxis)");
  }
  return std::nullopt;
}

}  // namespace

std::optional<std::string> ConvergenceReason(const search::SearchDistribution& distribution,
                                             int64_t flat_generations, double sigma0) {
  const int n = distribution.space().size();
  const int64_t flat_limit = 10 + (30 * n + distribution.population_size() - 1) / distribution.population_size();
  if (flat_generations >= flat_limit) {
    return absl::StrCat("all outcomes of the last ", flat_generations, " cohorts were equal (EqualValues)");
  }
  if (!DiscreteCollapsed(distribution)) return std::nullopt;
  if (distribution.gaussian()) return GaussianReason(*distribution.gaussian(), sigma0);
  return "every flag and categorical probability has collapsed onto one value";
}

}  // namespace ogive::campaign
