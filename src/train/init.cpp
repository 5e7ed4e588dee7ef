#include "plaudit/train/init.h"

#include <cmath>

#include "plaudit/core/error.h"
#include "plaudit/train/draws.h"

namespace plaudit::train {
namespace {

double GaussianSigma(io::Parameterization p, const model::DenseLayer& layer, double gain) {
  if (p == io::Parameterization::kMeanField) return gain;
  return gain / std::sqrt(static_cast<double>(layer.fan_in()));
}

void FillGaussian(model::DenseLayer& layer, io::Parameterization p, double gain, std::mt19937_64& rng) {
  layer.weight = GaussianSigma(p, layer, gain) * NormalMatrix(layer.fan_out(), layer.fan_in(), rng);
}

double DrawRadius(const InitOptions& o, std::mt19937_64& rng) {
  if (o.radius_law == RadiusLaw::kFixed) return o.radius;
  const double lo = std::log(o.radius_min);
  const double hi = std::log(o.radius_max);
  return std::exp(lo + (hi - lo) * UniformOpen01(rng));
}

void FillSphere(model::DenseLayer& layer, const InitOptions& o, std::mt19937_64& rng) {
  layer.weight = NormalMatrix(layer.fan_out(), layer.fan_in(), rng);
  for (Eigen::Index j = 0; j < layer.fan_out(); ++j) {
    // A normalised Gaussian vector is uniform on the sphere (rotation invariance).
    const double norm = layer.weight.row(j).norm();
    layer.weight.row(j) *= DrawRadius(o, rng) / norm;
  }
}

// Copy cluster centres (the first `clusters` rows / columns) onto every neuron, then jitter.
Eigen::MatrixXd CopyRows(const Eigen::MatrixXd& centres, Eigen::Index rows, double jitter, std::mt19937_64& rng) {
  Eigen::MatrixXd out(rows, centres.cols());
  for (Eigen::Index j = 0; j < rows; ++j) out.row(j) = centres.row(j % centres.rows());
  if (jitter > 0.0) out += jitter * NormalMatrix(rows, centres.cols(), rng);
  return out;
}

void FillCollapsed(model::Network& net, io::Parameterization p, const InitOptions& o, std::mt19937_64& rng) {
  auto& first = net.layers.front();
  const Eigen::Index width = first.fan_out();
  const Eigen::Index c = o.clusters;
  const Eigen::MatrixXd centres = GaussianSigma(p, first, o.gain) * NormalMatrix(c, first.fan_in(), rng);
  first.weight = CopyRows(centres, width, o.jitter, rng);
  if (net.depth() < 2) return;
  auto& next = net.layers[1];
  FillGaussian(next, p, o.gain, rng);
  // Outgoing weights must agree too, or the copies would receive different gradients.
  const Eigen::MatrixXd out_centres = next.weight.leftCols(c).transpose();
  next.weight = CopyRows(out_centres, width, o.jitter, rng).transpose();
}

// Random biases, when asked for: after every weight, so they do not shift the weights' draws.
void DrawBiases(model::Network& net, double bias_std, std::mt19937_64& rng) {
  if (bias_std <= 0.0) return;
  for (auto& layer : net.layers) {
    if (!layer.has_bias) continue;
    for (Eigen::Index i = 0; i < layer.fan_out(); ++i) layer.bias(i) = bias_std * StandardNormal(rng);
  }
}

}  // namespace

const char* InitSchemeToString(InitScheme s) {
  switch (s) {
    case InitScheme::kGaussian: return "gaussian";
    case InitScheme::kSphere: return "sphere";
    case InitScheme::kCollapsed: return "collapsed";
    case InitScheme::kLatent: return "latent";
  }
  return "?";
}

std::optional<InitScheme> InitSchemeFromString(const std::string& name) {
  if (name == "gaussian") return InitScheme::kGaussian;
  if (name == "sphere") return InitScheme::kSphere;
  if (name == "collapsed") return InitScheme::kCollapsed;
  if (name == "latent") return InitScheme::kLatent;
  return std::nullopt;
}

void ValidateInitOptions(const InitOptions& o, Eigen::Index first_layer_width) {
  if (!(o.gain > 0.0) || !std::isfinite(o.gain)) raise(ExitCode::kUsage, "init gain must be a positive number, got {}", o.gain);
  if (!(o.scale > 0.0) || !std::isfinite(o.scale)) raise(ExitCode::kUsage, "init scale must be a positive number, got {}", o.scale);
  if (o.scheme == InitScheme::kSphere) {
    if (o.radius_law == RadiusLaw::kFixed && (!(o.radius > 0.0) || !std::isfinite(o.radius))) {
      raise(ExitCode::kUsage, "sphere radius must be a positive number, got {}", o.radius);
    }
    if (o.radius_law == RadiusLaw::kLogUniform &&
        (!(o.radius_min > 0.0) || !(o.radius_min <= o.radius_max) || !std::isfinite(o.radius_max))) {
      raise(ExitCode::kUsage, "sphere radius range needs 0 < min <= max, got [{}, {}]", o.radius_min, o.radius_max);
    }
  }
  if (!(o.bias_std >= 0.0) || !std::isfinite(o.bias_std)) {
    raise(ExitCode::kUsage, "bias std must be >= 0, got {}", o.bias_std);
  }
  if (o.scheme == InitScheme::kLatent) {
    if (std::string why; !o.latent.IsValid(&why)) raise(ExitCode::kUsage, "latent initialisation: {}", why);
  }
  if (o.scheme == InitScheme::kCollapsed) {
    if (o.clusters < 1 || o.clusters > first_layer_width) {
      raise(ExitCode::kUsage, "clusters must be between 1 and the first layer's width {}, got {}", first_layer_width,
            o.clusters);
    }
    if (!(o.jitter >= 0.0) || !std::isfinite(o.jitter)) raise(ExitCode::kUsage, "jitter must be >= 0, got {}", o.jitter);
  }
}

void InitializeWeights(model::Network& net, io::Parameterization p, const InitOptions& o, std::mt19937_64& rng) {
  ValidateInitOptions(o, net.layers.front().fan_out());
  int first_gaussian = 0;
  if (o.scheme == InitScheme::kLatent) {
    LatentInitOptions latent = o.latent;
    latent.gain = o.gain;
    latent.scale = o.scale;
    InitializeLatent(net, p, latent, rng());
    DrawBiases(net, o.bias_std, rng);
    return;
  }
  if (o.scheme == InitScheme::kSphere) {
    FillSphere(net.layers.front(), o, rng);
    first_gaussian = 1;
  } else if (o.scheme == InitScheme::kCollapsed) {
    FillCollapsed(net, p, o, rng);
    first_gaussian = 2;
  }
  for (int l = first_gaussian; l < net.depth(); ++l) FillGaussian(net.layers[static_cast<std::size_t>(l)], p, o.gain, rng);
  for (auto& layer : net.layers) {
    layer.weight *= o.scale;
    layer.bias.setZero(layer.fan_out());
  }
  DrawBiases(net, o.bias_std, rng);
}

}  // namespace plaudit::train
