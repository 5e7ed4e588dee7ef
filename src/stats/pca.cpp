// GCC 12 reports a false -Wmaybe-uninitialized inside Eigen's symmetric and triangular
// matrix-vector kernels (instantiated by the eigensolver and QR below); the state must be set
// before Eigen/Core is first read for it to reach those kernels.
#pragma GCC diagnostic push
#pragma GCC diagnostic ignored "-Wmaybe-uninitialized"
#include "plaudit/stats/pca.h"

#include <algorithm>
#include <cmath>
#include <random>
#include <stdexcept>
#include <string>

#include <Eigen/Eigenvalues>
#include <Eigen/QR>

namespace plaudit::stats {
namespace {

constexpr Eigen::Index kRowBlock = 4096;
constexpr Eigen::Index kOversample = 10;
constexpr int kMaxSweeps = 100;

// Eigenvector signs are arbitrary; fix them so repeated runs and tests compare equal.
void FixSigns(Eigen::MatrixXd& directions) {
  for (Eigen::Index c = 0; c < directions.cols(); ++c) {
    Eigen::Index at = 0;
    directions.col(c).cwiseAbs().maxCoeff(&at);
    if (directions(at, c) < 0.0) directions.col(c) *= -1.0;
  }
}

PrincipalAxes DenseTop(const Eigen::MatrixXd& m, Eigen::Index k) {
  const Eigen::SelfAdjointEigenSolver<Eigen::MatrixXd> solver(m);
  if (solver.info() != Eigen::Success) {
    throw std::runtime_error("principal directions: symmetric eigensolver did not converge");
  }
  PrincipalAxes out;
  out.directions = solver.eigenvectors().rightCols(k).rowwise().reverse();
  out.moments = solver.eigenvalues().tail(k).reverse();
  return out;
}

Eigen::MatrixXd OrthonormalBasis(const Eigen::MatrixXd& block) {
  const Eigen::HouseholderQR<Eigen::MatrixXd> qr(block);
  Eigen::MatrixXd q = Eigen::MatrixXd::Identity(block.rows(), block.cols());
  qr.householderQ().applyThisOnTheLeft(q);
  return q;
}

// Block subspace iteration with Rayleigh-Ritz: converges for the leading k eigenpairs at the
// rate (lambda_{b+1} / lambda_k) per sweep, b = k + oversampling. Stops when the leading Ritz
// residuals are small against the largest eigenvalue.
PrincipalAxes SubspaceTop(const Eigen::MatrixXd& m, Eigen::Index k, std::uint64_t seed) {
  const Eigen::Index d = m.rows();
  const Eigen::Index b = std::min(d, k + kOversample);
  std::mt19937_64 rng(seed);
  std::normal_distribution<double> normal(0.0, 1.0);
  Eigen::MatrixXd q(d, b);
  for (Eigen::Index j = 0; j < b; ++j) {
    for (Eigen::Index i = 0; i < d; ++i) q(i, j) = normal(rng);
  }
  q = OrthonormalBasis(q);
  Eigen::MatrixXd ritz_vectors;
  Eigen::VectorXd ritz_values, previous;
  for (int sweep = 0; sweep < kMaxSweeps; ++sweep) {
    const Eigen::MatrixXd mq = m * q;
    const Eigen::SelfAdjointEigenSolver<Eigen::MatrixXd> small(q.transpose() * mq);
    ritz_vectors = q * small.eigenvectors().rightCols(k).rowwise().reverse();
    ritz_values = small.eigenvalues().tail(k).reverse();
    const double scale = std::max(std::abs(ritz_values(0)), 1e-300);
    const Eigen::MatrixXd residual =
        m * ritz_vectors - ritz_vectors * ritz_values.asDiagonal();
    if (residual.colwise().norm().maxCoeff() <= 1e-10 * scale) break;
    // Without a gap the vectors wander inside a near-degenerate subspace while the moments have
    // settled; any basis of that subspace captures the same second moment, so stop there.
    if (sweep > 0 && (ritz_values - previous).cwiseAbs().maxCoeff() <= 1e-13 * scale) break;
    previous = ritz_values;
    q = OrthonormalBasis(mq);
  }
  PrincipalAxes out;
  out.directions = ritz_vectors;
  out.moments = ritz_values;
  return out;
}

}  // namespace

PrincipalAxes TopEigenpairs(const Eigen::MatrixXd& symmetric, Eigen::Index k, std::uint64_t seed) {
  const Eigen::Index d = symmetric.rows();
  if (symmetric.cols() != d || k < 1 || k > d) {
    throw std::invalid_argument("principal directions: need a square matrix and 1 <= k <= d, got " +
                                std::to_string(d) + " x " + std::to_string(symmetric.cols()) +
                                " and k = " + std::to_string(k));
  }
  PrincipalAxes out = d <= kDenseEigenLimit ? DenseTop(symmetric, k) : SubspaceTop(symmetric, k, seed);
  FixSigns(out.directions);
  out.total = symmetric.trace();
  return out;
}

Eigen::MatrixXd SecondMoment(const Eigen::MatrixXd& x, bool centre) {
  const Eigen::Index n = x.rows();
  const Eigen::Index d = x.cols();
  if (n < 1) throw std::invalid_argument("second moment of an empty data matrix");
  const Eigen::RowVectorXd mean =
      centre ? Eigen::RowVectorXd(x.colwise().mean()) : Eigen::RowVectorXd::Zero(d);
  Eigen::MatrixXd sum = Eigen::MatrixXd::Zero(d, d);
  for (Eigen::Index start = 0; start < n; start += kRowBlock) {
    const Eigen::Index rows = std::min(kRowBlock, n - start);
    const Eigen::MatrixXd block = x.middleRows(start, rows).rowwise() - mean;
    sum.selfadjointView<Eigen::Lower>().rankUpdate(block.transpose());
  }
  Eigen::MatrixXd full = sum.selfadjointView<Eigen::Lower>();
  return full / static_cast<double>(n);
}

PrincipalAxes PrincipalDirections(const Eigen::MatrixXd& x, Eigen::Index k, bool centre,
                                  std::uint64_t seed) {
  return TopEigenpairs(SecondMoment(x, centre), k, seed);
}

}  // namespace plaudit::stats

#pragma GCC diagnostic pop
