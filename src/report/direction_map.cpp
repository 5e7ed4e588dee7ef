#include "plaudit/report/direction_map.h"

#include <algorithm>
#include <cmath>
#include <utility>

#include "plaudit/core/error.h"
#include "plaudit/checks/neuron_frame.h"

namespace plaudit::report {
namespace {

using Eigen::Index;
using Eigen::VectorXd;

constexpr int kAutoDims = 6;  // support-spread's default frame size

using checks::NeuronFrame;
using checks::Standardisation;

DirectionPoints Project(const model::Network& net, const Standardisation& s, const NeuronFrame& f) {
  DirectionPoints out;
  const checks::NeuronDirections d = checks::ProjectNeurons(net.layers.front(), s, f);
  VectorXd outgoing;
  if (net.depth() >= 2) outgoing = net.layers[1].weight.colwise().norm().transpose();
  for (std::size_t i = 0; i < d.kept.size(); ++i) {
    const Index j = d.kept[i];
    out.x.push_back(d.unit(static_cast<Index>(i), 0));
    out.y.push_back(d.unit(static_cast<Index>(i), 1));
    out.neuron.push_back(j);
    if (outgoing.size() == d.norms.size()) out.weight.push_back(outgoing(j));
  }
  return out;
}

// A direction of the standardised (augmented) input space in the map: projected on the frame,
// normalised, first two coordinates.
std::optional<std::array<double, 2>> Place(const nlohmann::json& j, const NeuronFrame& f) {
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
  const Standardisation s = checks::Standardise(data.x);
  const NeuronFrame f = checks::FrameOf(data.x, s, augmented, requested);
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
  map.first = Project(first, s, f);
  map.last = Project(last, s, f);
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
  return DirectionMapForInputs(audit::ReadAuditInputs(run, options), report);
}

std::optional<DirectionMap> DirectionMapForInputs(const audit::AuditInputs& in, const audit::AuditReport& report) {
  if (!in.data || in.data->rows() < 2) return std::nullopt;
  try {
    return ComputeDirectionMap(in.first, in.last, *in.data, report);
  } catch (const Error&) {
    return std::nullopt;  // too few directions to draw: the page says so instead
  }
}

}  // namespace plaudit::report
