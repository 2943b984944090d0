// BbobFunction: a few of the noiseless BBOB benchmark functions (sphere, separable ellipsoid,
// Rosenbrock, rotated ellipsoid, rotated Rastrigin) with seeded random instances, for tests and
// benchmarks of the search core. The transformations they are built from are exposed as free
// functions so that tests can check them on their own.
//
// Source: N. Hansen, S. Finck, R. Ros, A. Auger, "Real-Parameter Black-Box Optimization
// Benchmarking 2009: Noiseless Functions Definitions", INRIA research report RR-6829. All formulas
// here are written from memory of that report, not re-read; where this code departs from the
// report on purpose, the comment says so.
#ifndef OGIVE_TESTS_SUPPORT_BBOB_H_
#define OGIVE_TESTS_SUPPORT_BBOB_H_

#include <cmath>
#include <cstdint>
#include <random>

#include <Eigen/Core>

namespace ogive::testing {

// T_osz, the oscillation transformation of RR-6829 (from memory), for one coordinate:
//   x_hat = ln|x| (0 when x == 0); c1 = 10, c2 = 7.9 when x > 0, else c1 = 5.5, c2 = 3.1;
//   T_osz(x) = sign(x) * exp(x_hat + 0.049 * (sin(c1 * x_hat) + sin(c2 * x_hat))).
double Tosz(double x);

// T_osz applied to every coordinate.
Eigen::VectorXd Tosz(const Eigen::VectorXd& x);

// T_asy^beta, the asymmetry transformation of RR-6829 (from memory), with 1-based i:
//   T_asy(x)_i = x_i^(1 + beta * (i - 1) / (n - 1) * sqrt(x_i)) when x_i > 0, else x_i.
// The ratio (i - 1) / (n - 1) is taken as 0 when n == 1.
Eigen::VectorXd Tasy(const Eigen::VectorXd& x, double beta);

// The diagonal of Lambda^alpha of RR-6829 (from memory): alpha^((i - 1) / (2 (n - 1))), 1-based i,
// with the ratio taken as 0 when n == 1.
Eigen::VectorXd LambdaDiagonal(int n, double alpha);

// A random n x n orthogonal matrix: the Q factor of a Householder QR of a matrix of independent
// standard normal entries, with each column's sign flipped so that the diagonal of the R factor is
// positive (this makes the distribution uniform over the orthogonal group; Mezzadri, "How to
// generate random matrices from the classical compact groups", Notices of the AMS 54(5), 2007 --
// from memory). The normal draws are made from the raw 64-bit output of `rng` by Box-Muller, not
// by std::normal_distribution, so the matrix is the same with every standard library.
Eigen::MatrixXd RandomRotation(int n, std::mt19937_64& rng);

// One instance of one BBOB function in dimension n. Cheap to copy for the unrotated functions; the
// rotated ones carry two or three n x n matrices.
// The Gaussian noise model of the noisy BBOB suite (Hansen, Auger, Finck, Ros, INRIA RR-6869, from
// memory): f_GN(f, β) = f · exp(β N(0, 1)), applied to f − f_opt, plus 1.01·10⁻⁸, and only where
// f − f_opt ≥ 10⁻⁸ (below it the value is exact). β = 0.01 is the suite's moderate noise (f101,
// f104), β = 1 its severe noise (f116). `normal` is one N(0, 1) deviate.
inline double NoisyGap(double gap, double beta, double normal) {
  if (gap < 1e-8) return gap;
  return gap * std::exp(beta * normal) + 1.01e-8;
}

class BbobFunction {
 public:
  // function_id must be 1, 2, 8, 10, 11, 15, or 101, 104, 116 (the noise-free part of those noisy
  // functions, RR-6869; the noise is the caller's: NoisyGap) and n >= 1 (checked; aborts otherwise). The instance is
  // drawn from std::mt19937_64 seeded with instance_seed, in this order: x_opt (uniform in
  // [-4, 4]^n), f_opt, then R and Q when the function uses them. Same arguments, same instance.
  static BbobFunction Create(int function_id, int n, uint64_t instance_seed);

  // The function value at x; x.size() must be n() (checked).
  double operator()(const Eigen::VectorXd& x) const;

  const Eigen::VectorXd& x_opt() const { return x_opt_; }
  double f_opt() const { return f_opt_; }
  int n() const { return n_; }
  int id() const { return id_; }

  // The rotations of the instance. R is used by f10, f11 and f15, Q by f15 only; for a function that
  // does not use one, it is an empty (0 x 0) matrix.
  const Eigen::MatrixXd& r() const { return r_; }
  const Eigen::MatrixXd& q() const { return q_; }

 private:
  BbobFunction() = default;

  int id_ = 0;
  int n_ = 0;
  Eigen::VectorXd x_opt_;
  double f_opt_ = 0.0;
  Eigen::MatrixXd r_;
  Eigen::MatrixXd q_;
  // Derived at creation: the ellipsoid's axis weights (f2, f10), the Rosenbrock scale (f8) and the
  // product R * Lambda^10 * Q (f15).
  Eigen::VectorXd weights_;
  double rosenbrock_scale_ = 1.0;
  Eigen::MatrixXd rlq_;
};

}  // namespace ogive::testing

#endif  // OGIVE_TESTS_SUPPORT_BBOB_H_
