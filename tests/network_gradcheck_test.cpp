// model::Evaluate's gradients against central finite differences of its own loss, for every
// activation x loss x parameterization, with and without biases and with a per-layer
// multiplier. Source of the check: the central-difference formula
// f'(t) = (f(t+h) - f(t-h)) / 2h + O(h^2) (classical numerical analysis).
#include <algorithm>
#include <cmath>
#include <cstdint>
#include <random>
#include <string>

#include <catch2/catch.hpp>

#include "plaudit/model/evaluate.h"
#include "plaudit/model/network.h"

namespace {

using plaudit::io::Parameterization;
using plaudit::model::Activation;
using plaudit::model::Dataset;
using plaudit::model::EvalOptions;
using plaudit::model::Evaluation;
using plaudit::model::Loss;
using plaudit::model::Network;

constexpr double kStep = 1e-6;  // central-difference step h
// Relative error |fd - g| / max(|fd|, |g|, kGradFloor) must stay below kRelTol. The floor keeps
// components that are zero up to rounding from dividing by ~0: the difference quotient carries
// an absolute rounding error of about eps * |loss| / h ~ 1e-10 for the O(1) losses here, so
// gradients below 1e-4 are compared against the floor. That rounding alone is ~2e-6 of the floor,
// so the tolerance is 1e-5 (common practice for double-precision gradient checks); a wrong
// derivative shows up as an O(1) relative error.
constexpr double kRelTol = 1e-5;
constexpr double kGradFloor = 1e-4;
// Kinked activations (relu, leaky_relu): every pre-activation keeps |z| above this, so no
// perturbation of size h crosses a kink.
constexpr double kKinkMargin = 1e-3;
// Blocking changes only the order of the row sums.
constexpr double kBlockTol = 1e-12;

constexpr Activation kActivations[] = {Activation::kIdentity, Activation::kRelu,    Activation::kLeakyRelu,
                                       Activation::kTanh,     Activation::kSigmoid, Activation::kSoftplus,
                                       Activation::kGelu};
constexpr Loss kLosses[] = {Loss::kSquared, Loss::kCrossEntropy, Loss::kLogistic};
constexpr Parameterization kParams[] = {Parameterization::kMeanField, Parameterization::kStandard};

Eigen::Index OutputsFor(Loss loss) { return loss == Loss::kSquared ? 2 : loss == Loss::kCrossEntropy ? 3 : 1; }

Eigen::MatrixXd Normal(Eigen::Index rows, Eigen::Index cols, double scale, std::mt19937_64& rng) {
  std::normal_distribution<double> g(0.0, scale);
  Eigen::MatrixXd m(rows, cols);
  for (Eigen::Index i = 0; i < m.size(); ++i) m.data()[i] = g(rng);
  return m;
}

struct Variant {
  bool biases = true;
  bool custom_multiplier = false;  // layer 1 gets multiplier 0.7 whatever the parameterization
};

Network RandomNetwork(Activation act, Loss loss, Parameterization p, Variant v, std::mt19937_64& rng) {
  const Eigen::Index widths[] = {3, 4, 5, OutputsFor(loss)};
  Network net;
  net.loss = loss;
  for (int l = 0; l < 3; ++l) {
    plaudit::model::DenseLayer layer;
    const Eigen::Index in = widths[l];
    const Eigen::Index out = widths[l + 1];
    layer.multiplier = plaudit::model::DefaultMultiplier(p, l, in);
    if (v.custom_multiplier && l == 1) layer.multiplier = 0.7;
    // O(1) pre-activations: averaged layers take O(1) weights, summed ones O(1/sqrt(n)).
    const double scale = layer.multiplier == 1.0 ? 1.0 / std::sqrt(static_cast<double>(in)) : 1.0;
    layer.weight = Normal(out, in, 1.5 * scale, rng);
    layer.has_bias = v.biases;
    layer.bias = v.biases ? Eigen::VectorXd(Normal(out, 1, 0.5, rng)) : Eigen::VectorXd::Zero(out);
    layer.activation = l < 2 ? act : Activation::kIdentity;
    net.layers.push_back(layer);
  }
  return net;
}

Dataset RandomData(Loss loss, Eigen::Index rows, std::mt19937_64& rng) {
  Dataset d;
  d.x = Normal(rows, 3, 1.0, rng);
  const Eigen::Index k = OutputsFor(loss);
  if (loss == Loss::kSquared) {
    d.y = Normal(rows, k, 1.0, rng);
  } else {
    d.y.resize(rows, 1);
    std::uniform_int_distribution<int> label(0, static_cast<int>(loss == Loss::kLogistic ? 1 : k - 1));
    for (Eigen::Index i = 0; i < rows; ++i) d.y(i, 0) = label(rng);
  }
  return d;
}

// Smallest |z| over every hidden pre-activation, by a forward pass written out here.
double SmallestPreActivation(const Network& net, const Eigen::MatrixXd& x) {
  double smallest = INFINITY;
  Eigen::MatrixXd a = x;
  for (const auto& layer : net.layers) {
    Eigen::MatrixXd z = layer.multiplier * (a * layer.weight.transpose());
    z.rowwise() += layer.bias.transpose();
    smallest = std::min(smallest, z.cwiseAbs().minCoeff());
    plaudit::model::Apply(layer.activation, z, a);
  }
  return smallest;
}

double LossAt(const Network& net, const Dataset& data) {
  EvalOptions loss_only;
  loss_only.lowest_grad_layer = -1;
  return plaudit::model::Evaluate(net, data, loss_only).loss;
}

double RelError(double fd, double g) {
  return std::abs(fd - g) / std::max({std::abs(fd), std::abs(g), kGradFloor});
}

// Central difference of the loss in one parameter, restoring it afterwards.
double CentralDifference(Network& net, const Dataset& data, double& parameter) {
  const double saved = parameter;
  parameter = saved + kStep;
  const double up = LossAt(net, data);
  parameter = saved - kStep;
  const double down = LossAt(net, data);
  parameter = saved;
  return (up - down) / (2.0 * kStep);
}

// Largest relative error over every weight and bias of the network.
double WorstGradientError(Network net, const Dataset& data) {
  const Evaluation ev = plaudit::model::Evaluate(net, data);
  double worst = 0.0;
  for (std::size_t l = 0; l < net.layers.size(); ++l) {
    auto& layer = net.layers[l];
    for (Eigen::Index i = 0; i < layer.weight.size(); ++i) {
      worst = std::max(worst, RelError(CentralDifference(net, data, layer.weight.data()[i]), ev.weight_grad[l].data()[i]));
    }
    if (!layer.has_bias) {
      CHECK(ev.bias_grad[l].isZero());  // a layer without bias has nothing to move
      continue;
    }
    for (Eigen::Index i = 0; i < layer.bias.size(); ++i) {
      worst = std::max(worst, RelError(CentralDifference(net, data, layer.bias.data()[i]), ev.bias_grad[l](i)));
    }
  }
  return worst;
}

// A network and data set whose kinked pre-activations all keep clear of zero.
std::pair<Network, Dataset> Draw(Activation act, Loss loss, Parameterization p, Variant v, std::uint64_t seed) {
  std::mt19937_64 rng(seed);
  for (;;) {
    Network net = RandomNetwork(act, loss, p, v, rng);
    Dataset data = RandomData(loss, 12, rng);
    const bool kinked = act == Activation::kRelu || act == Activation::kLeakyRelu;
    if (!kinked || SmallestPreActivation(net, data.x) > kKinkMargin) return {net, data};
  }
}

std::string CaseName(Activation a, Loss l, Parameterization p, Variant v) {
  return std::string(plaudit::model::ActivationToString(a)) + " / " + plaudit::model::LossToString(l) + " / " +
         plaudit::io::ParameterizationToString(p) + (v.biases ? " / biases" : " / no biases") +
         (v.custom_multiplier ? " / multiplier 0.7 on layer 2" : "");
}

}  // namespace

TEST_CASE("Evaluate's gradients match central differences for every activation, loss and parameterization",
          "[network][gradcheck]") {
  std::uint64_t seed = 2024;
  int cases = 0;
  for (const Activation act : kActivations) {
    for (const Loss loss : kLosses) {
      for (const Parameterization p : kParams) {
        for (const Variant v : {Variant{true, false}, Variant{false, false}, Variant{true, true}}) {
          auto [net, data] = Draw(act, loss, p, v, ++seed);
          INFO(CaseName(act, loss, p, v) << " (seed " << seed << ")");
          CHECK(WorstGradientError(net, data) < kRelTol);
          ++cases;
        }
      }
    }
  }
  CHECK(cases == 7 * 3 * 2 * 3);
}

TEST_CASE("block size changes neither the loss nor the gradients", "[network][gradcheck]") {
  std::uint64_t seed = 77;
  for (const Loss loss : kLosses) {
    for (const Parameterization p : kParams) {
      std::mt19937_64 rng(++seed);
      const Network net = RandomNetwork(Activation::kTanh, loss, p, Variant{}, rng);
      const Dataset data = RandomData(loss, 50, rng);
      INFO(plaudit::model::LossToString(loss) << " / " << plaudit::io::ParameterizationToString(p));
      EvalOptions whole;
      whole.block_rows = 1024;
      const Evaluation ref = plaudit::model::Evaluate(net, data, whole);
      for (const Eigen::Index block : {Eigen::Index{1}, Eigen::Index{7}, Eigen::Index{50}}) {
        EvalOptions o;
        o.block_rows = block;
        const Evaluation ev = plaudit::model::Evaluate(net, data, o);
        CHECK(std::abs(ev.loss - ref.loss) <= kBlockTol * std::abs(ref.loss));
        for (std::size_t l = 0; l < net.layers.size(); ++l) {
          CHECK((ev.weight_grad[l] - ref.weight_grad[l]).norm() <= kBlockTol * ref.weight_grad[l].norm());
          CHECK((ev.bias_grad[l] - ref.bias_grad[l]).norm() <= kBlockTol * ref.bias_grad[l].norm());
        }
      }
    }
  }
}

TEST_CASE("stopping the backward pass early leaves the upper gradients unchanged", "[network][gradcheck]") {
  std::mt19937_64 rng(5);
  const Network net = RandomNetwork(Activation::kGelu, Loss::kCrossEntropy, Parameterization::kMeanField, Variant{}, rng);
  const Dataset data = RandomData(Loss::kCrossEntropy, 20, rng);
  const int last = net.depth() - 1;
  const Evaluation full = plaudit::model::Evaluate(net, data);
  for (const int lowest : {last, 1}) {
    EvalOptions o;
    o.lowest_grad_layer = lowest;
    o.block_rows = 6;
    const Evaluation ev = plaudit::model::Evaluate(net, data, o);
    INFO("lowest_grad_layer " << lowest);
    CHECK(std::abs(ev.loss - full.loss) <= kBlockTol * full.loss);
    for (int l = 0; l < net.depth(); ++l) {
      const auto i = static_cast<std::size_t>(l);
      if (l < lowest) {
        CHECK(ev.weight_grad[i].size() == 0);
        CHECK(ev.bias_grad[i].size() == 0);
      } else {
        CHECK((ev.weight_grad[i] - full.weight_grad[i]).norm() <= kBlockTol * full.weight_grad[i].norm());
        CHECK((ev.bias_grad[i] - full.bias_grad[i]).norm() <= kBlockTol * full.bias_grad[i].norm());
      }
    }
  }
  EvalOptions loss_only;
  loss_only.lowest_grad_layer = -1;
  const Evaluation lo = plaudit::model::Evaluate(net, data, loss_only);
  CHECK(std::abs(lo.loss - full.loss) <= kBlockTol * full.loss);
  for (const auto& g : lo.weight_grad) CHECK(g.size() == 0);
}
