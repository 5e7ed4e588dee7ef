#include "plaudit/train/latent_init.h"

#include <cmath>
#include <random>
#include <vector>

#include <fmt/format.h>

#include "plaudit/core/error.h"
#include "plaudit/train/draws.h"

namespace plaudit::train {
namespace {

using Eigen::Index;
using Eigen::MatrixXd;

constexpr double kTwoPi = 6.283185307179586476925286766559;
constexpr int kMaxLatentDim = 64;
constexpr int kMaxFeatures = 4096;

// The gaussian scheme's sigma (init.cpp): mean-field entries stay O(1), standard ones shrink
// with the fan-in.
double GaussianSigma(io::Parameterization p, Index fan_in, double gain) {
  if (p == io::Parameterization::kMeanField) return gain;
  return gain / std::sqrt(static_cast<double>(fan_in));
}

// n x R matrix of sqrt(2) cos(Omega u_j / lengthscale + beta) for n fresh latent points: the
// features of one hidden layer's neurons. E[f_r(u)^2] = 1, so kernels built from them have unit
// marginal variance per feature pair.
MatrixXd LayerFeatures(Index neurons, const LatentInitOptions& o, std::mt19937_64& rng) {
  const Index m = o.latent_dim;
  const Index r = o.features;
  const MatrixXd latent = NormalMatrix(neurons, m, rng);
  const MatrixXd omega = NormalMatrix(m, r, rng) / o.lengthscale;
  Eigen::RowVectorXd phase(r);
  for (Index k = 0; k < r; ++k) phase(k) = kTwoPi * UniformOpen01(rng);
  const MatrixXd angle = (latent * omega).rowwise() + phase;
  return std::sqrt(2.0) * angle.array().cos().matrix();
}

void FillGaussian(model::Network& net, io::Parameterization p, const LatentInitOptions& o,
                  std::mt19937_64& rng) {
  for (auto& layer : net.layers) {
    layer.weight = GaussianSigma(p, layer.fan_in(), o.gain) *
                   NormalMatrix(layer.fan_out(), layer.fan_in(), rng);
  }
}

}  // namespace

bool LatentInitOptions::IsValid(std::string* why) const {
  auto bad = [&](std::string message) {
    if (why != nullptr) *why = "latent init: " + message;
    return false;
  };
  if (latent_dim < 1 || latent_dim > kMaxLatentDim) {
    return bad(fmt::format("latent_dim is {}, must be between 1 and {}", latent_dim, kMaxLatentDim));
  }
  if (features < 1 || features > kMaxFeatures) {
    return bad(fmt::format("features is {}, must be between 1 and {}", features, kMaxFeatures));
  }
  if (!(std::isfinite(lengthscale) && lengthscale > 0.0)) {
    return bad(fmt::format("lengthscale is {}, must be finite and > 0", lengthscale));
  }
  if (!(std::isfinite(gain) && gain > 0.0)) {
    return bad(fmt::format("gain is {}, must be finite and > 0", gain));
  }
  if (!(std::isfinite(scale) && scale > 0.0)) {
    return bad(fmt::format("scale is {}, must be finite and > 0", scale));
  }
  return true;
}

void InitializeLatent(model::Network& net, io::Parameterization p, const LatentInitOptions& o,
                      std::uint64_t seed) {
  if (std::string why; !o.IsValid(&why)) raise(ExitCode::kUsage, "{}", why);
  if (net.layers.empty()) raise(ExitCode::kUsage, "latent init: the network has no layers");
  std::mt19937_64 rng(seed);
  const int depth = net.depth();
  if (depth == 1) {
    FillGaussian(net, p, o, rng);
  } else {
    std::vector<MatrixXd> features;
    for (int l = 0; l + 1 < depth; ++l) {
      features.push_back(LayerFeatures(net.layers[static_cast<std::size_t>(l)].fan_out(), o, rng));
    }
    const double r = static_cast<double>(o.features);
    auto& first = net.layers.front();
    first.weight = (GaussianSigma(p, first.fan_in(), o.gain) / std::sqrt(r)) * features[0] *
                   NormalMatrix(o.features, first.fan_in(), rng);
    for (int l = 1; l + 1 < depth; ++l) {
      auto& layer = net.layers[static_cast<std::size_t>(l)];
      const double k = o.gain * std::sqrt(r) /
                       (layer.multiplier * static_cast<double>(layer.fan_in()));
      const MatrixXd mixed = NormalMatrix(o.features, o.features, rng) *
                             features[static_cast<std::size_t>(l) - 1].transpose();
      layer.weight = (k / r) * features[static_cast<std::size_t>(l)] * mixed;
    }
    auto& out = net.layers.back();
    out.weight = (GaussianSigma(p, out.fan_in(), o.gain) / std::sqrt(r)) *
                 NormalMatrix(out.fan_out(), o.features, rng) * features.back().transpose();
  }
  for (auto& layer : net.layers) {
    layer.weight *= o.scale;
    layer.bias.setZero(layer.fan_out());
  }
}

}  // namespace plaudit::train
