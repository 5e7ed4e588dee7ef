#include "op_count.h"

#include <algorithm>

namespace plaudit::bench {
namespace {

double LayerProduct(const model::DenseLayer& layer, Eigen::Index rows) {
  return 2.0 * static_cast<double>(rows) * static_cast<double>(layer.fan_out()) * static_cast<double>(layer.fan_in());
}

}  // namespace

double ForwardFlops(const model::Network& net, Eigen::Index rows) {
  double flops = 0.0;
  for (const auto& layer : net.layers) flops += LayerProduct(layer, rows);
  return flops;
}

double BackwardFlops(const model::Network& net, Eigen::Index rows, int lowest) {
  double flops = 0.0;
  for (int l = std::max(lowest, 0); l < net.depth(); ++l) {
    const double product = LayerProduct(net.layers[static_cast<std::size_t>(l)], rows);
    flops += product;                   // weight gradient
    if (l > lowest) flops += product;   // delta to the layer below
  }
  return flops;
}

double GradientPassFlops(const model::Network& net, Eigen::Index rows, int lowest, Eigen::Index snapshots) {
  return static_cast<double>(snapshots) * (ForwardFlops(net, rows) + BackwardFlops(net, rows, lowest));
}

FlopCount SupportSpreadFlops(Eigen::Index neurons, int dims, const checks::SupportSpreadOptions& o) {
  const double estimates = 2.0 + o.null_replicas;
  FlopCount c;
  c.dbl = estimates * 2.0 * o.probes * static_cast<double>(neurons) * dims;
  return c;
}

FlopCount ResidualFitFlops(const model::Network& net, Eigen::Index rows, const checks::ResidualFitOptions& o) {
  const double n = static_cast<double>(rows);
  const double d1 = static_cast<double>(net.input_dim()) + 1.0;
  const double m = o.features;
  const double k = static_cast<double>(net.output_dim()) * (o.permutations + 1.0);
  const double folds = o.folds;
  const double n_fold = n / folds;
  FlopCount c;
  c.dbl += ForwardFlops(net, rows);
  c.dbl += 2.0 * n * d1 * m;                  // random features
  c.dbl += n * m * m;                         // fold Grams (lower triangles)
  c.dbl += 2.0 * n * m * k;                   // fold cross products
  c.dbl += folds * (8.0 / 3.0) * m * m * m;   // reduction + Q per fold
  c.dbl += folds * 2.0 * m * m * k;           // Q^T cross per fold
  c.sgl += folds * 2.0 * n_fold * m * m;      // held-out rows x Q
  c.sgl += folds * o.ridge_grid * 2.0 * n_fold * m * k;  // one product per strength
  if (o.new_neurons > 0) {
    // F^T T scoring the starts: per fold per unit, and once on all rows.
    c.dbl += (folds * o.new_neurons + 1.0) * 2.0 * n * m * static_cast<double>(net.output_dim());
  }
  return c;
}

}  // namespace plaudit::bench
