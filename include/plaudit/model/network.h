#pragma once
// A fully-connected network exactly as the contract defines it (section 4):
//   a_0 = x,  z_l = m_l * W_l a_{l-1} + b_l,  a_l = s_l(z_l),  output = a_L.
// Weights are held out x in (n_l x n_{l-1}) whatever the file layout.
#include <string>
#include <vector>

#include <Eigen/Core>

#include "plaudit/io/manifest.h"
#include "plaudit/io/ndarray.h"
#include "plaudit/model/activation.h"

namespace plaudit::model {

struct DenseLayer {
  Eigen::MatrixXd weight;  // n_out x n_in
  Eigen::VectorXd bias;    // n_out; zero when the layer has none
  bool has_bias = false;
  Activation activation = Activation::kIdentity;
  double multiplier = 1.0;
  bool trainable = true;

  Eigen::Index fan_in() const { return weight.cols(); }
  Eigen::Index fan_out() const { return weight.rows(); }
};

struct Network {
  std::vector<DenseLayer> layers;
  Loss loss = Loss::kSquared;

  int depth() const { return static_cast<int>(layers.size()); }
  Eigen::Index input_dim() const { return layers.front().fan_in(); }
  Eigen::Index output_dim() const { return layers.back().fan_out(); }
  std::size_t parameter_count() const;
  bool AllFinite() const;
};

// Multiplier of layer l (0-based) under a parameterization: mean-field gives 1/n_{l-1} for l >= 1.
double DefaultMultiplier(io::Parameterization p, int layer, Eigen::Index fan_in);

// Build from a snapshot's arrays. Shapes are checked against the manifest and each other;
// errors (kBadData) name `file` and the array.
Network NetworkFromArrays(const io::Manifest& manifest, const io::ArrayMap& arrays,
                          const std::string& file);

// The arrays a snapshot of this network would hold, in the manifest's names and layout.
io::ArrayMap NetworkToArrays(const io::Manifest& manifest, const Network& net);

// Factor that turns the raw gradient of layer l into the parameterization's own scale, in which
// every weight moves by O(1) in O(1) time: 1 / (m_l * m_{l+1}) for weights and 1 / m_{l+1} for
// biases, with m_{L+1} = 1. Standard parameterization: 1.
// Same depth and the same weight shape in every layer (snapshots of one architecture).
bool SameLayerShapes(const Network& a, const Network& b);

double WeightGradScale(const Network& net, int layer);
double BiasGradScale(const Network& net, int layer);

}  // namespace plaudit::model
