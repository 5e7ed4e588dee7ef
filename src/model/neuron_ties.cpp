#include "plaudit/model/neuron_ties.h"

#include <algorithm>
#include <cmath>

namespace plaudit::model {
namespace {

// The parameters that define neuron j of hidden layer l: incoming row, bias, outgoing column.
Eigen::VectorXd NeuronVector(const Network& net, int l, Eigen::Index j) {
  const DenseLayer& in = net.layers[static_cast<std::size_t>(l)];
  const DenseLayer& out = net.layers[static_cast<std::size_t>(l + 1)];
  Eigen::VectorXd v(in.fan_in() + 1 + out.fan_out());
  v << in.weight.row(j).transpose(), in.has_bias ? in.bias(j) : 0.0, out.weight.col(j);
  return v;
}

const ParameterLayout::Block* BlockOf(const ParameterLayout& layout, int layer) {
  for (const auto& b : layout.blocks) {
    if (b.layer == layer) return &b;
  }
  return nullptr;
}

// Replace the entries at `offsets` by their mean.
void Average(Eigen::VectorXd& v, const std::vector<Eigen::Index>& offsets) {
  double sum = 0.0;
  for (Eigen::Index o : offsets) sum += v(o);
  const double mean = sum / static_cast<double>(offsets.size());
  for (Eigen::Index o : offsets) v(o) = mean;
}

}  // namespace

std::vector<NeuronTies> FindNeuronTies(const Network& net, double tolerance) {
  std::vector<NeuronTies> out;
  for (int l = 0; l + 1 < net.depth(); ++l) {
    const Eigen::Index n = net.layers[static_cast<std::size_t>(l)].fan_out();
    std::vector<Eigen::VectorXd> vecs;
    vecs.reserve(static_cast<std::size_t>(n));
    for (Eigen::Index j = 0; j < n; ++j) vecs.push_back(NeuronVector(net, l, j));
    if (vecs.empty()) continue;
    // Copies share a key (a fixed projection) to within tolerance: sort by it and compare each
    // neuron only with those whose key is that close, not with all n - 1 others.
    const Eigen::Index len = vecs.front().size();
    Eigen::VectorXd w(len);
    for (Eigen::Index i = 0; i < len; ++i) w(i) = 1.0 + 0.5 * std::sin(static_cast<double>(i + 1));
    std::vector<double> key(static_cast<std::size_t>(n)), scale(static_cast<std::size_t>(n));
    for (Eigen::Index j = 0; j < n; ++j) {
      key[static_cast<std::size_t>(j)] = w.dot(vecs[static_cast<std::size_t>(j)]);
      scale[static_cast<std::size_t>(j)] = vecs[static_cast<std::size_t>(j)].cwiseAbs().maxCoeff();
    }
    std::vector<Eigen::Index> order(static_cast<std::size_t>(n));
    for (Eigen::Index j = 0; j < n; ++j) order[static_cast<std::size_t>(j)] = j;
    std::sort(order.begin(), order.end(), [&](Eigen::Index a, Eigen::Index b) {
      return key[static_cast<std::size_t>(a)] < key[static_cast<std::size_t>(b)];
    });
    const double reach = tolerance * w.sum() * *std::max_element(scale.begin(), scale.end());
    std::vector<bool> used(static_cast<std::size_t>(n), false);
    NeuronTies ties;
    ties.layer = l;
    for (std::size_t p = 0; p < order.size(); ++p) {
      const Eigen::Index j = order[p];
      if (used[static_cast<std::size_t>(j)]) continue;
      std::vector<Eigen::Index> group{j};
      const Eigen::VectorXd& a = vecs[static_cast<std::size_t>(j)];
      for (std::size_t q = p + 1; q < order.size(); ++q) {
        const Eigen::Index k = order[q];
        const double s = std::max(scale[static_cast<std::size_t>(j)], scale[static_cast<std::size_t>(k)]);
        if (key[static_cast<std::size_t>(k)] - key[static_cast<std::size_t>(j)] > reach) break;
        if (used[static_cast<std::size_t>(k)]) continue;
        if ((a - vecs[static_cast<std::size_t>(k)]).cwiseAbs().maxCoeff() <= tolerance * s) {
          group.push_back(k);
          used[static_cast<std::size_t>(k)] = true;
        }
      }
      if (group.size() >= 2) {
        std::sort(group.begin(), group.end());
        ties.groups.push_back(std::move(group));
      }
    }
    std::sort(ties.groups.begin(), ties.groups.end());
    if (!ties.groups.empty()) out.push_back(std::move(ties));
  }
  return out;
}

Eigen::Index TiedNeuronCount(const std::vector<NeuronTies>& ties) {
  Eigen::Index count = 0;
  for (const auto& t : ties) {
    for (const auto& g : t.groups) count += static_cast<Eigen::Index>(g.size());
  }
  return count;
}

void ProjectOntoTies(const ParameterLayout& layout, const std::vector<NeuronTies>& ties, Eigen::VectorXd& v) {
  std::vector<Eigen::Index> offsets;
  for (const auto& t : ties) {
    const ParameterLayout::Block* in = BlockOf(layout, t.layer);
    const ParameterLayout::Block* out = BlockOf(layout, t.layer + 1);
    for (const auto& group : t.groups) {
      if (in != nullptr) {
        for (Eigen::Index c = 0; c < in->cols; ++c) {  // incoming weight (i, c) of each neuron i
          offsets.clear();
          for (Eigen::Index i : group) offsets.push_back(in->weight_offset + c * in->rows + i);
          Average(v, offsets);
        }
        if (in->bias_offset >= 0) {
          offsets.clear();
          for (Eigen::Index i : group) offsets.push_back(in->bias_offset + i);
          Average(v, offsets);
        }
      }
      if (out != nullptr) {
        for (Eigen::Index r = 0; r < out->rows; ++r) {  // outgoing weight (r, j) of each neuron j
          offsets.clear();
          for (Eigen::Index j : group) offsets.push_back(out->weight_offset + j * out->rows + r);
          Average(v, offsets);
        }
      }
    }
  }
}

}  // namespace plaudit::model
