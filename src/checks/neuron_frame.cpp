#include "plaudit/checks/neuron_frame.h"

#include <algorithm>
#include <cmath>
#include <utility>

#include "plaudit/stats/pca.h"

namespace plaudit::checks {
namespace {

using Eigen::Index;

// A principal direction of corr(x) with a moment below this share of the largest is rank noise.
constexpr double kRankTolerance = 1e-9;
// A column whose spread is below this share of its magnitude is constant up to round-off.
constexpr double kConstantColumn = 1e-12;
// A projected neuron shorter than this share of the longest |v_j| has no direction.
constexpr double kZeroProjection = 1e-12;

// Principal directions with a moment above rank noise, as (moment, direction) pairs, each
// direction padded with `pad` zeros.
std::vector<std::pair<double, Eigen::VectorXd>> LeadingDirections(const Eigen::MatrixXd& z, int count, Index pad,
                                                                   std::uint64_t seed, double* total) {
  const stats::PrincipalAxes axes = stats::PrincipalDirections(z, count, /*centre=*/false, seed);
  *total = axes.total;
  const double largest = axes.moments.size() > 0 ? axes.moments(0) : 0.0;
  std::vector<std::pair<double, Eigen::VectorXd>> columns;
  for (Index c = 0; c < axes.moments.size(); ++c) {
    if (!(axes.moments(c) > kRankTolerance * largest)) break;
    Eigen::VectorXd column = Eigen::VectorXd::Zero(z.cols() + pad);
    column.head(z.cols()) = axes.directions.col(c);
    columns.emplace_back(axes.moments(c), std::move(column));
  }
  return columns;
}

}  // namespace

Standardisation Standardise(const Eigen::MatrixXd& x) {
  Standardisation s;
  s.mean = x.colwise().mean();
  const Eigen::MatrixXd centred = x.rowwise() - s.mean;
  s.scale = (centred.colwise().squaredNorm() / static_cast<double>(x.rows())).cwiseSqrt();
  const Eigen::RowVectorXd magnitude = x.cwiseAbs().colwise().maxCoeff();
  s.constant.resize(static_cast<std::size_t>(x.cols()));
  for (Index c = 0; c < x.cols(); ++c) {
    const bool flat = !(s.scale(c) > kConstantColumn * magnitude(c));
    s.constant[static_cast<std::size_t>(c)] = flat;
    if (flat) s.scale(c) = 1.0;
  }
  return s;
}

Eigen::MatrixXd StandardisedInputs(const Eigen::MatrixXd& x, const Standardisation& s) {
  Eigen::MatrixXd out = (x.rowwise() - s.mean).array().rowwise() / s.scale.array();
  for (Index c = 0; c < x.cols(); ++c) {
    if (s.constant[static_cast<std::size_t>(c)]) out.col(c).setZero();
  }
  return out;
}

NeuronFrame FrameOf(const Eigen::MatrixXd& x, const Standardisation& s, bool augmented, int requested,
                    std::uint64_t seed) {
  NeuronFrame frame;
  frame.augmented = augmented;
  frame.requested = requested;
  const Index d = x.cols();
  const int want = static_cast<int>(std::clamp<Index>(augmented ? requested - 1 : requested, 1, d));
  std::vector<std::pair<double, Eigen::VectorXd>> columns;
  if (augmented) {
    columns = LeadingDirections(StandardisedInputs(x, s), want, 1, seed, &frame.total);
    frame.total += 1.0;
    if (columns.empty()) return frame;  // every input column constant
    Eigen::VectorXd constant = Eigen::VectorXd::Zero(d + 1);
    constant(d) = 1.0;
    const auto at = std::find_if(columns.begin(), columns.end(), [](const auto& c) { return c.first < 1.0; });
    frame.constant_column = at - columns.begin();
    columns.emplace(at, 1.0, std::move(constant));
  } else {
    const Eigen::MatrixXd scaled = x.array().rowwise() / s.scale.array();
    columns = LeadingDirections(scaled, want, 0, seed, &frame.total);
  }
  frame.basis.resize(columns.empty() ? 0 : columns.front().second.size(), static_cast<Index>(columns.size()));
  frame.moments.resize(static_cast<Index>(columns.size()));
  for (std::size_t c = 0; c < columns.size(); ++c) {
    frame.moments(static_cast<Index>(c)) = columns[c].first;
    frame.basis.col(static_cast<Index>(c)) = columns[c].second;
  }
  return frame;
}

Eigen::MatrixXd NeuronVectors(const model::DenseLayer& layer, const Standardisation& s, bool augmented) {
  const Index d = layer.fan_in();
  const Eigen::MatrixXd w = layer.multiplier * layer.weight;
  if (!augmented) return w * s.scale.transpose().asDiagonal();
  Eigen::MatrixXd v(layer.fan_out(), d + 1);
  v.leftCols(d) = w * s.scale.transpose().asDiagonal();
  v.col(d) = w * s.mean.transpose();
  if (layer.has_bias && layer.bias.size() == layer.fan_out()) v.col(d) += layer.bias;
  return v;
}

NeuronDirections ProjectNeurons(const model::DenseLayer& layer, const Standardisation& s, const NeuronFrame& frame) {
  const Eigen::MatrixXd v = NeuronVectors(layer, s, frame.augmented);
  NeuronDirections out;
  out.norms = v.rowwise().norm();
  const Eigen::MatrixXd projected = v * frame.basis;
  const Eigen::VectorXd length = projected.rowwise().norm();
  const double floor = kZeroProjection * (out.norms.size() > 0 ? out.norms.maxCoeff() : 0.0);
  for (Index j = 0; j < v.rows(); ++j) {
    (length(j) > floor && std::isfinite(length(j)) ? out.kept : out.dropped).push_back(j);
  }
  out.unit = length(out.kept).cwiseInverse().asDiagonal() * projected(out.kept, Eigen::all);
  return out;
}

}  // namespace plaudit::checks
