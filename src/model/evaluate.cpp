#include "plaudit/model/evaluate.h"

#include <algorithm>
#include <type_traits>

namespace plaudit::model {
namespace {

template <typename S>
using Matrix = Eigen::Matrix<S, Eigen::Dynamic, Eigen::Dynamic>;
template <typename S>
using Vector = Eigen::Matrix<S, Eigen::Dynamic, 1>;

// The network's weights in the pass's precision: views of the network's own matrices in double,
// one cast copy per call in float (a few MB at most, against N rows of work).
template <typename S>
struct PassWeights {
  std::vector<Matrix<S>> owned_w;
  std::vector<Vector<S>> owned_b;
  std::vector<const Matrix<S>*> w;
  std::vector<const Vector<S>*> b;

  explicit PassWeights(const Network& net) {
    if constexpr (std::is_same_v<S, double>) {
      for (const auto& layer : net.layers) {
        w.push_back(&layer.weight);
        b.push_back(&layer.bias);
      }
    } else {
      owned_w.reserve(net.layers.size());
      owned_b.reserve(net.layers.size());
      for (const auto& layer : net.layers) {
        owned_w.push_back(layer.weight.cast<S>());
        owned_b.push_back(layer.bias.cast<S>());
        w.push_back(&owned_w.back());
        b.push_back(&owned_b.back());
      }
    }
  }
};

// Forward pass of one block. Keeps what the backward pass needs for layers >= keep_from:
// the layer's input a_{l-1} and the activation derivative s'(z_l).
template <typename S>
struct BlockForward {
  std::vector<Matrix<S>> inputs;  // inputs[l] = a_{l-1}
  std::vector<Matrix<S>> derivs;  // derivs[l] = s_l'(z_l)
  Matrix<S> output;
};

template <typename S, typename Rows>
void Forward(const Network& net, const PassWeights<S>& weights, const Rows& x, int keep_from, BlockForward<S>& f) {
  const int depth = net.depth();
  f.inputs.resize(static_cast<std::size_t>(depth));
  f.derivs.resize(static_cast<std::size_t>(depth));
  Matrix<S> a = x.template cast<S>();
  Matrix<S> z;
  for (int l = 0; l < depth; ++l) {
    const auto& layer = net.layers[static_cast<std::size_t>(l)];
    z.noalias() = a * weights.w[static_cast<std::size_t>(l)]->transpose();
    if (layer.multiplier != 1.0) z *= static_cast<S>(layer.multiplier);
    if (layer.has_bias) z.rowwise() += weights.b[static_cast<std::size_t>(l)]->transpose();
    const bool keep = keep_from >= 0 && l >= keep_from;
    if (keep) f.inputs[static_cast<std::size_t>(l)] = std::move(a);
    Matrix<S> next;
    if (keep) ApplyWithDerivative(layer.activation, z, next, f.derivs[static_cast<std::size_t>(l)]);
    else Apply(layer.activation, z, next);
    a = std::move(next);
  }
  f.output = std::move(a);
}

template <typename S>
Evaluation EvaluateIn(const Network& net, const Dataset& data, const EvalOptions& options) {
  const int depth = net.depth();
  const int lowest = options.lowest_grad_layer;
  const Eigen::Index n = data.rows();
  const Eigen::Index block = std::max<Eigen::Index>(1, options.block_rows);
  const PassWeights<S> weights(net);
  Evaluation ev;
  ev.weight_grad.resize(static_cast<std::size_t>(depth));
  ev.bias_grad.resize(static_cast<std::size_t>(depth));
  for (int l = std::max(lowest, 0); lowest >= 0 && l < depth; ++l) {
    const auto& layer = net.layers[static_cast<std::size_t>(l)];
    ev.weight_grad[static_cast<std::size_t>(l)].setZero(layer.fan_out(), layer.fan_in());
    ev.bias_grad[static_cast<std::size_t>(l)].setZero(layer.fan_out());
  }
  BlockForward<S> f;
  Matrix<S> delta;
  Matrix<S> upstream;
  Eigen::MatrixXd upstream_d;  // the loss's gradient is taken in double in both precisions
  Matrix<S> block_grad;        // float32 only: one block's product before it joins the double sum
  double loss_sum = 0.0;
  for (Eigen::Index start = 0; start < n; start += block) {
    const Eigen::Index rows = std::min(block, n - start);
    Forward(net, weights, data.x.middleRows(start, rows), lowest, f);
    const Eigen::MatrixXd target = data.y.middleRows(start, rows);
    if constexpr (std::is_same_v<S, double>) {
      loss_sum += LossSum(net.loss, f.output, target);
      if (lowest < 0) continue;
      LossGradient(net.loss, f.output, target, upstream);
    } else {
      const Eigen::MatrixXd output = f.output.template cast<double>();
      loss_sum += LossSum(net.loss, output, target);
      if (lowest < 0) continue;
      LossGradient(net.loss, output, target, upstream_d);
      upstream = upstream_d.cast<S>();
    }
    for (int l = depth - 1; l >= lowest; --l) {
      const auto& layer = net.layers[static_cast<std::size_t>(l)];
      delta = upstream.cwiseProduct(f.derivs[static_cast<std::size_t>(l)]);
      const auto& input = f.inputs[static_cast<std::size_t>(l)];
      if constexpr (std::is_same_v<S, double>) {
        ev.weight_grad[static_cast<std::size_t>(l)].noalias() += layer.multiplier * (delta.transpose() * input);
        if (layer.has_bias) ev.bias_grad[static_cast<std::size_t>(l)] += delta.colwise().sum().transpose();
      } else {
        // Each block's sum stays float (one GEMM); blocks are added in double, so rounding
        // grows with the block size, not with N.
        block_grad.noalias() = delta.transpose() * input;
        ev.weight_grad[static_cast<std::size_t>(l)] += layer.multiplier * block_grad.template cast<double>();
        if (layer.has_bias) {
          ev.bias_grad[static_cast<std::size_t>(l)] += delta.colwise().sum().transpose().template cast<double>();
        }
      }
      if (l > lowest) {
        upstream.noalias() = delta * *weights.w[static_cast<std::size_t>(l)];
        if (layer.multiplier != 1.0) upstream *= static_cast<S>(layer.multiplier);
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

}  // namespace

const char* PrecisionToString(Precision p) { return p == Precision::kFloat32 ? "float32" : "double"; }

std::optional<Precision> PrecisionFromString(const std::string& name) {
  if (name == "double") return Precision::kDouble;
  if (name == "float32") return Precision::kFloat32;
  return std::nullopt;
}

Evaluation Evaluate(const Network& net, const Dataset& data, const EvalOptions& options) {
  return options.precision == Precision::kFloat32 ? EvaluateIn<float>(net, data, options)
                                                  : EvaluateIn<double>(net, data, options);
}

Eigen::MatrixXd Predict(const Network& net, const Eigen::MatrixXd& x, Eigen::Index block_rows) {
  const Eigen::Index block = std::max<Eigen::Index>(1, block_rows);
  Eigen::MatrixXd out(x.rows(), net.output_dim());
  const PassWeights<double> weights(net);
  BlockForward<double> f;
  for (Eigen::Index start = 0; start < x.rows(); start += block) {
    const Eigen::Index rows = std::min(block, x.rows() - start);
    Forward(net, weights, x.middleRows(start, rows), -1, f);
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
