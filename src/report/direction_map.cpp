#include "plaudit/report/direction_map.h"

#include <algorithm>
#include <cmath>
#include <utility>

#include "plaudit/core/error.h"
#include "plaudit/stats/pca.h"

namespace plaudit::report {
namespace {

using Eigen::Index;
using Eigen::MatrixXd;
using Eigen::VectorXd;

// The same tolerances as support-spread, so that the frame is the check's.
constexpr int kAutoDims = 6;
constexpr double kRankTolerance = 1e-9;
constexpr double kConstantColumn = 1e-12;
constexpr double kZeroProjection = 1e-12;

struct Standardisation {
  Eigen::RowVectorXd mean, scale;
  std::vector<bool> constant;
};

Standardisation Standardise(const MatrixXd& x) {
  Standardisation s;
  s.mean = x.colwise().mean();
  const MatrixXd centred = x.rowwise() - s.mean;
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

struct Frame {
  MatrixXd basis;  // columns, largest moment first
  VectorXd moments;
  double total = 0.0;
  Index constant_column = -1;  // the column meeting the constant input (augmented frame)
};

// support-spread's frame: augmented, the constant direction (moment 1) placed by its moment
// among the principal directions of corr(x); bias-free, the leading directions of x ./ sd.
Frame FrameOf(const MatrixXd& x, const Standardisation& s, bool augmented, int requested) {
  const Index d = x.cols();
  MatrixXd z;
  if (augmented) {
    z = (x.rowwise() - s.mean).array().rowwise() / s.scale.array();
    for (Index c = 0; c < d; ++c) if (s.constant[static_cast<std::size_t>(c)]) z.col(c).setZero();
  } else {
    z = x.array().rowwise() / s.scale.array();
  }
  const Index want = std::clamp<Index>(augmented ? requested - 1 : requested, 1, d);
  const stats::PrincipalAxes axes = stats::PrincipalDirections(z, want, /*centre=*/false);
  const double largest = axes.moments.size() > 0 ? axes.moments(0) : 0.0;
  std::vector<std::pair<double, VectorXd>> columns;
  for (Index c = 0; c < axes.moments.size(); ++c) {
    if (!(axes.moments(c) > kRankTolerance * largest)) break;
    VectorXd column = VectorXd::Zero(augmented ? d + 1 : d);
    column.head(d) = axes.directions.col(c);
    columns.emplace_back(axes.moments(c), std::move(column));
  }
  Frame f;
  f.total = axes.total;
  if (augmented && !columns.empty()) {
    f.total += 1.0;
    VectorXd constant = VectorXd::Zero(d + 1);
    constant(d) = 1.0;
    const auto at = std::find_if(columns.begin(), columns.end(), [](const auto& c) { return c.first < 1.0; });
    f.constant_column = at - columns.begin();
    columns.emplace(at, 1.0, std::move(constant));
  }
  f.basis.resize(augmented ? d + 1 : d, static_cast<Index>(columns.size()));
  f.moments.resize(static_cast<Index>(columns.size()));
  for (std::size_t c = 0; c < columns.size(); ++c) {
    f.basis.col(static_cast<Index>(c)) = columns[c].second;
    f.moments(static_cast<Index>(c)) = columns[c].first;
  }
  return f;
}

MatrixXd NeuronVectors(const model::DenseLayer& layer, const Standardisation& s, bool augmented) {
  const Index d = layer.fan_in();
  const MatrixXd w = layer.multiplier * layer.weight;
  if (!augmented) return w * s.scale.transpose().asDiagonal();
  MatrixXd v(layer.fan_out(), d + 1);
  v.leftCols(d) = w * s.scale.transpose().asDiagonal();
  v.col(d) = w * s.mean.transpose();
  if (layer.has_bias && layer.bias.size() == layer.fan_out()) v.col(d) += layer.bias;
  return v;
}

DirectionPoints Project(const model::Network& net, const Standardisation& s, const Frame& f, bool augmented) {
  DirectionPoints out;
  const MatrixXd v = NeuronVectors(net.layers.front(), s, augmented);
  const MatrixXd projected = v * f.basis;
  const VectorXd norms = v.rowwise().norm();
  const double floor = kZeroProjection * (norms.size() ? norms.maxCoeff() : 0.0);
  VectorXd outgoing;
  if (net.depth() >= 2) outgoing = net.layers[1].weight.colwise().norm().transpose();
  for (Index j = 0; j < v.rows(); ++j) {
    const double length = projected.row(j).norm();
    if (!(length > floor) || !std::isfinite(length)) continue;
    out.x.push_back(projected(j, 0) / length);
    out.y.push_back(projected(j, 1) / length);
    out.neuron.push_back(j);
    if (outgoing.size() == v.rows()) out.weight.push_back(outgoing(j));
  }
  return out;
}

// A direction of the standardised (augmented) input space in the map: projected on the frame,
// normalised, first two coordinates.
std::optional<std::array<double, 2>> Place(const nlohmann::json& j, const Frame& f) {
  if (!j.is_array()) return std::nullopt;
  VectorXd u(static_cast<Index>(j.size()));
  for (std::size_t i = 0; i < j.size(); ++i) {
    if (!j[i].is_number()) return std::nullopt;
    u(static_cast<Index>(i)) = j[i].get<double>();
  }
  // residual-fit's units always meet the constant input; a bias-free frame has no such axis.
  if (u.size() == f.basis.rows() + 1) u.conservativeResize(f.basis.rows());
  if (u.size() != f.basis.rows()) return std::nullopt;
  const VectorXd p = f.basis.transpose() * u;
  const double length = p.norm();
  if (!(length > 0.0) || !std::isfinite(length)) return std::nullopt;
  return std::array<double, 2>{p(0) / length, p(1) / length};
}

}  // namespace

DirectionMap ComputeDirectionMap(const model::Network& first, const model::Network& last, const model::Dataset& data,
                                 const audit::AuditReport& report) {
  if (last.depth() < 1 || first.depth() < 1) raise(ExitCode::kBadData, "direction map: the network has no layers");
  const model::DenseLayer& layer = last.layers.front();
  const Index d = layer.fan_in();
  if (data.dim() != d || first.layers.front().weight.rows() != layer.fan_out() || first.layers.front().fan_in() != d) {
    raise(ExitCode::kBadData, "direction map: data have {} columns, the first layers take {} and {} inputs", data.dim(),
          first.layers.front().fan_in(), d);
  }
  if (data.rows() < 2) raise(ExitCode::kBadData, "direction map: {} audit rows; at least 2 are needed", data.rows());
  const bool augmented = layer.has_bias;
  const checks::CheckResult* spread = report.Find(checks::kSupportSpreadName);
  int requested = static_cast<int>(std::min<Index>(augmented ? d + 1 : d, kAutoDims));
  if (spread != nullptr && spread->detail.contains("dims_requested") && spread->detail["dims_requested"].is_number_integer()) {
    requested = spread->detail["dims_requested"].get<int>();
  }
  const Standardisation s = Standardise(data.x);
  const Frame f = FrameOf(data.x, s, augmented, requested);
  if (f.basis.cols() < 2) raise(ExitCode::kBadData, "direction map: the inputs span fewer than 2 directions");

  DirectionMap map;
  map.frame = augmented ? "augmented" : "bias-free";
  map.dims = static_cast<int>(f.basis.cols());
  int principal = 0;
  for (Index c = 0; c < 2; ++c) {
    map.axis_names[static_cast<std::size_t>(c)] =
        c == f.constant_column ? "constant (bias) direction" : "principal direction " + std::to_string(++principal);
    map.moments[static_cast<std::size_t>(c)] = f.moments(c);
  }
  map.moment_share = f.total > 0.0 ? (f.moments(0) + f.moments(1)) / f.total : 0.0;
  if (!report.trajectory.points.empty()) map.first_step = report.trajectory.points.front().step;
  map.last_step = report.step;
  map.first = Project(first, s, f, augmented);
  map.last = Project(last, s, f, augmented);
  if (spread != nullptr && spread->ran()) {
    if (spread->detail.contains("empty_cap_direction")) map.empty_cap = Place(spread->detail["empty_cap_direction"], f);
    if (spread->detail.contains("theta_degrees") && spread->detail["theta_degrees"].is_number()) {
      map.empty_cap_degrees = spread->detail["theta_degrees"].get<double>();
    }
  }
  const checks::CheckResult* fit = report.Find(checks::kResidualFitName);
  if (fit != nullptr && fit->ran() && fit->detail.contains("best_neuron") && fit->detail["best_neuron"].contains("direction")) {
    map.best_neuron = Place(fit->detail["best_neuron"]["direction"], f);
  }
  return map;
}

std::optional<DirectionMap> DirectionMapForRun(const io::RunDir& run, const audit::AuditReport& report,
                                               const audit::AuditOptions& options) {
  const audit::AuditInputs in = audit::ReadAuditInputs(run, options);
  if (!in.data || in.data->rows() < 2) return std::nullopt;
  try {
    return ComputeDirectionMap(in.first, in.last, *in.data, report);
  } catch (const Error&) {
    return std::nullopt;  // too few directions to draw: the page says so instead
  }
}

}  // namespace plaudit::report
