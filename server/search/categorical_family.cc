#include "server/search/categorical_family.h"

#include <cmath>

#include "absl/status/status.h"
#include "absl/strings/str_cat.h"

namespace ogive::search {
namespace {

// Sums of probabilities may differ from 1 by rounding; anything beyond this is a corrupt state.
constexpr double kSumTolerance = 1e-9;

absl::Status CheckSettings(const CategoricalState& s) {
  if (s.probabilities.empty()) return absl::InvalidArgumentError("categorical: needs at least one parameter");
  if (!(s.learning_rate > 0.0 && s.learning_rate <= 1.0)) {
    return absl::InvalidArgumentError(
        absl::StrCat("categorical: learning rate must be in (0, 1], got ", s.learning_rate));
  }
  for (size_t j = 0; j < s.probabilities.size(); ++j) {
    const Eigen::VectorXd& theta = s.probabilities[j];
    const int k = static_cast<int>(theta.size());
    if (k < 2) return absl::InvalidArgumentError(absl::StrCat("categorical: parameter ", j, " has fewer than 2 options"));
    if (!(s.margin >= 0.0 && s.margin * k < 1.0)) {
      return absl::InvalidArgumentError(absl::StrCat("categorical: margin ", s.margin, " is too large for ", k, " options"));
    }
    if (!theta.allFinite() || std::abs(theta.sum() - 1.0) > kSumTolerance || theta.minCoeff() < s.margin) {
      return absl::InvalidArgumentError(
          absl::StrCat("categorical: parameter ", j, " needs probabilities >= margin that sum to 1"));
    }
  }
  return absl::OkStatus();
}

void Project(Eigen::VectorXd& theta, double margin) {
  const int k = static_cast<int>(theta.size());
  Eigen::VectorXd excess = (theta.cwiseMax(margin).array() - margin).matrix();
  const double total = excess.sum();
  if (total <= 0.0) {
    theta.setConstant(1.0 / k);
    return;
  }
  theta = (excess * ((1.0 - k * margin) / total)).array() + margin;
}

}  // namespace

std::vector<Eigen::VectorXd> CategoricalFamily::Uniform(absl::Span<const int> option_counts) {
  std::vector<Eigen::VectorXd> start;
  for (int k : option_counts) start.push_back(Eigen::VectorXd::Constant(k, 1.0 / k));
  return start;
}

absl::StatusOr<CategoricalFamily> CategoricalFamily::Create(std::vector<Eigen::VectorXd> start,
                                                            double learning_rate, double margin) {
  return FromState(CategoricalState{std::move(start), learning_rate, margin});
}

absl::StatusOr<CategoricalFamily> CategoricalFamily::FromState(CategoricalState state) {
  if (absl::Status s = CheckSettings(state); !s.ok()) return s;
  return CategoricalFamily(std::move(state));
}

Eigen::VectorXd CategoricalFamily::Sample(RandomStream& random) const {
  Eigen::VectorXd x(dimension());
  for (int j = 0; j < dimension(); ++j) {
    const Eigen::VectorXd& theta = state_.probabilities[j];
    const double u = random.Uniform();
    double cumulative = 0.0;
    int chosen = static_cast<int>(theta.size()) - 1;
    for (int k = 0; k < theta.size(); ++k) {
      cumulative += theta[k];
      if (u < cumulative) {
        chosen = k;
        break;
      }
    }
    x[j] = chosen;
  }
  return x;
}

absl::Status CategoricalFamily::Update(absl::Span<const Eigen::VectorXd> x, absl::Span<const double> weights) {
  if (x.size() != weights.size()) return absl::InvalidArgumentError("categorical update: one weight per member");
  for (const Eigen::VectorXd& indices : x) {
    if (indices.size() != dimension()) return absl::InvalidArgumentError("categorical update: wrong sample size");
    for (int j = 0; j < dimension(); ++j) {
      const double v = indices[j];
      if (v != std::floor(v) || v < 0 || v >= state_.probabilities[j].size()) {
        return absl::InvalidArgumentError(absl::StrCat("categorical update: index ", v, " out of range"));
      }
    }
  }
  for (int j = 0; j < dimension(); ++j) {
    Eigen::VectorXd& theta = state_.probabilities[j];
    // θ ← θ + δt Σ_i ŵ_i (e_{x_i} − θ)
    Eigen::VectorXd step = Eigen::VectorXd::Zero(theta.size());
    for (size_t i = 0; i < x.size(); ++i) {
      step -= weights[i] * theta;
      step[static_cast<int>(x[i][j])] += weights[i];
    }
    theta += state_.learning_rate * step;
    Project(theta, state_.margin);
  }
  return absl::OkStatus();
}

}  // namespace ogive::search
