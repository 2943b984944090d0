// CmaParameters: the strategy parameters of CMA-ES for a dimension n and population size λ.
//
// Defaults of N. Hansen, "The CMA Evolution Strategy: A Tutorial", arXiv:1604.00772 (2016), Table 1:
//   μ = ⌊λ/2⌋,  w'_i = ln((λ+1)/2) − ln i,  μ_eff = (Σ_{i≤μ} w'_i)² / Σ_{i≤μ} w'_i²
//   c_1 = 2 / ((n+1.3)² + μ_eff)
//   c_μ = min(1 − c_1, 2 (1/4 + μ_eff + 1/μ_eff − 2) / ((n+2)² + μ_eff))
//   c_σ = (μ_eff + 2) / (n + μ_eff + 5),  d_σ = 1 + 2 max(0, √((μ_eff−1)/(n+1)) − 1) + c_σ
//   c_c = (4 + μ_eff/n) / (n + 4 + 2 μ_eff/n),  c_m = 1
//   α⁻ = min(1 + c_1/c_μ, 1 + 2 μ_eff⁻/(μ_eff + 2), (1 − c_1 − c_μ)/(n c_μ))
//   w_i = w'_i / Σ_{w'>0} w' (positive),  w_i = α⁻ w'_i / Σ_{w'<0} |w'| (negative, active CMA)
// For the diagonal model (sep-CMA-ES, Ros and Hansen, PPSN 2008) c_1 and c_μ are multiplied by
// (n + 2)/3 (factor from memory) and the negative weights are not used.
#ifndef OGIVE_SERVER_SEARCH_CMA_PARAMETERS_H_
#define OGIVE_SERVER_SEARCH_CMA_PARAMETERS_H_

#include <vector>

namespace ogive::search {

struct CmaParameters {
  int n = 0;
  int lambda = 0;
  int mu = 0;
  std::vector<double> weights;  // w_1..w_λ by rank, best first; positive then negative
  double mu_eff = 0.0;
  double mu_eff_minus = 0.0;
  double c_m = 1.0;
  double c_sigma = 0.0;
  double d_sigma = 0.0;
  double c_c = 0.0;
  double c_1 = 0.0;
  double c_mu = 0.0;
  double alpha_minus = 0.0;
  double chi_n = 0.0;      // E‖N(0,I)‖ by the tutorial's approximation √n (1 − 1/(4n) + 1/(21n²))
  int eigen_gap = 1;       // generations between eigendecompositions: max(1, ⌊1/(10 n (c_1 + c_μ))⌋)

  // The tutorial's defaults. REQUIRES: n >= 1, lambda >= 2.
  static CmaParameters Default(int n, int lambda, bool diagonal);

  // Sum of positive weights (1 by construction) and of all weights.
  double SumOfWeights() const;
};

// λ = 4 + ⌊3 ln n⌋ (the tutorial's default population size). REQUIRES: n >= 1.
int DefaultPopulationSize(int n);

// E‖N(0, I_n)‖ exactly: √2 Γ((n+1)/2) / Γ(n/2).
double ExpectedNormOfStandardNormal(int n);

}  // namespace ogive::search

#endif  // OGIVE_SERVER_SEARCH_CMA_PARAMETERS_H_
