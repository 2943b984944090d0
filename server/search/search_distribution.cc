#include "server/search/search_distribution.h"

#include <algorithm>
#include <cmath>
#include <utility>

#include "absl/status/status.h"
#include "absl/strings/str_cat.h"
#include "server/base/check.h"
#include "server/search/cma_parameters.h"

namespace ogive::search {
namespace {

// Discrete blocks: δt of the IGO step, chosen on OneMax and LeadingOnes with 100 flags (see
// docs/benchmarks.md): large enough to converge in a few hundred generations, small enough that
// genetic drift does not fix bits before selection does (0.1 was 1.7x slower, 0.3 a little faster
// but less robust in small spaces).
constexpr double kDefaultDiscreteLearningRate = 0.2;

// Probabilities stay in [1/n, 1 − 1/n] for flags (common practice; used in Witt's UMDA analyses) and at
// least 1/(n (K − 1)) for categorical options (from memory), with n the number of parameters, but n is
// taken as at least 20 so that small spaces still concentrate on their best values.
constexpr int kMinimumMarginDimension = 20;

Eigen::VectorXd Gather(const Eigen::VectorXd& x, const std::vector<int>& indices) {
  Eigen::VectorXd out(indices.size());
  for (size_t k = 0; k < indices.size(); ++k) out[k] = x[indices[k]];
  return out;
}

void Scatter(const Eigen::VectorXd& block, const std::vector<int>& indices, Eigen::VectorXd& x) {
  for (size_t k = 0; k < indices.size(); ++k) x[indices[k]] = block[k];
}

double MarginDimension(const Space& space) { return std::max(space.size(), kMinimumMarginDimension); }

std::vector<int> OptionCounts(const Space& space) {
  std::vector<int> counts;
  for (int i : space.categorical_indices()) counts.push_back(static_cast<int>(space.parameter(i).options.size()));
  return counts;
}

}  // namespace

int SearchDistribution::DefaultPopulationSize(const Space& space, int expected_workers) {
  return std::max({search::DefaultPopulationSize(space.size()), expected_workers, 2});
}

absl::StatusOr<SearchDistribution> SearchDistribution::Create(Space space, const DistributionOptions& options) {
  if (options.population_size != 0 && options.population_size < 2) {
    return absl::InvalidArgumentError(
        absl::StrCat("population_size: must be 0 (default) or at least 2, got ", options.population_size));
  }
  if (options.expected_workers < 0) {
    return absl::InvalidArgumentError(
        absl::StrCat("expected_workers: must be >= 0, got ", options.expected_workers));
  }
  const double sigma0 = options.initial_spread == 0 ? kDefaultInitialSpread : options.initial_spread;
  if (!(sigma0 > 0.0 && sigma0 <= 1.0)) {
    return absl::InvalidArgumentError(
        absl::StrCat("initial_spread: must be in (0, 1] (a fraction of each range), got ", options.initial_spread));
  }
  const double learning_rate =
      options.discrete_learning_rate == 0 ? kDefaultDiscreteLearningRate : options.discrete_learning_rate;
  if (!options.start.empty() && static_cast<int>(options.start.size()) != space.size()) {
    return absl::InvalidArgumentError(absl::StrCat("start: has ", options.start.size(),
                                                   " coordinates, the space has ", space.size(), " parameters"));
  }
  Eigen::VectorXd start = space.Center();
  std::vector<bool> given(space.size(), false);
  for (size_t i = 0; i < options.start.size(); ++i) {
    if (!options.start[i].has_value()) continue;
    const double u = *options.start[i];
    const ParameterSpec& p = space.parameter(static_cast<int>(i));
    const bool valid = p.kind == ParameterKind::kCategorical
                           ? (u == std::floor(u) && u >= 0 && u < static_cast<double>(p.options.size()))
                           : p.kind == ParameterKind::kFlag ? (u == 0.0 || u == 1.0) : (u >= 0.0 && u <= 1.0);
    if (!valid) {
      return absl::InvalidArgumentError(absl::StrCat("start: parameter '", p.name, "' lies outside its bounds"));
    }
    start[i] = u;
    given[i] = true;
  }
  const int lambda = options.population_size != 0
                         ? std::max(options.population_size, options.expected_workers)
                         : DefaultPopulationSize(space, options.expected_workers);
  SearchDistribution d(std::move(space), lambda);
  const Space& s = d.space_;
  if (!s.gaussian_indices().empty()) {
    std::vector<int64_t> levels;
    for (int i : s.gaussian_indices()) levels.push_back(s.integer_levels(i));
    const int n = static_cast<int>(levels.size());
    const bool diagonal = options.gaussian_model == GaussianModel::kDiagonal ||
                          (options.gaussian_model == GaussianModel::kAuto && n > kDiagonalThreshold);
    absl::StatusOr<GaussianFamily> g =
        GaussianFamily::Create(Gather(start, s.gaussian_indices()), sigma0, lambda, diagonal, std::move(levels));
    if (!g.ok()) return g.status();
    d.gaussian_ = *std::move(g);
  }
  const double n_margin = MarginDimension(s);
  if (!s.flag_indices().empty()) {
    const double margin = 1.0 / n_margin;
    Eigen::VectorXd p = Eigen::VectorXd::Constant(s.flag_indices().size(), 0.5);
    for (size_t k = 0; k < s.flag_indices().size(); ++k) {
      if (given[s.flag_indices()[k]]) p[k] = 0.25 + 0.5 * start[s.flag_indices()[k]];
    }
    absl::StatusOr<BernoulliFamily> b = BernoulliFamily::Create(p, learning_rate, margin);
    if (!b.ok()) return b.status();
    d.bernoulli_ = *std::move(b);
  }
  if (!s.categorical_indices().empty()) {
    const std::vector<int> counts = OptionCounts(s);
    const int k_max = *std::max_element(counts.begin(), counts.end());
    const double margin = 1.0 / (n_margin * (k_max - 1));
    std::vector<Eigen::VectorXd> theta = CategoricalFamily::Uniform(counts);
    for (size_t k = 0; k < theta.size(); ++k) {
      const int i = s.categorical_indices()[k];
      if (!given[i]) continue;
      theta[k] *= 0.5;
      theta[k][static_cast<int>(start[i])] += 0.5;
    }
    absl::StatusOr<CategoricalFamily> c = CategoricalFamily::Create(std::move(theta), learning_rate, margin);
    if (!c.ok()) return c.status();
    d.categorical_ = *std::move(c);
  }
  return d;
}

absl::StatusOr<SearchDistribution> SearchDistribution::FromState(Space space, DistributionState state) {
  if (state.population_size < 2) return absl::InvalidArgumentError("distribution state: population size < 2");
  const bool blocks_match = state.gaussian.has_value() == !space.gaussian_indices().empty() &&
                            state.bernoulli.has_value() == !space.flag_indices().empty() &&
                            state.categorical.has_value() == !space.categorical_indices().empty();
  if (!blocks_match) return absl::InvalidArgumentError("distribution state: blocks do not match the space");
  SearchDistribution d(std::move(space), state.population_size);
  if (state.gaussian) {
    if (state.gaussian->mean.size() != static_cast<int>(d.space_.gaussian_indices().size()) ||
        state.gaussian->population_size != state.population_size) {
      return absl::InvalidArgumentError("distribution state: gaussian block does not match the space");
    }
    absl::StatusOr<GaussianFamily> g = GaussianFamily::FromState(*std::move(state.gaussian));
    if (!g.ok()) return g.status();
    d.gaussian_ = *std::move(g);
  }
  if (state.bernoulli) {
    if (state.bernoulli->probabilities.size() != static_cast<int>(d.space_.flag_indices().size())) {
      return absl::InvalidArgumentError("distribution state: bernoulli block does not match the space");
    }
    absl::StatusOr<BernoulliFamily> b = BernoulliFamily::FromState(*std::move(state.bernoulli));
    if (!b.ok()) return b.status();
    d.bernoulli_ = *std::move(b);
  }
  if (state.categorical) {
    const std::vector<int> counts = OptionCounts(d.space_);
    bool ok = state.categorical->probabilities.size() == counts.size();
    for (size_t j = 0; ok && j < counts.size(); ++j) ok = state.categorical->probabilities[j].size() == counts[j];
    if (!ok) return absl::InvalidArgumentError("distribution state: categorical block does not match the space");
    absl::StatusOr<CategoricalFamily> c = CategoricalFamily::FromState(*std::move(state.categorical));
    if (!c.ok()) return c.status();
    d.categorical_ = *std::move(c);
  }
  return d;
}

DistributionState SearchDistribution::state() const {
  DistributionState s;
  s.population_size = population_size_;
  if (gaussian_) s.gaussian = gaussian_->state();
  if (bernoulli_) s.bernoulli = bernoulli_->state();
  if (categorical_) s.categorical = categorical_->state();
  return s;
}

DistributionSummary SearchDistribution::Summary() const {
  DistributionSummary summary;
  if (gaussian_) summary.gaussian = gaussian_->Summary();
  if (bernoulli_) summary.flag_probabilities = bernoulli_->state().probabilities;
  if (categorical_) summary.option_probabilities = categorical_->state().probabilities;
  return summary;
}

Draw SearchDistribution::Sample(RandomStream& random) const {
  // Blocks draw in a fixed order (Gaussian, flags, categoricals) so the stream position determines the
  // sample.
  Eigen::VectorXd x = space_.Center();
  if (gaussian_) Scatter(gaussian_->Sample(random), space_.gaussian_indices(), x);
  if (bernoulli_) Scatter(bernoulli_->Sample(random), space_.flag_indices(), x);
  if (categorical_) Scatter(categorical_->Sample(random), space_.categorical_indices(), x);
  Draw draw;
  draw.x = space_.Repair(x);
  draw.repaired = draw.x != x;
  return draw;
}

absl::Status SearchDistribution::Update(absl::Span<const CohortMember> cohort, absl::Span<const TieSpan> spans) {
  const int lambda = population_size_;
  if (static_cast<int>(cohort.size()) != lambda || static_cast<int>(spans.size()) != lambda) {
    return absl::InvalidArgumentError(absl::StrCat("update: cohort has ", cohort.size(),
                                                   " members, the population size is ", lambda));
  }
  for (const CohortMember& m : cohort) {
    if (m.x.size() != space_.size() || !m.x.allFinite()) {
      return absl::InvalidArgumentError("update: every member needs one finite coordinate per parameter");
    }
  }
  // Work on copies and publish only when every block has accepted the cohort.
  std::optional<GaussianFamily> gaussian = gaussian_;
  std::optional<BernoulliFamily> bernoulli = bernoulli_;
  std::optional<CategoricalFamily> categorical = categorical_;
  if (gaussian) {
    std::vector<GaussianSample> block;
    for (const CohortMember& m : cohort) block.push_back({Gather(m.x, space_.gaussian_indices()), m.external});
    if (absl::Status s = gaussian->Update(block, spans); !s.ok()) return s;
  }
  if (bernoulli || categorical) {
    const std::vector<double> weights = TieAveragedWeights(spans, LogQuantileWeights(lambda));
    if (bernoulli) {
      std::vector<Eigen::VectorXd> block;
      for (const CohortMember& m : cohort) block.push_back(Gather(m.x, space_.flag_indices()));
      if (absl::Status s = bernoulli->Update(block, weights); !s.ok()) return s;
    }
    if (categorical) {
      std::vector<Eigen::VectorXd> block;
      for (const CohortMember& m : cohort) block.push_back(Gather(m.x, space_.categorical_indices()));
      if (absl::Status s = categorical->Update(block, weights); !s.ok()) return s;
    }
  }
  gaussian_ = std::move(gaussian);
  bernoulli_ = std::move(bernoulli);
  categorical_ = std::move(categorical);
  return absl::OkStatus();
}

void SearchDistribution::ScaleStepSize(double factor) {
  if (gaussian_) gaussian_->ScaleStepSize(factor);
}

void SearchDistribution::SetPopulationSize(int lambda) {
  OGIVE_CHECK(lambda >= 2);
  population_size_ = lambda;
  if (gaussian_) gaussian_->SetPopulationSize(lambda);
}

}  // namespace ogive::search
