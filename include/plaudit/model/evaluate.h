#pragma once
// Full-batch loss and gradients over blocks of data rows. Each block is one forward pass of
// Eigen matrix products and one backward pass that stops at the lowest layer asked for, so
// peak memory depends on the block size, not on N.
#include <optional>
#include <string>
#include <vector>

#include <Eigen/Core>

#include "plaudit/model/dataset.h"
#include "plaudit/model/network.h"

namespace plaudit::model {

// Arithmetic of the gradient pass. float32 runs the matrix products in single precision (about
// 2x the rate) with the loss, its gradient and the sum over blocks kept in double; its rounding
// (about 1e-7 of each block's largest terms) hides gradients that cancel to below roughly 1e-5
// of their terms, so callers recompute such points in double (audit::TrajectoryOptions).
enum class Precision { kDouble, kFloat32 };
const char* PrecisionToString(Precision p);
std::optional<Precision> PrecisionFromString(const std::string& name);

struct EvalOptions {
  // Rows per block. Larger blocks give bigger matrix products; 1024 rows of a 512-wide layer is
  // 4 MiB per activation matrix. Must be >= 1.
  Eigen::Index block_rows = 1024;
  // Lowest layer (0-based) whose gradients are needed; layers below it get none and the
  // backward pass stops there. -1: loss only, no backward pass.
  int lowest_grad_layer = 0;
  Precision precision = Precision::kDouble;
};

struct Evaluation {
  double loss = 0.0;                    // mean over rows
  // Raw gradients d loss / d parameter, for layers >= lowest_grad_layer (empty matrices below).
  std::vector<Eigen::MatrixXd> weight_grad;
  std::vector<Eigen::VectorXd> bias_grad;
};

Evaluation Evaluate(const Network& net, const Dataset& data, const EvalOptions& options = {});

// Network output for every row of x (N x k), blockwise.
Eigen::MatrixXd Predict(const Network& net, const Eigen::MatrixXd& x,
                        Eigen::Index block_rows = 1024);

// Post-activations of one layer (0-based) for every row (N x n_l): used by the diversity checks.
Eigen::MatrixXd LayerActivations(const Network& net, const Eigen::MatrixXd& x, int layer,
                                 Eigen::Index block_rows = 1024);

// d loss / d output for every row, divided by N: the residual signal the checks study.
Eigen::MatrixXd OutputResidual(const Network& net, const Dataset& data,
                               Eigen::Index block_rows = 1024);

}  // namespace plaudit::model
