#include "plaudit/model/network.h"

#include "plaudit/core/error.h"

namespace plaudit::model {
namespace {

const io::NdArray& Find(const io::ArrayMap& arrays, const std::string& name, const std::string& file) {
  const auto it = arrays.find(name);
  if (it == arrays.end()) raise(ExitCode::kBadData, "{}: array '{}' named in the manifest is missing", file, name);
  return it->second;
}

Eigen::MatrixXd ReadWeight(const io::NdArray& a, io::WeightLayout layout, const std::string& name,
                           const std::string& file) {
  if (a.ndim() != 2) {
    raise(ExitCode::kBadData, "{}: weight '{}' must be 2-D, found shape {}", file, name, a.ShapeString());
  }
  // A layer without inputs or units computes nothing (and a mean-field factor of 1/0).
  if (a.shape[0] == 0 || a.shape[1] == 0) {
    raise(ExitCode::kBadData, "{}: weight '{}' has shape {}: every layer needs at least one input and one unit", file,
          name, a.ShapeString());
  }
  Eigen::MatrixXd w = a.AsMatrix(file);
  if (layout == io::WeightLayout::kInOut) w.transposeInPlace();
  return w;
}

Eigen::VectorXd ReadBias(const io::NdArray& a, Eigen::Index fan_out, const std::string& name, const std::string& file) {
  const bool vector_like = a.ndim() == 1 || (a.ndim() == 2 && (a.shape[0] == 1 || a.shape[1] == 1));
  if (!vector_like || a.size() != fan_out) {
    raise(ExitCode::kBadData, "{}: bias '{}' has shape {}, expected ({},) to match its weight's {} outputs", file,
          name, a.ShapeString(), fan_out, fan_out);
  }
  return Eigen::Map<const Eigen::VectorXd>(a.values.data(), fan_out);
}

}  // namespace

std::size_t Network::parameter_count() const {
  std::size_t n = 0;
  for (const auto& l : layers) n += static_cast<std::size_t>(l.weight.size() + (l.has_bias ? l.bias.size() : 0));
  return n;
}

bool Network::AllFinite() const {
  for (const auto& l : layers) {
    if (!l.weight.allFinite() || !l.bias.allFinite()) return false;
  }
  return true;
}

double DefaultMultiplier(io::Parameterization p, int layer, Eigen::Index fan_in) {
  if (p == io::Parameterization::kStandard || layer == 0) return 1.0;
  return 1.0 / static_cast<double>(fan_in);
}

Network NetworkFromArrays(const io::Manifest& manifest, const io::ArrayMap& arrays, const std::string& file) {
  Network net;
  net.loss = manifest.loss;
  for (std::size_t l = 0; l < manifest.layers.size(); ++l) {
    const auto& spec = manifest.layers[l];
    DenseLayer layer;
    layer.weight = ReadWeight(Find(arrays, spec.weight, file), manifest.weight_layout, spec.weight, file);
    if (l > 0 && layer.fan_in() != net.layers.back().fan_out()) {
      raise(ExitCode::kBadData,
            "{}: layer {} weight '{}' takes {} inputs but layer {} ('{}') has {} outputs (weight_layout is {})", file,
            l + 1, spec.weight, layer.fan_in(), l, manifest.layers[l - 1].weight, net.layers.back().fan_out(),
            io::WeightLayoutToString(manifest.weight_layout));
    }
    layer.has_bias = spec.bias.has_value();
    layer.bias = layer.has_bias ? ReadBias(Find(arrays, *spec.bias, file), layer.fan_out(), *spec.bias, file)
                                : Eigen::VectorXd::Zero(layer.fan_out());
    layer.activation = spec.activation;
    layer.multiplier = spec.multiplier.value_or(DefaultMultiplier(manifest.parameterization, static_cast<int>(l), layer.fan_in()));
    layer.trainable = spec.trainable;
    net.layers.push_back(std::move(layer));
  }
  return net;
}

io::ArrayMap NetworkToArrays(const io::Manifest& manifest, const Network& net) {
  io::ArrayMap arrays;
  for (std::size_t l = 0; l < manifest.layers.size(); ++l) {
    const auto& spec = manifest.layers[l];
    const auto& layer = net.layers[l];
    arrays[spec.weight] = io::MakeArray(manifest.weight_layout == io::WeightLayout::kInOut
                                            ? Eigen::MatrixXd(layer.weight.transpose())
                                            : layer.weight);
    if (spec.bias) arrays[*spec.bias] = io::MakeVector(layer.bias);
  }
  return arrays;
}

bool SameLayerShapes(const Network& a, const Network& b) {
  if (a.depth() != b.depth()) return false;
  for (std::size_t l = 0; l < a.layers.size(); ++l) {
    const auto& wa = a.layers[l].weight;
    const auto& wb = b.layers[l].weight;
    if (wa.rows() != wb.rows() || wa.cols() != wb.cols()) return false;
  }
  return true;
}

double WeightGradScale(const Network& net, int layer) {
  const double next = layer + 1 < net.depth() ? net.layers[static_cast<std::size_t>(layer) + 1].multiplier : 1.0;
  return 1.0 / (net.layers[static_cast<std::size_t>(layer)].multiplier * next);
}

double BiasGradScale(const Network& net, int layer) {
  return layer + 1 < net.depth() ? 1.0 / net.layers[static_cast<std::size_t>(layer) + 1].multiplier : 1.0;
}

}  // namespace plaudit::model
