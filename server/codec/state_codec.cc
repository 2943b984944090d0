#include "server/codec/state_codec.h"

#include "absl/status/status.h"
#include "absl/strings/str_cat.h"

namespace ogive::codec {
namespace {

template <typename Field>
void PutVector(const Eigen::VectorXd& v, Field* out) {
  out->Reserve(v.size());
  for (int i = 0; i < v.size(); ++i) out->Add(v[i]);
}

// Row-major, so the stored order does not depend on Eigen's storage order.
template <typename Field>
void PutMatrix(const Eigen::MatrixXd& m, Field* out) {
  out->Reserve(m.size());
  for (int r = 0; r < m.rows(); ++r) {
    for (int c = 0; c < m.cols(); ++c) out->Add(m(r, c));
  }
}

template <typename Field>
Eigen::VectorXd GetVector(const Field& field) {
  Eigen::VectorXd v(field.size());
  for (int i = 0; i < field.size(); ++i) v[i] = field[i];
  return v;
}

template <typename Field>
absl::StatusOr<Eigen::MatrixXd> GetMatrix(const Field& field, int rows, int cols, const char* name) {
  if (field.size() != rows * cols) {
    return absl::InvalidArgumentError(
        absl::StrCat("gaussian state: ", name, " has ", field.size(), " entries, expected ", rows * cols));
  }
  Eigen::MatrixXd m(rows, cols);
  for (int r = 0; r < rows; ++r) {
    for (int c = 0; c < cols; ++c) m(r, c) = field[r * cols + c];
  }
  return m;
}

}  // namespace

v1::DistributionState DistributionStateToProto(const search::DistributionState& state) {
  v1::DistributionState out;
  if (state.gaussian) {
    const search::GaussianState& g = *state.gaussian;
    v1::GaussianState* p = out.mutable_gaussian();
    p->set_dimension(static_cast<int>(g.mean.size()));
    p->set_diagonal(g.diagonal);
    p->set_population_size(g.population_size);
    PutVector(g.mean, p->mutable_mean());
    p->set_sigma(g.sigma);
    PutMatrix(g.covariance, p->mutable_covariance());
    PutVector(g.p_sigma, p->mutable_p_sigma());
    PutVector(g.p_c, p->mutable_p_c());
    PutMatrix(g.eigenvectors, p->mutable_eigenvectors());
    PutVector(g.eigenvalues, p->mutable_eigenvalues());
    p->set_generation(g.generation);
    p->set_eigen_generation(g.eigen_generation);
    for (int64_t levels : g.integer_levels) p->add_integer_levels(levels);
    PutVector(g.margin_scale, p->mutable_margin_scale());
  }
  if (state.bernoulli) {
    v1::BernoulliState* p = out.mutable_bernoulli();
    PutVector(state.bernoulli->probabilities, p->mutable_probabilities());
    p->set_learning_rate(state.bernoulli->learning_rate);
    p->set_margin(state.bernoulli->margin);
  }
  if (state.categorical) {
    v1::CategoricalState* p = out.mutable_categorical();
    for (const Eigen::VectorXd& theta : state.categorical->probabilities) {
      PutVector(theta, p->add_parameters()->mutable_probabilities());
    }
    p->set_learning_rate(state.categorical->learning_rate);
    p->set_margin(state.categorical->margin);
  }
  out.set_population_size(state.population_size);
  return out;
}

absl::StatusOr<search::DistributionState> DistributionStateFromProto(const v1::DistributionState& proto) {
  search::DistributionState state;
  state.population_size = proto.population_size();
  if (proto.has_gaussian()) {
    const v1::GaussianState& p = proto.gaussian();
    const int n = p.dimension();
    if (n < 1 || p.mean_size() != n || p.p_sigma_size() != n || p.p_c_size() != n || p.eigenvalues_size() != n ||
        p.integer_levels_size() != n || p.margin_scale_size() != n) {
      return absl::InvalidArgumentError(absl::StrCat("gaussian state: vectors must all have dimension ", n));
    }
    search::GaussianState g;
    g.diagonal = p.diagonal();
    g.population_size = p.population_size();
    g.mean = GetVector(p.mean());
    g.sigma = p.sigma();
    absl::StatusOr<Eigen::MatrixXd> c = GetMatrix(p.covariance(), n, g.diagonal ? 1 : n, "covariance");
    if (!c.ok()) return c.status();
    g.covariance = *std::move(c);
    g.p_sigma = GetVector(p.p_sigma());
    g.p_c = GetVector(p.p_c());
    if (g.diagonal) {
      if (p.eigenvectors_size() != 0) return absl::InvalidArgumentError("gaussian state: diagonal has no eigenvectors");
    } else {
      absl::StatusOr<Eigen::MatrixXd> b = GetMatrix(p.eigenvectors(), n, n, "eigenvectors");
      if (!b.ok()) return b.status();
      g.eigenvectors = *std::move(b);
    }
    g.eigenvalues = GetVector(p.eigenvalues());
    g.generation = p.generation();
    g.eigen_generation = p.eigen_generation();
    g.integer_levels.assign(p.integer_levels().begin(), p.integer_levels().end());
    g.margin_scale = GetVector(p.margin_scale());
    state.gaussian = std::move(g);
  }
  if (proto.has_bernoulli()) {
    search::BernoulliState b;
    b.probabilities = GetVector(proto.bernoulli().probabilities());
    b.learning_rate = proto.bernoulli().learning_rate();
    b.margin = proto.bernoulli().margin();
    state.bernoulli = std::move(b);
  }
  if (proto.has_categorical()) {
    search::CategoricalState c;
    for (const auto& parameter : proto.categorical().parameters()) {
      c.probabilities.push_back(GetVector(parameter.probabilities()));
    }
    c.learning_rate = proto.categorical().learning_rate();
    c.margin = proto.categorical().margin();
    state.categorical = std::move(c);
  }
  return state;
}

}  // namespace ogive::codec
