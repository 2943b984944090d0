#include "server/search/bernoulli_family.h"

#include <cmath>

#include "absl/status/status.h"
#include "absl/strings/str_cat.h"

namespace ogive::search {
namespace {

absl::Status CheckSettings(const Eigen::VectorXd& p, double learning_rate, double margin) {
  if (!(learning_rate > 0.0 && learning_rate <= 1.0)) {
    return absl::InvalidArgumentError(absl::StrCat("bernoulli: learning rate must be in (0, 1], got ", learning_rate));
  }
  if (!(margin >= 0.0 && margin < 0.5)) {
    return absl::InvalidArgumentError(absl::StrCat("bernoulli: margin must be in [0, 1/2), got ", margin));
  }
  for (int j = 0; j < p.size(); ++j) {
    if (!(p[j] >= margin && p[j] <= 1.0 - margin)) {
      return absl::InvalidArgumentError(
          absl::StrCat("bernoulli: probability ", j, " is ", p[j], ", outside [", margin, ", ", 1 - margin, "]"));
    }
  }
  return absl::OkStatus();
}

}  // namespace

absl::StatusOr<BernoulliFamily> BernoulliFamily::Create(const Eigen::VectorXd& start, double learning_rate,
                                                        double margin) {
  if (start.size() < 1) return absl::InvalidArgumentError("bernoulli: needs at least one flag");
  if (absl::Status s = CheckSettings(start, learning_rate, margin); !s.ok()) return s;
  return BernoulliFamily(BernoulliState{start, learning_rate, margin});
}

absl::StatusOr<BernoulliFamily> BernoulliFamily::FromState(BernoulliState state) {
  if (state.probabilities.size() < 1) return absl::InvalidArgumentError("bernoulli state: no flags");
  if (absl::Status s = CheckSettings(state.probabilities, state.learning_rate, state.margin); !s.ok()) return s;
  return BernoulliFamily(std::move(state));
}

Eigen::VectorXd BernoulliFamily::Sample(RandomStream& random) const {
  Eigen::VectorXd x(dimension());
  for (int j = 0; j < dimension(); ++j) x[j] = random.Uniform() < state_.probabilities[j] ? 1.0 : 0.0;
  return x;
}

absl::Status BernoulliFamily::Update(absl::Span<const Eigen::VectorXd> x, absl::Span<const double> weights) {
  if (x.size() != weights.size()) return absl::InvalidArgumentError("bernoulli update: one weight per member");
  for (const Eigen::VectorXd& bits : x) {
    if (bits.size() != dimension()) return absl::InvalidArgumentError("bernoulli update: wrong sample size");
    for (int j = 0; j < bits.size(); ++j) {
      if (bits[j] != 0.0 && bits[j] != 1.0) return absl::InvalidArgumentError("bernoulli update: bits must be 0 or 1");
    }
  }
  // p ← p + δt Σ_i ŵ_i (x_i − p)
  Eigen::VectorXd step = Eigen::VectorXd::Zero(dimension());
  for (size_t i = 0; i < x.size(); ++i) step += weights[i] * (x[i] - state_.probabilities);
  state_.probabilities += state_.learning_rate * step;
  state_.probabilities = state_.probabilities.cwiseMax(state_.margin).cwiseMin(1.0 - state_.margin);
  return absl::OkStatus();
}

}  // namespace ogive::search
