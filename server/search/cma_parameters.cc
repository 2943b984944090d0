#include "server/search/cma_parameters.h"

#include <algorithm>
#include <cmath>

#include "server/base/check.h"

namespace ogive::search {

int DefaultPopulationSize(int n) {
  OGIVE_CHECK(n >= 1);
  return 4 + static_cast<int>(std::floor(3.0 * std::log(static_cast<double>(n))));
}

double ExpectedNormOfStandardNormal(int n) {
  return std::sqrt(2.0) * std::exp(std::lgamma((n + 1) / 2.0) - std::lgamma(n / 2.0));
}

CmaParameters CmaParameters::Default(int n, int lambda, bool diagonal) {
  OGIVE_CHECK(n >= 1 && lambda >= 2);
  CmaParameters p;
  p.n = n;
  p.lambda = lambda;
  p.mu = lambda / 2;
  const double nd = n;

  std::vector<double> w_prime(lambda);
  for (int i = 1; i <= lambda; ++i) w_prime[i - 1] = std::log((lambda + 1) / 2.0) - std::log(i);

  double sum_pos = 0, sum_pos_sq = 0, sum_neg = 0, sum_neg_sq = 0;
  for (int i = 0; i < lambda; ++i) {
    if (i < p.mu) {
      sum_pos += w_prime[i];
      sum_pos_sq += w_prime[i] * w_prime[i];
    } else {
      sum_neg += w_prime[i];
      sum_neg_sq += w_prime[i] * w_prime[i];
    }
  }
  p.mu_eff = sum_pos * sum_pos / sum_pos_sq;
  p.mu_eff_minus = sum_neg_sq > 0 ? sum_neg * sum_neg / sum_neg_sq : 0.0;

  p.c_sigma = (p.mu_eff + 2.0) / (nd + p.mu_eff + 5.0);
  p.d_sigma = 1.0 + 2.0 * std::max(0.0, std::sqrt((p.mu_eff - 1.0) / (nd + 1.0)) - 1.0) + p.c_sigma;
  p.c_c = (4.0 + p.mu_eff / nd) / (nd + 4.0 + 2.0 * p.mu_eff / nd);
  p.c_1 = 2.0 / ((nd + 1.3) * (nd + 1.3) + p.mu_eff);
  p.c_mu = std::min(1.0 - p.c_1,
                    2.0 * (0.25 + p.mu_eff + 1.0 / p.mu_eff - 2.0) / ((nd + 2.0) * (nd + 2.0) + p.mu_eff));
  if (diagonal) {
    const double factor = (nd + 2.0) / 3.0;
    p.c_1 = std::min(1.0, p.c_1 * factor);
    p.c_mu = std::min(1.0 - p.c_1, p.c_mu * factor);
  }
  p.alpha_minus = diagonal ? 0.0
                           : std::min({1.0 + p.c_1 / p.c_mu, 1.0 + 2.0 * p.mu_eff_minus / (p.mu_eff + 2.0),
                                       (1.0 - p.c_1 - p.c_mu) / (nd * p.c_mu)});

  // Σ_{w'>0} w' uses the strictly positive w'; with odd λ the middle w' is 0 and belongs to neither.
  double sum_w_positive = 0, sum_w_negative_abs = 0;
  for (double w : w_prime) (w > 0 ? sum_w_positive : sum_w_negative_abs) += std::abs(w);
  p.weights.resize(lambda);
  for (int i = 0; i < lambda; ++i) {
    p.weights[i] = w_prime[i] >= 0 ? w_prime[i] / sum_w_positive
                                   : p.alpha_minus * w_prime[i] / sum_w_negative_abs;
  }
  p.chi_n = std::sqrt(nd) * (1.0 - 1.0 / (4.0 * nd) + 1.0 / (21.0 * nd * nd));
  p.eigen_gap = std::max(1, static_cast<int>(std::floor(1.0 / (10.0 * nd * (p.c_1 + p.c_mu)))));
  return p;
}

double CmaParameters::SumOfWeights() const {
  double sum = 0;
  for (double w : weights) sum += w;
  return sum;
}

}  // namespace ogive::search
