#pragma once
// Check `layer-degeneracy`: have the neurons of a deep layer collapsed onto one function?
//
// In the mean-field limit of a network of depth >= 4 with i.i.d. initial weights, the neurons of
// every middle layer compute the same function of the input, and the middle weights only move
// by a common amount (Nguyen & Pham 2020, "A rigorous framework for the mean field limit of
// multilayer neural networks": i.i.d. initialisations cause strong degeneracy when the depth is
// at least four). A finite network shows it as neurons whose activations are nearly perfectly
// correlated.
//
// For each hidden layer l = 2..L-1 (1-based; layer 1 reads the inputs and cannot degenerate
// this way), over the audit rows (subsampled to max_rows, seeded), with a = the layer's
// post-activations (N x n) accumulated a block of rows at a time:
//     C          = centred covariance of the neurons (1/N), merged blockwise (Chan et al.)
//     R          = D^-1/2 C D^-1/2 over the varying neurons (sd > 1e-12 of the neuron's largest
//                  |a|; constant neurons are counted, not correlated)
//     mean_abs_corr = mean over pairs i != j of |R_ij|, from that one matrix
//     effective_rank = exp(-sum p_i log p_i), p = eigenvalues of C / trace(C)   (Roy & Vetterli
//                  2007), reported against the width n
// and, when the step-0 network is given, with D = W_l(t) - W_l(0) (n_l x n_{l-1}):
//     translation_share   = n_l n_{l-1} c^2 / ||D||_F^2, c = mean(D): the share of the change
//                           carried by its best constant matrix c 1 1^T
//     common_row_share    = n_l ||colmean(D)||^2 / ||D||_F^2: best matrix whose rows are equal
//                           (every neuron of layer l got the same incoming change)
//     common_column_share = n_{l-1} ||rowmean(D)||^2 / ||D||_F^2: best matrix whose columns are
//                           equal (a neuron's change ignores which neuron it reads from)
// Under i.i.d. initialisation the mean-field equations give translation_share -> 1 for the
// weights joining two middle layers (3 <= l <= L-2), common_row_share -> 1 for W_2 and
// common_column_share -> 1 for W_{L-1} (whose neurons then compute one function up to sign and
// scale, as their single outgoing weights are not averaged); a limit that moves at all needs a
// non-zero weight mean or an activation with s(0) != 0.
// statistic = the worst (largest) mean_abs_corr; fails when statistic >= threshold.
//
// detail: threshold, rows, worst_layer (1-based), degenerate_layers, layers[] with layer, width,
// varying, constant, mean_abs_corr, mean_corr (signed: +1 one function, mixed signs one function
// up to sign), effective_rank, effective_rank_fraction, top_share (largest eigenvalue / trace),
// and with a first network mean_abs_corr_init, effective_rank_init, translation_share,
// common_row_share, common_column_share, change_ratio (||D|| / ||W_l(0)||).
#include <cstdint>
#include <string>

#include <Eigen/Core>

#include "plaudit/checks/check_result.h"
#include "plaudit/model/dataset.h"
#include "plaudit/model/network.h"

namespace plaudit::checks {

inline constexpr const char* kLayerDegeneracyName = "layer-degeneracy";

struct LayerDegeneracyOptions {
  double threshold = 0.95;         // fails when the worst layer's mean |corr| >= threshold; in (0, 1]
  Eigen::Index max_rows = 4096;    // audit rows used; larger sets are subsampled (seeded); >= 2
  Eigen::Index block_rows = 1024;  // rows per forward block; >= 1
  std::uint64_t seed = 0;          // drives the row subsample only
  bool IsValid(std::string* why) const;  // message names the field, its value and the rule
};

// Centred second moments of the columns of a matrix that arrives a block of rows at a time:
// block means and centred Gram matrices merged by the pairwise update of Chan, Golub & LeVeque
// (1979), which does not cancel catastrophically when means dwarf spreads.
class ColumnMoments {
 public:
  void Add(const Eigen::MatrixXd& block);
  Eigen::Index rows() const { return rows_; }
  Eigen::MatrixXd Covariance() const;  // (1/N) sum (a - mean)(a - mean)^T, population
  const Eigen::RowVectorXd& mean() const { return mean_; }
  const Eigen::RowVectorXd& max_abs() const { return max_abs_; }

 private:
  Eigen::Index rows_ = 0;
  Eigen::RowVectorXd mean_;
  Eigen::RowVectorXd max_abs_;
  Eigen::MatrixXd scatter_;  // sum of centred outer products
};

// What one layer's covariance says about its neurons.
struct NeuronSpread {
  Eigen::Index width = 0;
  Eigen::Index varying = 0;        // neurons whose activation is not constant over the rows
  double mean_abs_corr = 0.0;      // NaN with fewer than 2 varying neurons
  double mean_corr = 0.0;          // signed mean; NaN likewise
  double effective_rank = 0.0;     // NaN when every neuron is constant
  double top_share = 0.0;          // largest eigenvalue / trace; NaN likewise
};

NeuronSpread SummariseMoments(const ColumnMoments& moments);

// The three shares of a weight change (NaN when delta is zero).
struct ChangeShares {
  double translation = 0.0;
  double common_row = 0.0;
  double common_column = 0.0;
};
ChangeShares WeightChangeShares(const Eigen::MatrixXd& delta);

// `first` (may be null) is the network at step 0. Skips for depth < 3, fewer than 2 data rows,
// non-finite parameters or activations, and when no layer has 2 varying neurons.
// Invalid options raise Error(kUsage); data or `first` whose shapes do not match `last` raise
// Error(kBadData).
CheckResult RunLayerDegeneracy(const model::Network& last, const model::Network* first,
                               const model::Dataset& data, const LayerDegeneracyOptions& options);

}  // namespace plaudit::checks
