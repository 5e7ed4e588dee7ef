#pragma once
// The space support-spread reads first-layer neurons in, shared with the report's direction maps
// so that both draw the same points.
//
// Audit rows are standardised column by column. Augmented frame (first layer with a bias), in the
// space of [x', 1]: the constant direction e_{d+1} has moment 1 and is kept always; the others are
// the leading principal directions of corr(x) above rank noise. Bias-free frame: a neuron without
// a bias computes w . x = (w .* sd) . (x ./ sd) and has no constant direction of its own, so the
// frame is the leading principal directions of the uncentred second moment of x ./ sd, in R^d.
#include <cstdint>
#include <vector>

#include <Eigen/Core>

#include "plaudit/model/network.h"

namespace plaudit::checks {

// Column means and spreads (population sd) of the audit rows; a constant column gets scale 1
// and is marked, so its standardised values are exactly zero.
struct Standardisation {
  Eigen::RowVectorXd mean;
  Eigen::RowVectorXd scale;
  std::vector<bool> constant;
};

Standardisation Standardise(const Eigen::MatrixXd& x);
Eigen::MatrixXd StandardisedInputs(const Eigen::MatrixXd& x, const Standardisation& s);

struct NeuronFrame {
  bool augmented = true;
  Eigen::MatrixXd basis;    // orthonormal columns, largest moment first; empty when x has no spread
  Eigen::VectorXd moments;
  double total = 0.0;       // trace of the second moment the frame is taken from
  int requested = 0;
  Eigen::Index constant_column = -1;  // augmented: the column of the constant direction
};

// At most `requested` directions (the constant one included when augmented).
NeuronFrame FrameOf(const Eigen::MatrixXd& x, const Standardisation& s, bool augmented, int requested,
                    std::uint64_t seed = 0);

// One row per neuron: v_j = (m w_j .* sd, b_j + m w_j . mu) in the augmented frame, m w_j .* sd
// in the bias-free one.
Eigen::MatrixXd NeuronVectors(const model::DenseLayer& layer, const Standardisation& s, bool augmented);

// The neurons' directions in the frame: v_j projected on the basis and normalised onto
// S^{k-1}. A neuron whose projection is shorter than 1e-12 of the longest |v_j|, or not finite,
// has no direction and is listed in `dropped`.
struct NeuronDirections {
  Eigen::MatrixXd unit;              // kept x k
  std::vector<Eigen::Index> kept, dropped;
  Eigen::VectorXd norms;             // |v_j| of every neuron
};
NeuronDirections ProjectNeurons(const model::DenseLayer& layer, const Standardisation& s, const NeuronFrame& frame);

}  // namespace plaudit::checks
