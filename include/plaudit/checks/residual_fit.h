#pragma once
// Check `residual-fit`: can fresh features explain what the network leaves unexplained?
//
// Residual signal R = d loss / d output per row (N x k; squared loss: output - y). Inputs are
// standardised, x' = (x - mu) / sd, and augmented with a 1, so a unit is s(u . (x', 1)) with
// u in R^(d+1) and s the first layer's activation (tanh when that layer is the identity).
// Both statistics use the same seeded `folds`-fold split and measure, on held-out rows only,
//     eta = (L_now - L_after) / L_now
// where L_after is the loss after the output step o -> o - c * Rhat (model::LossPerRow).
//
// (a) random features: M = `features` units with directions uniform on S^d in R^(d+1) and
//     scales log-uniform in [scale_min, scale_max]; ridge regression of R on them
//     (stats::RidgeCrossFit) over `ridge_grid` strengths log-spaced in
//     [ridge_min, ridge_max] x trace(G)/M; Rhat = out-of-fold predictions. Step c: 1 for squared
//     loss (the ridge fit is already the penalised least-squares step); for cross-entropy and
//     logistic, a 1-D line search (c >= 0) on up to `line_search_rows` training rows of each
//     fold. eta_a = the largest pooled out-of-fold eta over the grid. Null: `permutations` = B
//     row permutations of (R, output, target) against the features, each through the identical
//     pipeline (same features, folds, grid, step rule and selection of the best strength), so
//     the selection is part of the test; p_a = (1 + #{null eta >= eta_a}) / (B + 1).
// (b) new neurons: on each training fold, up to `new_neurons` units fitted greedily to the
//     remaining residual, each maximising the explained fraction ||R_c^T h_c||^2 /
//     (||h_c||^2 ||R_c||^2) (|corr(h, R)|^2 for one output) with NLopt LD_LBFGS and analytic
//     gradients, started from the `neuron_starts` random features of (a) that score best;
//     output weights by least squares on the training fold (step c as in (a)). eta_b = pooled
//     held-out eta. p_b: one-sided paired t-test that the mean held-out per-row loss
//     difference d_i = l_now,i - l_after,i is > 0, pooled over all N rows with the
//     within-fold variance s^2 = sum_f sum_{i in f} (d_i - mean_f d)^2 / (N - folds) and
//     N - folds degrees of freedom. Valid because, given its training fold, a fold's fitted
//     units are a fixed function and its held-out rows are unseen i.i.d. rows; if the network
//     output is already the loss-minimising function of x, no fixed correction lowers the
//     expected loss, so E[d_i | training fold] <= 0. The pooled cross-fitted mean is
//     asymptotically normal with this variance estimate for stable fitting procedures (Bayle,
//     Bayle, Janson & Mackey 2020, "Cross-validation confidence intervals for test error").
//     A permutation null here would need >= 1/alpha refits of the whole search to reach alpha;
//     the paired test needs none. Per-fold tests are reported alongside.
//
// eta = max(eta_a, eta_b); p = the p-value of the statistic that gave eta;
// removable = eta * L_now.
// Fails ("fresh features explain the residual") when
//     p <= alpha  AND  eta >= effect_threshold  AND  removable >= min_removable_rel * L0;
// else passes. statistic = eta, threshold = effect_threshold, p_value = p.
// Skips when 1 / (B + 1) > alpha (the null cannot reach alpha), when N < 5 * folds, when the
// current loss is 0, or when the network's outputs are not finite.
#include <cstdint>
#include <string>

#include "plaudit/checks/check_result.h"
#include "plaudit/model/dataset.h"
#include "plaudit/model/network.h"

namespace plaudit::checks {

inline constexpr const char* kResidualFitName = "residual-fit";

struct ResidualFitOptions {
  int features = 1024;          // M fresh random units; >= 1
  int folds = 5;                // >= 2; the check skips when N < 5 * folds
  int ridge_grid = 8;           // ridge strengths (>= 1), log-spaced relative to trace(G)/M ...
  double ridge_min = 1e-6;      // ... from ridge_min (> 0) ...
  double ridge_max = 10.0;      // ... to ridge_max (>= ridge_min) times trace(G)/M
  int permutations = 199;       // B for the random-feature null; skips when 1/(B+1) > alpha
  int new_neurons = 4;          // greedy new units for statistic (b); 0 turns (b) off
  int neuron_starts = 8;        // (b): best-scoring random features each unit search starts from; >= 1
  int neuron_evaluations = 20;  // (b): LBFGS evaluations per start (>= 1); the best end point
                                // is then polished with 5x as many
  double alpha = 0.01;              // explains only when p <= alpha (in (0, 1)) ...
  double effect_threshold = 0.01;   // ... and eta >= effect_threshold (>= 0) ...
  double min_removable_rel = 1e-4;  // ... and eta * L_now >= min_removable_rel * L0 (>= 0)
  double scale_min = 0.1, scale_max = 10.0;  // random-unit scales, log-uniform; 0 < min <= max
  int line_search_rows = 1024;  // cross-entropy / logistic: training rows per fold for the step
                                // size line search (>= 1); unused for squared loss
  int threads = 0;              // folds processed concurrently; 0 = hardware threads. The result
                                // does not depend on it.
  std::uint64_t seed = 0;
  bool IsValid(std::string* why) const;
};

// Invalid options raise Error(kUsage); a data set whose width differs from the network's input,
// or a baseline loss that is negative or not finite, raises Error(kBadData).
CheckResult RunResidualFit(const model::Network& net, const model::Dataset& data,
                           double baseline_loss, const ResidualFitOptions& options);

// P(T > t) for Student's t with `dof` > 0 degrees of freedom, through the regularised incomplete
// beta function: P(T > t) = I_{dof/(dof+t^2)}(dof/2, 1/2) / 2 for t >= 0. Used by (b).
double StudentTUpperTail(double t, double dof);

}  // namespace plaudit::checks
