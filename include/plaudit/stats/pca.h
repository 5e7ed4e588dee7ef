#pragma once
// Principal directions of a data matrix: the leading eigenvectors of its (centred or uncentred)
// second-moment matrix (1/N) X^T X. Small dimensions use a dense symmetric eigensolver; large
// ones use block subspace iteration with Rayleigh-Ritz, seeded, so results are deterministic.
#include <cstdint>

#include <Eigen/Core>

namespace plaudit::stats {

struct PrincipalAxes {
  Eigen::MatrixXd directions;  // d x k, orthonormal columns, largest moment first
  Eigen::VectorXd moments;     // k eigenvalues of the second-moment matrix, decreasing
  double total = 0.0;          // trace of the second-moment matrix (sum of all d eigenvalues)
};

// Dimension above which TopEigenpairs switches from the dense solver to subspace iteration.
inline constexpr Eigen::Index kDenseEigenLimit = 512;

// The k leading eigenpairs of a symmetric positive semidefinite d x d matrix (1 <= k <= d).
// `seed` is used only by subspace iteration (d > kDenseEigenLimit), which stops when the Ritz
// residuals fall below 1e-10 of the top moment, when the Ritz values settle, or after 100 sweeps:
// in a spectrum without gaps the directions are then a basis of a near-leading subspace. Signs are fixed so that the
// largest-magnitude entry of each direction is positive.
PrincipalAxes TopEigenpairs(const Eigen::MatrixXd& symmetric, Eigen::Index k,
                            std::uint64_t seed = 0);

// (1/N) X^T X of the rows of x, after subtracting the column means when `centre` is true;
// accumulated over blocks of rows.
Eigen::MatrixXd SecondMoment(const Eigen::MatrixXd& x, bool centre);

// The k principal directions of the rows of x (N >= 1 rows, 1 <= k <= d).
PrincipalAxes PrincipalDirections(const Eigen::MatrixXd& x, Eigen::Index k, bool centre,
                                  std::uint64_t seed = 0);

}  // namespace plaudit::stats
