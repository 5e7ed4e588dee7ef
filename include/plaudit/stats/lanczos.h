#pragma once
// The extreme eigenvalues of a symmetric operator known only through products A v, by the
// Lanczos iteration with full reorthogonalization (Golub & Van Loan, "Matrix Computations",
// 4th ed., sections 10.1-10.3).
//
// From a seeded random unit vector q_1, step j computes w = A q_j, alpha_j = q_j . w,
// w -= alpha_j q_j + beta_{j-1} q_{j-1}, then removes the components of w along every stored
// q_i twice (classical Gram-Schmidt twice is enough to keep Q orthonormal to rounding), and
// sets beta_j = ||w||, q_{j+1} = w / beta_j. The Ritz values of the j x j tridiagonal T_j
// always lie inside [lambda_min(A), lambda_max(A)] and the Ritz vector y = Q_j s of a Ritz
// value theta has Rayleigh quotient y.Ay = theta and residual ||A y - theta y|| = beta_j |s_j|
// (s_j: the last component of s). Full reorthogonalization costs O(n j) per step and n x j
// doubles of memory, and rules out the spurious copies of converged Ritz values that plain
// Lanczos produces.
//
// Stops when
//   - both extreme Ritz residuals are <= tolerance * max(|theta_min|, |theta_max|): converged;
//   - beta_j <= 1e-12 * ||T_j|| (an invariant subspace): converged, and because a random start
//     vector has a component along every eigenvector with probability 1, the Krylov subspace
//     then holds every distinct eigenvalue and the extremes are exact to rounding;
//   - j reaches max_iterations or the dimension n;
//   - the wall-clock time exceeds max_seconds (> 0), checked after each product. Only then
//     does the result depend on the machine; the result says so.
#include <cstdint>
#include <functional>

#include <Eigen/Core>

namespace plaudit::stats {

// out = A in, for a symmetric A; `out` arrives sized to in.size() and may hold anything.
using SymmetricOperator = std::function<void(const Eigen::VectorXd& in, Eigen::VectorXd& out)>;

struct LanczosOptions {
  int max_iterations = 100;  // products of A at most (and at most n); >= 1
  double tolerance = 1e-8;   // Ritz residual, relative to the largest |Ritz value|; > 0
  double max_seconds = 0.0;  // wall-clock cap; 0 = none; >= 0
  std::uint64_t seed = 0;    // start vector: i.i.d. N(0, 1) entries from mt19937_64(seed), normalised
};

struct LanczosResult {
  double min = 0.0;              // smallest Ritz value: an upper bound on lambda_min(A)
  double max = 0.0;              // largest Ritz value: a lower bound on lambda_max(A)
  Eigen::VectorXd min_vector;    // unit Ritz vector of `min` (n)
  double min_residual = 0.0;     // ||A y - min y||, from the recurrence
  double max_residual = 0.0;     // same for `max`
  Eigen::VectorXd ritz_values;   // all Ritz values of the final T, ascending
  int iterations = 0;            // Lanczos steps taken
  int applications = 0;          // products A v (one per step)
  bool converged = false;        // by the residual test or an invariant subspace
  bool invariant_subspace = false;
  bool stopped_by_time = false;
  double seconds = 0.0;
};

// Throws std::invalid_argument for n < 1 or options out of range.
LanczosResult LanczosExtremes(const SymmetricOperator& op, Eigen::Index n,
                              const LanczosOptions& options = {});

}  // namespace plaudit::stats
