#pragma once
// Floating-point operation counts of the measured work, one multiply-add counted as 2 flops,
// so that GFLOP/s figures compare directly with a GEMM's 2 m n k / t. Only the matrix
// products are counted: element-wise work (activations, the loss, gradient statistics, ridge
// shifted solves) is O(N n) beside O(N n^2) and is left out, which makes every bound below a
// lower bound on the time the work can take.
#include <Eigen/Core>

#include "plaudit/checks/residual_fit.h"
#include "plaudit/checks/support_spread.h"
#include "plaudit/model/network.h"

namespace plaudit::bench {

// Work split by the precision it runs in, so each part is divided by its own GEMM rate.
struct FlopCount {
  double dbl = 0.0;
  double sgl = 0.0;
  double total() const { return dbl + sgl; }
  FlopCount& operator+=(const FlopCount& o) {
    dbl += o.dbl;
    sgl += o.sgl;
    return *this;
  }
};

// 2 N sum_l n_l n_{l-1}: one forward pass over N rows.
double ForwardFlops(const model::Network& net, Eigen::Index rows);

// Backward pass down to layer `lowest` (0-based), as model::Evaluate runs it: for every layer
// l >= lowest the weight gradient delta_l^T a_{l-1} (2 N n_l n_{l-1}); for l > lowest also the
// propagation delta_l W_l to the layer below (2 N n_l n_{l-1}).
double BackwardFlops(const model::Network& net, Eigen::Index rows, int lowest);

// Forward plus backward over `snapshots` networks of this architecture.
double GradientPassFlops(const model::Network& net, Eigen::Index rows, int lowest, Eigen::Index snapshots);

// support-spread: the probe-direction cosines, 2 P n k per covering-radius estimate, for the last
// network, the first one and every null replica. This is the count without the early exit of
// the scan (probes leave once they cannot rank among the best), so the check can run below it.
// The frame's principal directions (one d x d second moment, O(N d^2)) and the SLSQP
// refinements (a few dozen small solves) are not counted.
FlopCount SupportSpreadFlops(Eigen::Index neurons, int dims, const checks::SupportSpreadOptions& o);

// residual-fit, statistic (a) and the product of (b) that scores the starting units, following
// the method its header describes: one forward pass for the residual; M random features
// (2 N (d+1) M); the fold Grams (N M^2 in all: symmetric rank updates) and cross products
// (2 N M K, K = k (B+1) stacked residual columns); per fold the tridiagonal reduction of
// the training Gram and the forming of Q (4/3 M^3 each) and Q^T cross (2 M^2 K); per fold the
// single-precision held-out projection (2 n_f M^2) and one product per ridge strength
// (2 n_f M K). Statistic (b)'s unit searches are matrix-vector work whose count depends on
// when L-BFGS converges: not counted.
FlopCount ResidualFitFlops(const model::Network& net, Eigen::Index rows, const checks::ResidualFitOptions& o);

}  // namespace plaudit::bench
