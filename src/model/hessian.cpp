#include "plaudit/model/hessian.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <set>

#include "plaudit/core/error.h"

namespace plaudit::model {
namespace {

constexpr double kInvSqrt2Pi = 0.39894228040143267794;

// s(z), s'(z) and s''(z). ReLU-type activations are piecewise linear: s'' = 0 away from the
// kink, which is the Hessian almost everywhere.
void SecondDerivatives(Activation a, const Eigen::MatrixXd& z, Eigen::MatrixXd& s, Eigen::MatrixXd& s1,
                       Eigen::MatrixXd& s2) {
  ApplyWithDerivative(a, z, s, s1);
  switch (a) {
    case Activation::kIdentity:
    case Activation::kRelu:
    case Activation::kLeakyRelu: s2.setZero(z.rows(), z.cols()); break;
    case Activation::kTanh: s2 = (-2.0 * s.array() * s1.array()).matrix(); break;
    case Activation::kSigmoid: s2 = (s1.array() * (1.0 - 2.0 * s.array())).matrix(); break;
    case Activation::kSoftplus: s2 = (s1.array() * (1.0 - s1.array())).matrix(); break;  // s1 = sigmoid
    case Activation::kGelu:  // d^2/dz^2 z Phi(z) = phi(z) (2 - z^2)
      s2 = (kInvSqrt2Pi * (-0.5 * z.array().square()).exp() * (2.0 - z.array().square())).matrix();
      break;
  }
}

// (d^2 loss / d output^2) applied row by row to r (B x k).
Eigen::MatrixXd LossHessianTimes(Loss loss, const Eigen::MatrixXd& output, const Eigen::MatrixXd& r) {
  switch (loss) {
    case Loss::kSquared: return r;
    case Loss::kCrossEntropy: {
      // softmax p: H r = p * r - p (p . r) per row.
      const Eigen::VectorXd m = output.rowwise().maxCoeff();
      Eigen::ArrayXXd p = (output.colwise() - m).array().exp();
      p.colwise() /= p.rowwise().sum();
      const Eigen::ArrayXXd pr = p * r.array();
      const Eigen::ArrayXd dot = pr.rowwise().sum();
      return (pr - p.colwise() * dot).matrix();
    }
    case Loss::kLogistic: {
      const Eigen::ArrayXXd sig = 0.5 * ((0.5 * output.array()).tanh() + 1.0);
      return (sig * (1.0 - sig) * r.array()).matrix();
    }
  }
  return r;
}

}  // namespace

const char* HessianMethodToString(HessianMethod m) {
  return m == HessianMethod::kExact ? "exact" : "central-difference";
}

ParameterLayout MakeParameterLayout(const Network& net, const std::vector<int>& layers) {
  if (layers.empty()) raise(ExitCode::kUsage, "Hessian: no layers chosen");
  const std::set<int> chosen(layers.begin(), layers.end());
  ParameterLayout layout;
  for (int l : chosen) {
    if (l < 0 || l >= net.depth()) {
      raise(ExitCode::kUsage, "Hessian: layer {} out of range: the network has {} layers", l + 1, net.depth());
    }
    const DenseLayer& layer = net.layers[static_cast<std::size_t>(l)];
    ParameterLayout::Block b;
    b.layer = l;
    b.rows = layer.fan_out();
    b.cols = layer.fan_in();
    b.weight_offset = layout.size;
    layout.size += layer.weight.size();
    if (layer.has_bias) {
      b.bias_offset = layout.size;
      layout.size += layer.fan_out();
    }
    layout.blocks.push_back(b);
  }
  return layout;
}

Eigen::VectorXd GatherParameters(const Network& net, const ParameterLayout& layout) {
  Eigen::VectorXd theta(layout.size);
  for (const auto& b : layout.blocks) {
    const DenseLayer& layer = net.layers[static_cast<std::size_t>(b.layer)];
    theta.segment(b.weight_offset, b.rows * b.cols) = Eigen::Map<const Eigen::VectorXd>(layer.weight.data(), b.rows * b.cols);
    if (b.bias_offset >= 0) theta.segment(b.bias_offset, b.rows) = layer.bias;
  }
  return theta;
}

void AddToParameters(const ParameterLayout& layout, const Eigen::VectorXd& delta, double scale, Network& net) {
  for (const auto& b : layout.blocks) {
    DenseLayer& layer = net.layers[static_cast<std::size_t>(b.layer)];
    layer.weight += scale * Eigen::Map<const Eigen::MatrixXd>(delta.data() + b.weight_offset, b.rows, b.cols);
    if (b.bias_offset >= 0) layer.bias += scale * delta.segment(b.bias_offset, b.rows);
  }
}

Eigen::VectorXd GatherGradient(const Evaluation& ev, const ParameterLayout& layout) {
  Eigen::VectorXd g(layout.size);
  for (const auto& b : layout.blocks) {
    const Eigen::MatrixXd& gw = ev.weight_grad[static_cast<std::size_t>(b.layer)];
    g.segment(b.weight_offset, b.rows * b.cols) = Eigen::Map<const Eigen::VectorXd>(gw.data(), b.rows * b.cols);
    if (b.bias_offset >= 0) g.segment(b.bias_offset, b.rows) = ev.bias_grad[static_cast<std::size_t>(b.layer)];
  }
  return g;
}

LossHessian::LossHessian(const Network& net, const Dataset& data, const std::vector<int>& layers,
                         const HessianOptions& options)
    : net_(net), scratch_(net), data_(data), options_(options), layout_(MakeParameterLayout(net, layers)) {
  if (options_.block_rows < 1) raise(ExitCode::kUsage, "Hessian: block_rows is {}, must be >= 1", options_.block_rows);
  if (!(options_.relative_step >= 0.0) || !std::isfinite(options_.relative_step)) {
    raise(ExitCode::kUsage, "Hessian: relative_step must be >= 0 and finite");
  }
  if (options_.relative_step == 0.0) options_.relative_step = std::cbrt(std::numeric_limits<double>::epsilon());
  if (data.rows() < 1) raise(ExitCode::kBadData, "Hessian: the data have no rows");
  if (data.dim() != net.input_dim()) {
    raise(ExitCode::kBadData, "Hessian: the data have {} columns but the first layer takes {} inputs", data.dim(),
          net.input_dim());
  }
  theta_ = GatherParameters(net_, layout_);
  EvalOptions eo;
  eo.block_rows = options_.block_rows;
  eo.lowest_grad_layer = layout_.lowest_layer();
  const Evaluation ev = Evaluate(net_, data_, eo);
  ++gradient_evaluations_;
  loss_ = ev.loss;
  gradient_ = GatherGradient(ev, layout_);
}

void LossHessian::Restore() {
  for (const auto& b : layout_.blocks) {
    const auto l = static_cast<std::size_t>(b.layer);
    scratch_.layers[l].weight = net_.layers[l].weight;
    scratch_.layers[l].bias = net_.layers[l].bias;
  }
}

double LossHessian::DifferenceStep(const Eigen::VectorXd& v) const {
  const double vn = v.norm();
  return vn > 0.0 ? options_.relative_step * std::max(theta_.norm(), 1.0) / vn : 0.0;
}

void LossHessian::Apply(const Eigen::VectorXd& v, Eigen::VectorXd& out) {
  if (v.size() != layout_.size) {
    raise(ExitCode::kUsage, "Hessian: vector of size {} for {} parameters", v.size(), layout_.size);
  }
  ++products_;
  if (options_.method == HessianMethod::kExact) ExactProduct(v, out);
  else DifferenceProduct(v, out);
}

double LossHessian::LossAt(const Eigen::VectorXd& direction, double t) {
  Restore();
  AddToParameters(layout_, direction, t, scratch_);
  EvalOptions eo;
  eo.block_rows = options_.block_rows;
  eo.lowest_grad_layer = -1;
  ++loss_evaluations_;
  return Evaluate(scratch_, data_, eo).loss;
}

void LossHessian::DifferenceProduct(const Eigen::VectorXd& v, Eigen::VectorXd& out) {
  const double h = DifferenceStep(v);
  if (h == 0.0) {
    out.setZero(layout_.size);
    return;
  }
  EvalOptions eo;
  eo.block_rows = options_.block_rows;
  eo.lowest_grad_layer = layout_.lowest_layer();
  Restore();
  AddToParameters(layout_, v, h, scratch_);
  const Eigen::VectorXd plus = GatherGradient(Evaluate(scratch_, data_, eo), layout_);
  Restore();
  AddToParameters(layout_, v, -h, scratch_);
  const Eigen::VectorXd minus = GatherGradient(Evaluate(scratch_, data_, eo), layout_);
  gradient_evaluations_ += 2;
  out = (plus - minus) / (2.0 * h);
}

// Pearlmutter's R-operator: R{q} = d q(theta + eps v) / d eps at eps = 0. With a_0 = x,
// z_l = m_l a_{l-1} W_l^T + 1 b_l^T, a_l = s_l(z_l) (rows are data rows):
//   forward   R{z_l} = m_l (R{a_{l-1}} W_l^T + a_{l-1} V_l^T) + 1 c_l^T,  R{a_l} = s_l'(z_l) R{z_l}
//   output    g_L = dloss/do,  R{g_L} = (d^2 loss / do^2) R{o}
//   backward  delta_l = g_l s_l'(z_l),  R{delta_l} = R{g_l} s_l'(z_l) + g_l s_l''(z_l) R{z_l}
//             (Hv)_{W_l} = m_l (R{delta_l}^T a_{l-1} + delta_l^T R{a_{l-1}}) / N,  (Hv)_{b_l} = 1^T R{delta_l} / N
//             g_{l-1} = m_l delta_l W_l,  R{g_{l-1}} = m_l (R{delta_l} W_l + delta_l V_l)
// where (V_l, c_l) is v's part for layer l (zero for layers not chosen) and products are
// element-wise where shapes match. Below the lowest chosen layer R{.} = 0, so both passes
// stop there.
void LossHessian::ExactProduct(const Eigen::VectorXd& v, Eigen::VectorXd& out) const {
  const int depth = net_.depth();
  const int lowest = layout_.lowest_layer();
  const auto count = static_cast<std::size_t>(depth);
  std::vector<const ParameterLayout::Block*> chosen(count, nullptr);
  for (const auto& b : layout_.blocks) chosen[static_cast<std::size_t>(b.layer)] = &b;
  auto vw = [&](const ParameterLayout::Block& b) {
    return Eigen::Map<const Eigen::MatrixXd>(v.data() + b.weight_offset, b.rows, b.cols);
  };

  std::vector<Eigen::MatrixXd> hw(count);
  std::vector<Eigen::VectorXd> hb(count);
  for (const auto& b : layout_.blocks) {
    hw[static_cast<std::size_t>(b.layer)].setZero(b.rows, b.cols);
    hb[static_cast<std::size_t>(b.layer)].setZero(b.rows);
  }
  std::vector<Eigen::MatrixXd> in(count), r_in(count), d1(count), d2(count), rz(count);
  Eigen::MatrixXd a, z, s, ra, g, rg, delta, r_delta;
  const Eigen::Index n = data_.rows();
  const Eigen::Index block = options_.block_rows;
  for (Eigen::Index start = 0; start < n; start += block) {
    const Eigen::Index rows = std::min(block, n - start);
    a = data_.x.middleRows(start, rows);
    for (int l = 0; l < depth; ++l) {
      const auto li = static_cast<std::size_t>(l);
      const DenseLayer& layer = net_.layers[li];
      z.noalias() = a * layer.weight.transpose();
      if (layer.multiplier != 1.0) z *= layer.multiplier;
      if (layer.has_bias) z.rowwise() += layer.bias.transpose();
      if (l < lowest) {
        model::Apply(layer.activation, z, s);
        a.swap(s);
        continue;
      }
      Eigen::MatrixXd& r = rz[li];
      r.setZero(rows, layer.fan_out());
      if (l > lowest) r.noalias() += ra * layer.weight.transpose();
      if (chosen[li] != nullptr) r.noalias() += a * vw(*chosen[li]).transpose();
      if (layer.multiplier != 1.0) r *= layer.multiplier;
      if (chosen[li] != nullptr && chosen[li]->bias_offset >= 0) {
        r.rowwise() += v.segment(chosen[li]->bias_offset, layer.fan_out()).transpose();
      }
      SecondDerivatives(layer.activation, z, s, d1[li], d2[li]);
      in[li] = a;
      if (l > lowest) r_in[li] = ra;
      ra = d1[li].cwiseProduct(r);
      a.swap(s);
    }
    const Eigen::MatrixXd target = data_.y.middleRows(start, rows);
    LossGradient(net_.loss, a, target, g);
    rg = LossHessianTimes(net_.loss, a, ra);
    for (int l = depth - 1; l >= lowest; --l) {
      const auto li = static_cast<std::size_t>(l);
      const DenseLayer& layer = net_.layers[li];
      delta = g.cwiseProduct(d1[li]);
      r_delta = rg.cwiseProduct(d1[li]) + g.cwiseProduct(d2[li]).cwiseProduct(rz[li]);
      if (chosen[li] != nullptr) {
        Eigen::MatrixXd& h = hw[li];
        h.noalias() += layer.multiplier * (r_delta.transpose() * in[li]);
        if (l > lowest) h.noalias() += layer.multiplier * (delta.transpose() * r_in[li]);
        if (layer.has_bias) hb[li] += r_delta.colwise().sum().transpose();
      }
      if (l > lowest) {
        Eigen::MatrixXd next_rg = r_delta * layer.weight;
        if (chosen[li] != nullptr) next_rg.noalias() += delta * vw(*chosen[li]);
        g = delta * layer.weight;
        if (layer.multiplier != 1.0) {
          g *= layer.multiplier;
          next_rg *= layer.multiplier;
        }
        rg.swap(next_rg);
      }
    }
  }
  out.resize(layout_.size);
  const double inv_n = 1.0 / static_cast<double>(n);
  for (const auto& b : layout_.blocks) {
    const auto li = static_cast<std::size_t>(b.layer);
    out.segment(b.weight_offset, b.rows * b.cols) = inv_n * Eigen::Map<const Eigen::VectorXd>(hw[li].data(), b.rows * b.cols);
    if (b.bias_offset >= 0) out.segment(b.bias_offset, b.rows) = inv_n * hb[li];
  }
}

}  // namespace plaudit::model
