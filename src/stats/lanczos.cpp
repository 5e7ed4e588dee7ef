#include "plaudit/stats/lanczos.h"

#include <algorithm>
#include <chrono>
#include <cmath>
#include <random>
#include <stdexcept>
#include <string>
#include <vector>

#include <Eigen/Eigenvalues>

namespace plaudit::stats {
namespace {

// beta_j below this fraction of ||T_j|| is an invariant subspace: the next vector would be
// rounding noise, not a direction of the Krylov space.
constexpr double kBreakdown = 1e-12;

void Validate(Eigen::Index n, const LanczosOptions& o) {
  auto bad = [](const std::string& what) { throw std::invalid_argument("Lanczos: " + what); };
  if (n < 1) bad("the operator's dimension must be >= 1");
  if (o.max_iterations < 1) bad("max_iterations must be >= 1");
  if (!(o.tolerance > 0.0) || !std::isfinite(o.tolerance)) bad("tolerance must be positive and finite");
  if (!(o.max_seconds >= 0.0) || !std::isfinite(o.max_seconds)) bad("max_seconds must be >= 0 and finite");
}

Eigen::VectorXd StartVector(Eigen::Index n, std::uint64_t seed) {
  std::mt19937_64 rng(seed);
  std::normal_distribution<double> normal(0.0, 1.0);
  Eigen::VectorXd q(n);
  for (Eigen::Index i = 0; i < n; ++i) q(i) = normal(rng);
  const double norm = q.norm();
  if (norm > 0.0) return q / norm;
  q.setZero();  // probability zero; keeps the iteration defined
  q(0) = 1.0;
  return q;
}

}  // namespace

LanczosResult LanczosExtremes(const SymmetricOperator& op, Eigen::Index n, const LanczosOptions& options) {
  Validate(n, options);
  using Clock = std::chrono::steady_clock;
  const auto started = Clock::now();
  auto elapsed = [&] { return std::chrono::duration<double>(Clock::now() - started).count(); };

  const Eigen::Index cap = std::min<Eigen::Index>(options.max_iterations, n);
  Eigen::MatrixXd basis(n, cap);  // Q: the Lanczos vectors as columns
  std::vector<double> alpha, beta;
  Eigen::VectorXd q = StartVector(n, options.seed);
  Eigen::VectorXd w(n);
  basis.col(0) = q;

  LanczosResult r;
  Eigen::SelfAdjointEigenSolver<Eigen::MatrixXd> ritz;
  for (Eigen::Index j = 0; j < cap; ++j) {
    w.setZero();
    op(q, w);
    ++r.applications;
    if (w.size() != n) throw std::invalid_argument("Lanczos: the operator changed the vector's size");
    const double a = q.dot(w);
    w -= a * q;
    if (j > 0) w -= beta.back() * basis.col(j - 1);
    const auto kept = basis.leftCols(j + 1);
    for (int pass = 0; pass < 2; ++pass) w.noalias() -= kept * (kept.transpose() * w);
    const double b = w.norm();
    alpha.push_back(a);
    beta.push_back(b);
    r.iterations = static_cast<int>(j + 1);

    const Eigen::Index k = j + 1;
    const Eigen::VectorXd diag = Eigen::Map<const Eigen::VectorXd>(alpha.data(), k);
    const Eigen::VectorXd sub = k > 1 ? Eigen::VectorXd(Eigen::Map<const Eigen::VectorXd>(beta.data(), k - 1))
                                      : Eigen::VectorXd();
    ritz.computeFromTridiagonal(diag, sub, Eigen::ComputeEigenvectors);
    const Eigen::VectorXd& theta = ritz.eigenvalues();
    const Eigen::MatrixXd& s = ritz.eigenvectors();
    r.min = theta(0);
    r.max = theta(k - 1);
    r.min_residual = b * std::abs(s(k - 1, 0));
    r.max_residual = b * std::abs(s(k - 1, k - 1));
    const double scale = std::max(std::abs(r.min), std::abs(r.max));  // ||T_j||_2
    if (b == 0.0 || b <= kBreakdown * scale) {
      r.invariant_subspace = true;
      r.converged = true;
      r.min_residual = r.max_residual = 0.0;
      break;
    }
    if (r.min_residual <= options.tolerance * scale && r.max_residual <= options.tolerance * scale) {
      r.converged = true;
      break;
    }
    if (options.max_seconds > 0.0 && elapsed() > options.max_seconds) {
      r.stopped_by_time = true;
      break;
    }
    if (k == cap) break;
    q = w / b;
    basis.col(k) = q;
  }

  const Eigen::Index k = r.iterations;
  r.ritz_values = ritz.eigenvalues();
  r.min_vector = basis.leftCols(k) * ritz.eigenvectors().col(0);
  const double norm = r.min_vector.norm();
  if (norm > 0.0) r.min_vector /= norm;
  r.seconds = elapsed();
  return r;
}

}  // namespace plaudit::stats
