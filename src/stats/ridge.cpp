#include "plaudit/stats/ridge.h"

#include <cmath>
#include <stdexcept>
#include <string>

#include <Eigen/Eigenvalues>

namespace plaudit::stats {
namespace {

using Eigen::Index;
using Eigen::MatrixXd;
using Eigen::RowVectorXd;

// G = Q T Q^T with T symmetric tridiagonal.
struct Reduction {
  MatrixXd q;
  Eigen::VectorXd diag;
  Eigen::VectorXd sub;
  double trace = 0.0;
};

// `sym` must hold the full symmetric matrix.
Reduction Reduce(const MatrixXd& sym) {
  Reduction r;
  r.trace = sym.trace();
  if (sym.rows() == 1) {
    r.q = MatrixXd::Identity(1, 1);
    r.diag = sym.diagonal();
    r.sub.resize(0);
    return r;
  }
  Eigen::Tridiagonalization<MatrixXd> tri(sym);
  r.q = tri.matrixQ();
  r.diag = tri.diagonal();
  r.sub = tri.subDiagonal();
  return r;
}

// Y = (T + lambda I)^{-1} B by the LDL^T recurrence of a tridiagonal matrix, which is stable
// without pivoting because T + lambda I is positive definite. Works on B^T so that every step
// is a contiguous column operation over all right-hand sides.
MatrixXd SolveShifted(const Reduction& r, double lambda, const MatrixXd& b) {
  const Index m = r.diag.size();
  MatrixXd yt = b.transpose();
  Eigen::VectorXd pivot(m);
  Eigen::VectorXd factor(m);  // factor(i) = L(i, i-1)
  pivot(0) = r.diag(0) + lambda;
  factor(0) = 0.0;
  for (Index i = 1; i < m; ++i) {
    factor(i) = r.sub(i - 1) / pivot(i - 1);
    pivot(i) = r.diag(i) + lambda - factor(i) * r.sub(i - 1);
    yt.col(i) -= factor(i) * yt.col(i - 1);
  }
  yt.col(m - 1) /= pivot(m - 1);
  for (Index i = m - 2; i >= 0; --i) {
    yt.col(i) = yt.col(i) / pivot(i) - factor(i + 1) * yt.col(i + 1);
  }
  return yt.transpose();
}

void CheckStrengths(const RidgeStrengths& strengths) {
  if (strengths.values.empty()) throw std::invalid_argument("ridge: no strengths given");
  for (double v : strengths.values) {
    if (!(v > 0.0) || !std::isfinite(v)) {
      throw std::invalid_argument("ridge: strengths must be finite and > 0, got " + std::to_string(v));
    }
  }
}

void CheckShapes(const MatrixXd& features, const MatrixXd& targets) {
  if (features.rows() < 1 || features.cols() < 1 || targets.cols() < 1 ||
      targets.rows() != features.rows()) {
    throw std::invalid_argument("ridge: features " + std::to_string(features.rows()) + " x " +
                                std::to_string(features.cols()) + " and targets " +
                                std::to_string(targets.rows()) + " x " +
                                std::to_string(targets.cols()) + " do not fit");
  }
}

double AbsoluteStrength(const RidgeStrengths& s, std::size_t j, double trace, Index m) {
  return s.relative ? s.values[j] * trace / static_cast<double>(m) : s.values[j];
}

void SymmetriseFromLower(MatrixXd& g) {
  g.triangularView<Eigen::StrictlyUpper>() = g.transpose();
}

// Sufficient statistics of one fold's rows, after the global centring.
struct FoldBlock {
  MatrixXd f;        // n_f x M centred features
  MatrixXd r;        // n_f x k centred targets
  MatrixXd gram;     // lower triangle of f^T f (empty when no fold needs the primal form)
  MatrixXd cross;    // f^T r
  RowVectorXd fsum;  // column sums of f
  RowVectorXd rsum;  // column sums of r
};

// The training-side factorisation of one fold, in primal (M x M) or dual (n_t x n_t) form.
struct TrainingFit {
  Reduction red;
  MatrixXd rhs;  // Q^T (F_t^T R_t) primal, Q^T R_t dual
  MatrixXd map;  // maps centred feature rows to the reduced coordinates: Q (primal), F_t^T Q (dual)
  RowVectorXd fmean;  // training means of the centred features / targets
  RowVectorXd rmean;
};

TrainingFit FitPrimal(const FoldBlock& fold, const MatrixXd& gram_total, const MatrixXd& cross_total,
                      const RowVectorXd& fsum, const RowVectorXd& rsum, double n_train) {
  TrainingFit t;
  t.fmean = (fsum - fold.fsum) / n_train;
  t.rmean = (rsum - fold.rsum) / n_train;
  MatrixXd g = gram_total - fold.gram;
  SymmetriseFromLower(g);
  g.noalias() -= n_train * (t.fmean.transpose() * t.fmean);
  const MatrixXd cross = cross_total - fold.cross - n_train * (t.fmean.transpose() * t.rmean);
  t.red = Reduce(g);
  t.rhs.noalias() = t.red.q.transpose() * cross;
  t.map = std::move(t.red.q);
  return t;
}

TrainingFit FitDual(const std::vector<FoldBlock>& blocks, std::size_t held, Index n_train) {
  const Index m = blocks[held].f.cols();
  const Index k = blocks[held].r.cols();
  MatrixXd ft(n_train, m);
  MatrixXd rt(n_train, k);
  Index at = 0;
  for (std::size_t b = 0; b < blocks.size(); ++b) {
    if (b == held) continue;
    ft.middleRows(at, blocks[b].f.rows()) = blocks[b].f;
    rt.middleRows(at, blocks[b].r.rows()) = blocks[b].r;
    at += blocks[b].f.rows();
  }
  TrainingFit t;
  t.fmean = ft.colwise().mean();
  t.rmean = rt.colwise().mean();
  ft.rowwise() -= t.fmean;
  rt.rowwise() -= t.rmean;
  const MatrixXd kernel = ft * ft.transpose();
  t.red = Reduce(kernel);
  t.rhs.noalias() = t.red.q.transpose() * rt;
  t.map.noalias() = ft.transpose() * t.red.q;
  return t;
}

// Predictions of the fit at centred feature rows `rows`, one matrix per strength.
template <typename Scalar>
std::vector<MatrixXd> PredictAt(const TrainingFit& t, const MatrixXd& rows, const std::vector<double>& lambdas,
                                const RowVectorXd& offset) {
  using Matrix = Eigen::Matrix<Scalar, Eigen::Dynamic, Eigen::Dynamic>;
  const Matrix centred = (rows.rowwise() - t.fmean).template cast<Scalar>();
  const Matrix projected = centred * t.map.template cast<Scalar>();
  std::vector<MatrixXd> out;
  out.reserve(lambdas.size());
  for (double lambda : lambdas) {
    MatrixXd pred(rows.rows(), t.rhs.cols());
    if (lambda > 0.0) {
      const Matrix solved = SolveShifted(t.red, lambda, t.rhs).template cast<Scalar>();
      pred = (projected * solved).template cast<double>();
    } else {
      pred.setZero();  // relative strength on constant features: the fit is the mean
    }
    pred.rowwise() += offset + t.rmean;
    out.push_back(std::move(pred));
  }
  return out;
}

std::vector<MatrixXd> PredictAt(const TrainingFit& t, const MatrixXd& rows, const std::vector<double>& lambdas,
                                const RowVectorXd& offset, bool single) {
  return single ? PredictAt<float>(t, rows, lambdas, offset) : PredictAt<double>(t, rows, lambdas, offset);
}

}  // namespace

std::vector<double> LogRidgeGrid(int count, double low, double high) {
  if (count < 1 || !(low > 0.0) || !(high >= low) || !std::isfinite(high)) {
    throw std::invalid_argument("ridge grid: need count >= 1 and 0 < low <= high");
  }
  if (count == 1) return {std::sqrt(low * high)};
  std::vector<double> grid(static_cast<std::size_t>(count));
  const double step = std::log(high / low) / (count - 1);
  for (int j = 0; j < count; ++j) grid[static_cast<std::size_t>(j)] = low * std::exp(step * j);
  grid.back() = high;
  return grid;
}

std::vector<RidgeCoefficients> FitRidge(const MatrixXd& features, const MatrixXd& targets,
                                        const RidgeStrengths& strengths) {
  CheckShapes(features, targets);
  CheckStrengths(strengths);
  const Index n = features.rows();
  const Index m = features.cols();
  const RowVectorXd fmean = features.colwise().mean();
  const RowVectorXd rmean = targets.colwise().mean();
  const MatrixXd fc = features.rowwise() - fmean;
  const MatrixXd rc = targets.rowwise() - rmean;
  const bool primal = n >= m;
  const Reduction red = Reduce(primal ? MatrixXd(fc.transpose() * fc) : MatrixXd(fc * fc.transpose()));
  const MatrixXd rhs = red.q.transpose() * (primal ? MatrixXd(fc.transpose() * rc) : rc);
  std::vector<RidgeCoefficients> fits;
  for (std::size_t j = 0; j < strengths.values.size(); ++j) {
    RidgeCoefficients c;
    c.lambda = AbsoluteStrength(strengths, j, red.trace, m);
    if (c.lambda > 0.0) {
      const MatrixXd y = SolveShifted(red, c.lambda, rhs);
      c.weights = primal ? MatrixXd(red.q * y) : MatrixXd(fc.transpose() * (red.q * y));
    } else {
      c.weights = MatrixXd::Zero(m, targets.cols());
    }
    c.intercept = rmean - fmean * c.weights;
    fits.push_back(std::move(c));
  }
  return fits;
}

void RidgeCrossFit(const MatrixXd& features, const MatrixXd& targets, const FoldList& folds,
                   const RidgeStrengths& strengths, const RidgeCrossFitOptions& options,
                   const std::function<void(const RidgeFoldFit&)>& visit) {
  CheckShapes(features, targets);
  CheckStrengths(strengths);
  const Index n = features.rows();
  const Index m = features.cols();
  ValidatePartition(folds, n);
  if (!options.extra_rows.empty() && options.extra_rows.size() != folds.size()) {
    throw std::invalid_argument("ridge: extra_rows must be empty or have one list per fold");
  }
  const int count = static_cast<int>(folds.size());
  // Centring on the global means first keeps the Gram subtraction free of cancellation; the
  // training-fold centring is then a small rank-one correction.
  const RowVectorXd fmean = features.colwise().mean();
  const RowVectorXd rmean = targets.colwise().mean();
  bool any_primal = false;
  for (const RowList& fold : folds) any_primal |= n - static_cast<Index>(fold.size()) >= m;

  std::vector<FoldBlock> blocks(folds.size());
  ForEachFold(count, options.threads, [&](int f) {
    FoldBlock& b = blocks[static_cast<std::size_t>(f)];
    const RowList& rows = folds[static_cast<std::size_t>(f)];
    b.f = features(rows, Eigen::all).rowwise() - fmean;
    b.r = targets(rows, Eigen::all).rowwise() - rmean;
    if (any_primal) {
      b.gram = MatrixXd::Zero(m, m);
      b.gram.selfadjointView<Eigen::Lower>().rankUpdate(b.f.transpose());
      b.cross.noalias() = b.f.transpose() * b.r;
    }
    b.fsum = b.f.colwise().sum();
    b.rsum = b.r.colwise().sum();
  });
  MatrixXd gram_total;
  MatrixXd cross_total;
  RowVectorXd fsum = RowVectorXd::Zero(m);
  RowVectorXd rsum = RowVectorXd::Zero(targets.cols());
  if (any_primal) {
    gram_total = MatrixXd::Zero(m, m);
    cross_total = MatrixXd::Zero(m, targets.cols());
  }
  for (const FoldBlock& b : blocks) {
    if (any_primal) {
      gram_total += b.gram;
      cross_total += b.cross;
    }
    fsum += b.fsum;
    rsum += b.rsum;
  }

  ForEachFold(count, options.threads, [&](int f) {
    const auto fi = static_cast<std::size_t>(f);
    const FoldBlock& b = blocks[fi];
    const Index n_train = n - b.f.rows();
    const TrainingFit t = n_train >= m
                              ? FitPrimal(b, gram_total, cross_total, fsum, rsum, static_cast<double>(n_train))
                              : FitDual(blocks, fi, n_train);
    RidgeFoldFit fit;
    fit.fold = f;
    for (std::size_t j = 0; j < strengths.values.size(); ++j) {
      fit.lambdas.push_back(AbsoluteStrength(strengths, j, t.red.trace, m));
    }
    fit.held_out = PredictAt(t, b.f, fit.lambdas, rmean, options.single_precision_products);
    if (!options.extra_rows.empty()) {
      const MatrixXd extra = features(options.extra_rows[fi], Eigen::all).rowwise() - fmean;
      fit.extra = PredictAt(t, extra, fit.lambdas, rmean, options.single_precision_products);
    }
    visit(fit);
  });
}

MatrixXd RidgeCvMeanSquaredError(const MatrixXd& features, const MatrixXd& targets,
                                 const FoldList& folds, const RidgeStrengths& strengths,
                                 int threads) {
  MatrixXd mse(static_cast<Index>(folds.size()), static_cast<Index>(strengths.values.size()));
  RidgeCrossFitOptions options;
  options.threads = threads;
  RidgeCrossFit(features, targets, folds, strengths, options, [&](const RidgeFoldFit& fit) {
    const MatrixXd truth = targets(folds[static_cast<std::size_t>(fit.fold)], Eigen::all);
    for (std::size_t j = 0; j < fit.held_out.size(); ++j) {
      mse(fit.fold, static_cast<Index>(j)) = (fit.held_out[j] - truth).squaredNorm() /
                                             static_cast<double>(truth.size());
    }
  });
  return mse;
}

}  // namespace plaudit::stats
