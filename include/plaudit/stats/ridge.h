#pragma once
// Ridge regression of targets R (N x k) on features F (N x M) with an unpenalised intercept:
//     minimise  ||R - 1 b^T - F W||_F^2 + lambda ||W||_F^2
// (scikit-learn's Ridge with alpha = lambda). The intercept is handled by centring F and R on
// the rows being fitted, so W = (G + lambda I)^{-1} F_c^T R_c with G = F_c^T F_c.
//
// One factorisation per fit serves every ridge strength and every target column: G (M x M, or
// the N x N kernel K = F_c F_c^T when fewer rows than features) is reduced once to symmetric
// tridiagonal form G = Q T Q^T by Householder reflections, the first stage of a symmetric
// eigendecomposition. Then (G + lambda I)^{-1} = Q (T + lambda I)^{-1} Q^T, and the shifted
// tridiagonal solve costs O(M) per column, so a whole ridge grid for thousands of columns
// (stacked permutations of R) costs one matrix product per strength. Finishing the
// eigendecomposition (QR iteration on T with vector accumulation) would add about eight times
// the cost of the reduction and buy nothing here, because only shifted solves are needed.
//
// Cross-fitting forms the fold Grams once and the training Grams by subtraction,
// G_train = G_total - G_fold, with the centring corrected by rank-one terms.
#include <functional>
#include <vector>

#include <Eigen/Core>

#include "plaudit/stats/folds.h"

namespace plaudit::stats {

// `count` values log-spaced from `low` to `high` inclusive (count == 1: sqrt(low * high)).
// Needs count >= 1 and 0 < low <= high (std::invalid_argument otherwise).
std::vector<double> LogRidgeGrid(int count, double low = 1e-6, double high = 10.0);

struct RidgeStrengths {
  std::vector<double> values;  // each > 0 and finite
  // true: lambda = value * trace(G) / M for the Gram G being factorised (scale-free: the same
  // values suit features of any size); false: lambda = value (scikit-learn's alpha).
  bool relative = true;
};

struct RidgeCoefficients {
  double lambda = 0.0;           // absolute strength used
  Eigen::MatrixXd weights;       // M x k
  Eigen::RowVectorXd intercept;  // 1 x k
};

// Ridge fits on all rows, one per strength, from one factorisation. Needs N >= 1 rows in both
// matrices and M >= 1 (std::invalid_argument otherwise). When trace(G) = 0 (every feature
// constant) a relative strength gives zero weights.
std::vector<RidgeCoefficients> FitRidge(const Eigen::MatrixXd& features,
                                        const Eigen::MatrixXd& targets,
                                        const RidgeStrengths& strengths);

// One fold's fit evaluated at its held-out rows (and at any extra rows asked for).
struct RidgeFoldFit {
  int fold = 0;
  std::vector<double> lambdas;           // absolute strength per grid value, on this fold
  std::vector<Eigen::MatrixXd> held_out; // per strength: n_fold x k predictions, in fold row order
  std::vector<Eigen::MatrixXd> extra;    // per strength: predictions at extra_rows[fold]
};

struct RidgeCrossFitOptions {
  int threads = 1;       // folds processed concurrently (>= 1); results do not depend on it
  FoldList extra_rows;   // empty, or one row list per fold (any rows, e.g. training rows)
  // Run the two large products of the prediction step (rows x Q and that times the shifted
  // solves) in single precision: about twice as fast, with predictions accurate to ~1e-6
  // relative instead of ~1e-12. The Grams and the factorisation stay in double precision.
  bool single_precision_products = false;
};

// Cross-fitted ridge: for each fold, fit on every other row and predict the fold's rows.
// `folds` must partition 0..N-1 (ValidatePartition). `visit` is called once per fold, possibly
// concurrently from different threads for different folds; exceptions propagate.
void RidgeCrossFit(const Eigen::MatrixXd& features, const Eigen::MatrixXd& targets,
                   const FoldList& folds, const RidgeStrengths& strengths,
                   const RidgeCrossFitOptions& options,
                   const std::function<void(const RidgeFoldFit&)>& visit);

// Held-out mean squared error (over rows and target columns) of each fold and strength:
// folds x strengths, the per-fold scores scikit-learn's cross_val_score reports (negated).
Eigen::MatrixXd RidgeCvMeanSquaredError(const Eigen::MatrixXd& features,
                                        const Eigen::MatrixXd& targets, const FoldList& folds,
                                        const RidgeStrengths& strengths, int threads = 1);

}  // namespace plaudit::stats
