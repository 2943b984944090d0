#include "server/search/gaussian_family.h"

#include <algorithm>
#include <cmath>
#include <utility>

#include "Eigen/Eigenvalues"
#include "absl/status/status.h"
#include "absl/strings/str_cat.h"
#include "server/base/check.h"

namespace ogive::search {
namespace {

// Eigenvalues of C are floored at this fraction of the largest one, so C^{-1/2} stays finite. The
// campaign's termination test stops at a condition number of 1e14, far before the floor matters.
constexpr double kEigenvalueFloor = 1e-20;

// z with P(N(0,1) > z) = alpha, by bisection on the complementary error function.
double UpperNormalQuantile(double alpha) {
  double lo = 0.0, hi = 40.0;
  for (int i = 0; i < 200; ++i) {
    const double mid = 0.5 * (lo + hi);
    (0.5 * std::erfc(mid / std::sqrt(2.0)) > alpha ? lo : hi) = mid;
  }
  return 0.5 * (lo + hi);
}

bool AllFinite(const Eigen::VectorXd& v) { return v.allFinite(); }

// Beyond this marginal standard deviation (internal units, where a range is 1 wide) a distribution has
// stopped meaning anything, and squares of its samples would overflow; the campaign restarts it.
constexpr double kMaxSpread = 1e100;

// True if the state can no longer be sampled: non-finite numbers, σ = 0, or a runaway spread.
bool Degenerate(const GaussianState& st) {
  if (!st.mean.allFinite() || !st.covariance.allFinite() || !std::isfinite(st.sigma) || !(st.sigma > 0.0)) {
    return true;
  }
  const double max_variance = st.diagonal ? st.covariance.col(0).maxCoeff() : st.covariance.diagonal().maxCoeff();
  const double spread = st.sigma * std::sqrt(std::max(max_variance, 0.0));
  return !(spread > 0.0 && spread < kMaxSpread);
}

}  // namespace

GaussianFamily::GaussianFamily(GaussianState state, CmaParameters params)
    : state_(std::move(state)), params_(std::move(params)) {}

absl::StatusOr<GaussianFamily> GaussianFamily::Create(const Eigen::VectorXd& start, double sigma0, int lambda,
                                                      bool diagonal, std::vector<int64_t> integer_levels) {
  const int n = static_cast<int>(start.size());
  if (n < 1) return absl::InvalidArgumentError("gaussian: needs at least one coordinate");
  if (!AllFinite(start)) return absl::InvalidArgumentError("start: every coordinate must be finite");
  if (!(sigma0 > 0.0) || !std::isfinite(sigma0)) {
    return absl::InvalidArgumentError(absl::StrCat("initial_spread: must be positive and finite, got ", sigma0));
  }
  if (lambda < 2) {
    return absl::InvalidArgumentError(absl::StrCat("population_size: must be at least 2, got ", lambda));
  }
  if (static_cast<int>(integer_levels.size()) != n) {
    return absl::InvalidArgumentError("gaussian: integer_levels needs one entry per coordinate");
  }
  GaussianState s;
  s.diagonal = diagonal;
  s.population_size = lambda;
  s.mean = start;
  s.sigma = sigma0;
  s.covariance = diagonal ? Eigen::MatrixXd(Eigen::MatrixXd::Ones(n, 1)) : Eigen::MatrixXd(Eigen::MatrixXd::Identity(n, n));
  s.p_sigma = Eigen::VectorXd::Zero(n);
  s.p_c = Eigen::VectorXd::Zero(n);
  s.eigenvectors = diagonal ? Eigen::MatrixXd() : Eigen::MatrixXd(Eigen::MatrixXd::Identity(n, n));
  s.eigenvalues = Eigen::VectorXd::Ones(n);
  s.integer_levels = std::move(integer_levels);
  s.margin_scale = Eigen::VectorXd::Ones(n);
  GaussianFamily family(std::move(s), CmaParameters::Default(n, lambda, diagonal));
  family.UpdateMargin();
  return family;
}

absl::StatusOr<GaussianFamily> GaussianFamily::FromState(GaussianState s) {
  const int n = static_cast<int>(s.mean.size());
  const bool sizes_ok =
      n >= 1 && s.p_sigma.size() == n && s.p_c.size() == n && s.eigenvalues.size() == n &&
      s.margin_scale.size() == n && static_cast<int>(s.integer_levels.size()) == n &&
      (s.diagonal ? (s.covariance.rows() == n && s.covariance.cols() == 1)
                  : (s.covariance.rows() == n && s.covariance.cols() == n && s.eigenvectors.rows() == n &&
                     s.eigenvectors.cols() == n));
  if (!sizes_ok) return absl::InvalidArgumentError("gaussian state: sizes are inconsistent");
  if (!(s.sigma > 0.0) || !std::isfinite(s.sigma) || s.population_size < 2 || !AllFinite(s.mean)) {
    return absl::InvalidArgumentError("gaussian state: sigma, population size or mean is invalid");
  }
  CmaParameters params = CmaParameters::Default(n, s.population_size, s.diagonal);
  return GaussianFamily(std::move(s), std::move(params));
}

Eigen::VectorXd GaussianFamily::Sample(RandomStream& random) const {
  const int n = dimension();
  Eigen::VectorXd z(n);
  for (int j = 0; j < n; ++j) z[j] = random.Normal();
  Eigen::VectorXd y;
  if (state_.diagonal) {
    y = state_.covariance.col(0).cwiseSqrt().cwiseProduct(z);
  } else {
    y = state_.eigenvectors * state_.eigenvalues.cwiseSqrt().cwiseProduct(z);
  }
  // (σ A) first: when σ is tiny the margin's A is large, and their product is the finite quantity.
  return state_.mean + (state_.sigma * state_.margin_scale).cwiseProduct(y);
}

Eigen::VectorXd GaussianFamily::InverseSqrtTimes(const Eigen::VectorXd& v) const {
  if (state_.diagonal) return v.cwiseQuotient(state_.eigenvalues.cwiseSqrt());
  const Eigen::MatrixXd& B = state_.eigenvectors;
  return B * (B.transpose() * v).cwiseQuotient(state_.eigenvalues.cwiseSqrt());
}

double GaussianFamily::MahalanobisNorm(const Eigen::VectorXd& v) const { return InverseSqrtTimes(v).norm(); }

double GaussianFamily::ClipRadius() const {
  const double n = dimension();
  return std::sqrt(n) + 2.0 * n / (n + 2.0);
}

Eigen::VectorXd GaussianFamily::StepOf(const Eigen::VectorXd& x, bool clip) const {
  Eigen::VectorXd y = (x - state_.mean).cwiseQuotient(state_.margin_scale) / state_.sigma;
  if (clip) {
    const double norm = MahalanobisNorm(y);
    if (norm > ClipRadius()) y *= ClipRadius() / norm;
  }
  return y;
}

absl::Status GaussianFamily::Update(absl::Span<const GaussianSample> cohort, absl::Span<const TieSpan> spans) {
  const int n = dimension();
  const int lambda = params_.lambda;
  if (static_cast<int>(cohort.size()) != lambda || static_cast<int>(spans.size()) != lambda) {
    return absl::InvalidArgumentError(
        absl::StrCat("gaussian update: cohort has ", cohort.size(), " members, population size is ", lambda));
  }
  for (const GaussianSample& s : cohort) {
    if (s.x.size() != n || !AllFinite(s.x)) {
      return absl::InvalidArgumentError("gaussian update: every sample needs n finite coordinates");
    }
  }
  const GaussianState before = state_;
  GaussianState& st = state_;
  const CmaParameters& p = params_;

  // Weights per member: the tie-averaged recombination weights (mean: positive part only).
  std::vector<double> positive(p.weights.size());
  for (size_t i = 0; i < positive.size(); ++i) positive[i] = std::max(0.0, p.weights[i]);
  const std::vector<double> w_mean = TieAveragedWeights(spans, positive);
  const std::vector<double> w_cov = TieAveragedWeights(spans, p.weights);

  // y_i = A⁻¹ (x_i − m)/σ, clipped for external members.
  Eigen::MatrixXd Y(n, lambda);
  for (int i = 0; i < lambda; ++i) Y.col(i) = StepOf(cohort[i].x, cohort[i].external);

  // ⟨y⟩_w = Σ w_i y_i;  m ← m + c_m σ A ⟨y⟩_w
  Eigen::VectorXd y_w = Eigen::VectorXd::Zero(n);
  for (int i = 0; i < lambda; ++i) y_w += w_mean[i] * Y.col(i);
  st.mean += p.c_m * st.sigma * st.margin_scale.cwiseProduct(y_w);

  // With ties the weights actually used are flatter than w: normalize the paths with their own
  // variance-effective mass 1/Σ w̄_i², so that ⟨y⟩_w √μ_w stays N(0, C) under random selection (an
  // all-tied cohort would otherwise shrink σ every generation). Without ties μ_w = μ_eff.
  const bool tied = std::any_of(spans.begin(), spans.end(),
                                [](const TieSpan& s) { return s.better_or_equal - s.better > 1; });
  double mu_w = p.mu_eff;
  if (tied) {
    double sum_sq = 0;
    for (double w : w_mean) sum_sq += w * w;
    mu_w = 1.0 / sum_sq;
  }

  // p_σ ← (1 − c_σ) p_σ + √(c_σ (2 − c_σ) μ_eff) C^{-1/2} ⟨y⟩_w
  st.p_sigma = (1.0 - p.c_sigma) * st.p_sigma +
               std::sqrt(p.c_sigma * (2.0 - p.c_sigma) * mu_w) * InverseSqrtTimes(y_w);

  // h_σ = 1 iff ‖p_σ‖ / √(1 − (1 − c_σ)^{2(g+1)}) < (1.4 + 2/(n+1)) E‖N(0,I)‖
  const double p_sigma_norm = st.p_sigma.norm();
  const double correction =
      std::sqrt(1.0 - std::pow(1.0 - p.c_sigma, 2.0 * static_cast<double>(st.generation + 1)));
  const double h_sigma = p_sigma_norm / correction < (1.4 + 2.0 / (n + 1.0)) * p.chi_n ? 1.0 : 0.0;

  // p_c ← (1 − c_c) p_c + h_σ √(c_c (2 − c_c) μ_eff) ⟨y⟩_w
  st.p_c = (1.0 - p.c_c) * st.p_c + h_sigma * std::sqrt(p.c_c * (2.0 - p.c_c) * mu_w) * y_w;

  // w°_i = w_i for w_i ≥ 0, else w_i · n / ‖C^{-1/2} y_i‖². External members get no negative weight:
  // the active update's scaling assumes y_i ~ N(0, C), which a repaired or re-expressed step is not;
  // with it, repaired samples near the bounds collapsed C on the rotated ellipsoid (our choice, see
  // docs/math.md).
  std::vector<double> w_circ(lambda);
  // Σ w_j of the weights actually applied: a negative weight dropped for an external member must also
  // leave the decay term, or C would grow under random selection (eq. 47's balance).
  double sum_applied = p.SumOfWeights();
  for (int i = 0; i < lambda; ++i) {
    if (w_cov[i] >= 0) {
      w_circ[i] = w_cov[i];
    } else if (cohort[i].external) {
      w_circ[i] = 0.0;
      sum_applied -= w_cov[i];
    } else {
      const double norm_sq = InverseSqrtTimes(Y.col(i)).squaredNorm();
      w_circ[i] = norm_sq > 0 ? w_cov[i] * n / norm_sq : 0.0;
    }
  }

  // C ← (1 + c_1 δ(h_σ) − c_1 − c_μ Σ w_j) C + c_1 p_c p_cᵀ + c_μ Σ w°_i y_i y_iᵀ,
  // δ(h_σ) = (1 − h_σ) c_c (2 − c_c)
  const double delta_h = (1.0 - h_sigma) * p.c_c * (2.0 - p.c_c);
  const double decay = 1.0 + p.c_1 * delta_h - p.c_1 - p.c_mu * sum_applied;
  if (st.diagonal) {
    Eigen::VectorXd rank_mu = Eigen::VectorXd::Zero(n);
    for (int i = 0; i < lambda; ++i) rank_mu += w_circ[i] * Y.col(i).cwiseAbs2();
    st.covariance.col(0) = decay * st.covariance.col(0) + p.c_1 * st.p_c.cwiseAbs2() + p.c_mu * rank_mu;
  } else {
    Eigen::MatrixXd rank_mu = Y * Eigen::Map<const Eigen::VectorXd>(w_circ.data(), lambda).asDiagonal() *
                              Y.transpose();
    st.covariance = decay * st.covariance + p.c_1 * st.p_c * st.p_c.transpose() + p.c_mu * rank_mu;
  }

  // σ ← σ exp((c_σ/d_σ)(‖p_σ‖/E‖N(0,I)‖ − 1))
  st.sigma *= std::exp((p.c_sigma / p.d_sigma) * (p_sigma_norm / p.chi_n - 1.0));

  ++st.generation;
  if (Degenerate(st)) {
    state_ = before;
    return absl::FailedPreconditionError(
        "gaussian update: the distribution degenerated (non-finite, zero or runaway spread); restart the search");
  }
  if (st.diagonal || st.generation - st.eigen_generation >= p.eigen_gap) Decompose();
  UpdateMargin();
  return absl::OkStatus();
}

void GaussianFamily::Decompose() {
  GaussianState& st = state_;
  st.eigen_generation = st.generation;
  if (st.diagonal) {
    const double floor = kEigenvalueFloor * st.covariance.col(0).maxCoeff();
    st.covariance.col(0) = st.covariance.col(0).cwiseMax(floor);
    st.eigenvalues = st.covariance.col(0);
    return;
  }
  st.covariance = 0.5 * (st.covariance + st.covariance.transpose()).eval();
  Eigen::SelfAdjointEigenSolver<Eigen::MatrixXd> solver(st.covariance);
  OGIVE_CHECK(solver.info() == Eigen::Success);
  const double floor = kEigenvalueFloor * solver.eigenvalues().maxCoeff();
  st.eigenvalues = solver.eigenvalues().cwiseMax(floor);
  st.eigenvectors = solver.eigenvectors();
}

void GaussianFamily::UpdateMargin() {
  // α = 1/(n λ): the least probability of sampling across each threshold that bounds the integer cell
  // of the mean. With the marginal N(m_j, (σ A_jj)² C_jj) that needs σ A_jj √C_jj z_α ≥ d_j, d_j the
  // distance from m_j to the farther of the two thresholds (only one at the ends of the range). Both
  // sides count so that a mean near one edge of its cell can still reach the neighbour on the far side.
  GaussianState& st = state_;
  const int n = dimension();
  const double alpha = 1.0 / (static_cast<double>(n) * params_.lambda);
  const double z_alpha = UpperNormalQuantile(alpha);
  for (int j = 0; j < n; ++j) {
    const int64_t levels = st.integer_levels[j];
    if (levels < 2) {
      st.margin_scale[j] = 1.0;
      continue;
    }
    const double w = static_cast<double>(levels);
    const double cell = std::clamp(std::floor(st.mean[j] * w), 0.0, w - 1.0);
    double distance = 0.0;
    if (cell > 0) distance = std::max(distance, std::abs(st.mean[j] - cell / w));
    if (cell < w - 1) distance = std::max(distance, std::abs((cell + 1) / w - st.mean[j]));
    const double c_jj = st.diagonal ? st.covariance(j, 0) : st.covariance(j, j);
    const double spread = st.sigma * std::sqrt(std::max(c_jj, 0.0));
    // With no spread at all (σ underflowed) no finite scale helps; such a campaign is converged.
    st.margin_scale[j] = spread > 0.0 ? std::max(1.0, distance / (z_alpha * spread)) : 1.0;
  }
}

void GaussianFamily::ScaleStepSize(double factor) {
  OGIVE_CHECK(factor > 0.0 && std::isfinite(factor));
  state_.sigma *= factor;
  UpdateMargin();
}

void GaussianFamily::SetPopulationSize(int lambda) {
  OGIVE_CHECK(lambda >= 2);
  state_.population_size = lambda;
  params_ = CmaParameters::Default(dimension(), lambda, state_.diagonal);
  UpdateMargin();
}

double GaussianFamily::LargestSpread() const {
  return state_.sigma * std::sqrt(state_.eigenvalues.maxCoeff());
}

GaussianSummary GaussianFamily::Summary() const {
  const GaussianState& st = state_;
  GaussianSummary summary;
  summary.mean = st.mean;
  summary.sigma = st.sigma;
  const Eigen::VectorXd c_diag = st.diagonal ? Eigen::VectorXd(st.covariance.col(0))
                                             : Eigen::VectorXd(st.covariance.diagonal());
  summary.spread = st.sigma * st.margin_scale.cwiseProduct(c_diag.cwiseMax(0.0).cwiseSqrt());
  const double max_ev = st.eigenvalues.maxCoeff();
  const double min_ev = st.eigenvalues.minCoeff();
  summary.condition_number = max_ev / min_ev;
  summary.axis_ratio = std::sqrt(summary.condition_number);
  return summary;
}

}  // namespace ogive::search
