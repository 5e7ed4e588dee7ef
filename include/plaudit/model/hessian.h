#pragma once
// Hessian-vector products of the full-batch loss L(theta) = (1/N) sum_i loss(f(x_i), y_i) with
// respect to the stored parameters of chosen layers (weights, and biases where a layer has
// them). The network's multipliers m_l (mean-field: 1/n_{l-1}) are part of f, so this is the
// Hessian in the coordinates the snapshot stores, not in the trainer's rescaled ones. Its
// inertia (the signs of its eigenvalues) is the same in any diagonally rescaled coordinates
// (Sylvester's law of inertia), so a negative eigenvalue here is one for the trainer too.
//
// Flattened order (ParameterLayout): layers ascending; within a layer the n_out x n_in weight in
// column-major order (entry (i, j) at weight_offset + j * n_out + i, Eigen's storage order),
// then the n_out bias entries at bias_offset when the layer has a bias.
//
// Two methods, both blockwise over rows like model::Evaluate (peak memory set by block_rows):
//   kExact  the R-operator of Pearlmutter, "Fast Exact Multiplication by the Hessian" (Neural
//           Computation 6, 1994): one forward pass carrying R{z_l} = d z_l / d eps along
//           theta + eps v, and one backward pass carrying R{dL/dz_l}, with the activations'
//           second derivatives and the loss's Hessian in the output. Exact to rounding; costs
//           about two gradient evaluations per product.
//   kCentralDifference  H v ~ (g(theta + h v) - g(theta - h v)) / (2 h) from two exact
//           full-batch gradients, with h = kappa * max(||theta||, 1) / ||v||. The error is
//           truncation h^2 / 6 * |D^3 L[v, v, .]| plus rounding ~ eps * |g terms| / h; the two
//           balance for h ~ eps^(1/3) (Nocedal & Wright, "Numerical Optimization", 2nd ed.,
//           section 8.1), hence kappa = cbrt(eps) ~ 6e-6 by default rather than the sqrt(eps)
//           of one-sided differences. Scaling by ||theta|| / ||v|| makes the perturbation a
//           fixed fraction of the parameters whatever their scale and the length of v; the
//           floor 1 keeps h away from 0 at the origin (small-initialisation saddles).
//           ReLU-type activations are piecewise linear: where a unit's pre-activation crosses
//           0 within +-h the difference sees the kink that the exact product ignores.
#include <cstdint>
#include <vector>

#include <Eigen/Core>

#include "plaudit/model/dataset.h"
#include "plaudit/model/evaluate.h"
#include "plaudit/model/network.h"

namespace plaudit::model {

struct ParameterLayout {
  struct Block {
    int layer = 0;                  // 0-based
    Eigen::Index rows = 0, cols = 0;  // the weight's n_out x n_in
    Eigen::Index weight_offset = 0;
    Eigen::Index bias_offset = -1;  // -1: the layer has no bias
  };
  std::vector<Block> blocks;        // one per chosen layer, ascending
  Eigen::Index size = 0;            // total parameters

  int lowest_layer() const { return blocks.empty() ? -1 : blocks.front().layer; }
};

// Layout of the given 0-based layers (any order, duplicates ignored). An empty list or a layer
// outside the network raises Error(kUsage).
ParameterLayout MakeParameterLayout(const Network& net, const std::vector<int>& layers);

// theta over the layout.
Eigen::VectorXd GatherParameters(const Network& net, const ParameterLayout& layout);
// theta += scale * delta over the layout (delta.size() == layout.size).
void AddToParameters(const ParameterLayout& layout, const Eigen::VectorXd& delta, double scale, Network& net);
// The raw gradient d L / d theta over the layout, from an evaluation down to the lowest layer.
Eigen::VectorXd GatherGradient(const Evaluation& ev, const ParameterLayout& layout);

enum class HessianMethod { kExact, kCentralDifference };

const char* HessianMethodToString(HessianMethod m);  // "exact", "central-difference"

struct HessianOptions {
  HessianMethod method = HessianMethod::kExact;
  Eigen::Index block_rows = 1024;  // rows per block; >= 1
  double relative_step = 0.0;      // kappa of kCentralDifference; 0 = cbrt(machine epsilon)
};

// The Hessian of the full-batch loss at a fixed network, as an operator. Construction evaluates
// the loss and gradient once. Not thread-safe (it keeps a scratch copy of the network).
class LossHessian {
 public:
  // `layers`: 0-based. Keeps a reference to `data`, which must outlive this object. A data
  // width different from the network's input raises Error(kBadData); bad options, kUsage.
  LossHessian(const Network& net, const Dataset& data, const std::vector<int>& layers,
              const HessianOptions& options = {});

  const ParameterLayout& layout() const { return layout_; }
  Eigen::Index size() const { return layout_.size; }
  double loss() const { return loss_; }                          // L(theta)
  const Eigen::VectorXd& gradient() const { return gradient_; }  // dL/dtheta over the layout
  const Eigen::VectorXd& parameters() const { return theta_; }   // theta over the layout

  // out = H v (v.size() == size()); out is resized.
  void Apply(const Eigen::VectorXd& v, Eigen::VectorXd& out);
  // L(theta + t * direction): one forward pass.
  double LossAt(const Eigen::VectorXd& direction, double t);
  // The step h kCentralDifference uses for a direction v.
  double DifferenceStep(const Eigen::VectorXd& v) const;

  std::int64_t products() const { return products_; }                          // Apply calls
  std::int64_t gradient_evaluations() const { return gradient_evaluations_; }  // full-batch gradients
  std::int64_t loss_evaluations() const { return loss_evaluations_; }          // forward-only passes

 private:
  void ExactProduct(const Eigen::VectorXd& v, Eigen::VectorXd& out) const;
  void DifferenceProduct(const Eigen::VectorXd& v, Eigen::VectorXd& out);
  void Restore();  // scratch_ = net_ on the chosen layers

  Network net_;
  Network scratch_;
  const Dataset& data_;
  HessianOptions options_;
  ParameterLayout layout_;
  Eigen::VectorXd theta_, gradient_;
  double loss_ = 0.0;
  std::int64_t products_ = 0, gradient_evaluations_ = 0, loss_evaluations_ = 0;
};

}  // namespace plaudit::model
