#include "plaudit/model/evaluate.h"

#include <algorithm>

namespace plaudit::model {
namespace {

// Forward pass of one block. Keeps what the backward pass needs for layers >= keep_from:
// the layer's input a_{l-1} and the activation derivative s'(z_l).
struct BlockForward {
  std::vector<Eigen::MatrixXd> inputs;  // inputs[l] = a_{l-1}
  std::vector<Eigen::MatrixXd> derivs;  // derivs[l] = s_l'(z_l)
  Eigen::MatrixXd output;
};

void Forward(const Network& net, const Eigen::MatrixXd& x, int keep_from, BlockForward& f) {
  const int depth = net.depth();
  f.inputs.resize(static_cast<std::size_t>(depth));
  f.derivs.resize(static_cast<std::size_t>(depth));
  Eigen::MatrixXd a = x;
  Eigen::MatrixXd z;
  for (int l = 0; l < depth; ++l) {
    const auto& layer = net.layers[static_cast<std::size_t>(l)];
    z.noalias() = a * layer.weight.transpose();
    if (layer.multiplier != 1.0) z *= layer.multiplier;
    if (layer.has_bias) z.rowwise() += layer.bias.transpose();
    const bool keep = keep_from >= 0 && l >= keep_from;
    if (keep) f.inputs[static_cast<std::size_t>(l)] = std::move(a);
    Eigen::MatrixXd next;
    if (keep) ApplyWithDerivative(layer.activation, z, next, f.derivs[static_cast<std::size_t>(l)]);
    else Apply(layer.activation, z, next);
    a = std::move(next);
  }
  f.output = std::move(a);
}

}  // namespace

Evaluation Evaluate(const Network& net, const Dataset& data, const EvalOptions& options) {
  const int depth = net.depth();
  const int lowest = options.lowest_grad_layer;
  const Eigen::Index n = data.rows();
  const Eigen::Index block = std::max<Eigen::Index>(1, options.block_rows);
  Evaluation ev;
  ev.weight_grad.resize(static_cast<std::size_t>(depth));
  ev.bias_grad.resize(static_cast<std::size_t>(depth));
  for (int l = std::max(lowest, 0); lowest >= 0 && l < depth; ++l) {
    const auto& layer = net.layers[static_cast<std::size_t>(l)];
    ev.weight_grad[static_cast<std::size_t>(l)].setZero(layer.fan_out(), layer.fan_in());
    ev.bias_grad[static_cast<std::size_t>(l)].setZero(layer.fan_out());
  }
  BlockForward f;
  Eigen::MatrixXd delta;
  Eigen::MatrixXd upstream;
  double loss_sum = 0.0;
  for (Eigen::Index start = 0; start < n; start += block) {
    const Eigen::Index rows = std::min(block, n - start);
    Forward(net, data.x.middleRows(start, rows), lowest, f);
    const Eigen::MatrixXd target = data.y.middleRows(start, rows);
    loss_sum += LossSum(net.loss, f.output, target);
    if (lowest < 0) continue;
    LossGradient(net.loss, f.output, target, upstream);
    for (int l = depth - 1; l >= lowest; --l) {
      const auto& layer = net.layers[static_cast<std::size_t>(l)];
      delta = upstream.cwiseProduct(f.derivs[static_cast<std::size_t>(l)]);
      const auto& input = f.inputs[static_cast<std::size_t>(l)];
      ev.weight_grad[static_cast<std::size_t>(l)].noalias() += layer.multiplier * (delta.transpose() * input);
      if (layer.has_bias) ev.bias_grad[static_cast<std::size_t>(l)] += delta.colwise().sum().transpose();
      if (l > lowest) {
        upstream.noalias() = delta * layer.weight;
        if (layer.multiplier != 1.0) upstream *= layer.multiplier;
      }
    }
  }
  const double inv_n = n > 0 ? 1.0 / static_cast<double>(n) : 0.0;
  ev.loss = loss_sum * inv_n;
  for (int l = std::max(lowest, 0); lowest >= 0 && l < depth; ++l) {
    ev.weight_grad[static_cast<std::size_t>(l)] *= inv_n;
    ev.bias_grad[static_cast<std::size_t>(l)] *= inv_n;
  }
  return ev;
}

Eigen::MatrixXd Predict(const Network& net, const Eigen::MatrixXd& x, Eigen::Index block_rows) {
  const Eigen::Index block = std::max<Eigen::Index>(1, block_rows);
  Eigen::MatrixXd out(x.rows(), net.output_dim());
  BlockForward f;
  for (Eigen::Index start = 0; start < x.rows(); start += block) {
    const Eigen::Index rows = std::min(block, x.rows() - start);
    Forward(net, x.middleRows(start, rows), -1, f);
    out.middleRows(start, rows) = f.output;
  }
  return out;
}

Eigen::MatrixXd LayerActivations(const Network& net, const Eigen::MatrixXd& x, int layer, Eigen::Index block_rows) {
  Network head;
  head.loss = net.loss;
  head.layers.assign(net.layers.begin(), net.layers.begin() + layer + 1);
  return Predict(head, x, block_rows);
}

Eigen::MatrixXd OutputResidual(const Network& net, const Dataset& data, Eigen::Index block_rows) {
  const Eigen::MatrixXd out = Predict(net, data.x, block_rows);
  Eigen::MatrixXd grad;
  LossGradient(net.loss, out, data.y, grad);
  return grad / static_cast<double>(std::max<Eigen::Index>(1, data.rows()));
}

}  // namespace plaudit::model
