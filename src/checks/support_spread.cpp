#include "plaudit/checks/support_spread.h"

#include <algorithm>
#include <cmath>
#include <numeric>
#include <optional>
#include <random>
#include <utility>
#include <vector>

#include <fmt/format.h>

#include "plaudit/checks/neuron_frame.h"
#include "plaudit/core/error.h"
#include "plaudit/stats/covering_radius.h"

namespace plaudit::checks {
namespace {

using Eigen::Index;

constexpr int kAutoDims = 6;
constexpr int kMaxDims = 8;
constexpr Index kGramBlock = 256;

double Degrees(double radians) { return radians * 180.0 / std::acos(-1.0); }

// Single-linkage clusters of unit directions: union-find over the cosine Gram matrix, a block of
// rows at a time.
struct Clusters {
  int count = 0;
  int largest = 0;
  double effective = 0.0;  // exp(entropy of the cluster sizes)
};

Index Root(std::vector<Index>& parent, Index i) {
  while (parent[static_cast<std::size_t>(i)] != i) {
    parent[static_cast<std::size_t>(i)] = parent[static_cast<std::size_t>(parent[static_cast<std::size_t>(i)])];
    i = parent[static_cast<std::size_t>(i)];
  }
  return i;
}

Clusters ClusterDirections(const Eigen::MatrixXd& unit, double degrees) {
  const Index n = unit.rows();
  const double merge = std::cos(degrees * std::acos(-1.0) / 180.0);
  std::vector<Index> parent(static_cast<std::size_t>(n));
  std::iota(parent.begin(), parent.end(), Index{0});
  Eigen::MatrixXd gram;
  for (Index start = 0; start < n; start += kGramBlock) {
    const Index rows = std::min(kGramBlock, n - start);
    gram.noalias() = unit.middleRows(start, rows) * unit.transpose();
    for (Index r = 0; r < rows; ++r) {
      for (Index j = start + r + 1; j < n; ++j) {
        if (gram(r, j) < merge) continue;
        const Index a = Root(parent, start + r), b = Root(parent, j);
        if (a != b) parent[static_cast<std::size_t>(std::max(a, b))] = std::min(a, b);
      }
    }
  }
  std::vector<int> size(static_cast<std::size_t>(n), 0);
  for (Index i = 0; i < n; ++i) ++size[static_cast<std::size_t>(Root(parent, i))];
  Clusters out;
  double entropy = 0.0;
  for (int s : size) {
    if (s == 0) continue;
    ++out.count;
    out.largest = std::max(out.largest, s);
    const double p = static_cast<double>(s) / static_cast<double>(n);
    entropy -= p * std::log(p);
  }
  out.effective = std::exp(entropy);
  return out;
}

// Linear-interpolation quantile of sorted values (NumPy's default method).
double SortedQuantile(const std::vector<double>& sorted, double q) {
  const double pos = q * static_cast<double>(sorted.size() - 1);
  const auto lo = static_cast<std::size_t>(std::floor(pos));
  const std::size_t hi = std::min(lo + 1, sorted.size() - 1);
  return sorted[lo] + (pos - static_cast<double>(lo)) * (sorted[hi] - sorted[lo]);
}

nlohmann::json NormQuantiles(const Eigen::VectorXd& norms) {
  std::vector<double> v(norms.data(), norms.data() + norms.size());
  std::sort(v.begin(), v.end());
  return {{"min", v.front()},
          {"q25", SortedQuantile(v, 0.25)},
          {"median", SortedQuantile(v, 0.5)},
          {"q75", SortedQuantile(v, 0.75)},
          {"max", v.back()}};
}

nlohmann::json Points2d(const Eigen::MatrixXd& unit) {
  nlohmann::json points = nlohmann::json::array();
  for (Index i = 0; i < unit.rows(); ++i) points.push_back({unit(i, 0), unit(i, 1)});
  return points;
}

nlohmann::json VectorJson(const Eigen::VectorXd& v) {
  return nlohmann::json(std::vector<double>(v.data(), v.data() + v.size()));
}

// One network measured in the data frame.
struct Spread {
  Eigen::MatrixXd unit;  // kept x k, projected directions on S^{k-1}
  std::vector<Index> kept, dropped;
  Eigen::VectorXd norms;  // |v_j| of every neuron, augmented standardised space
  stats::CoveringRadius cover;
  Clusters clusters;
};

std::optional<Spread> Measure(const model::DenseLayer& layer, const Standardisation& s,
                              const NeuronFrame& frame, const SupportSpreadOptions& options) {
  NeuronDirections directions = ProjectNeurons(layer, s, frame);
  if (directions.kept.empty()) return std::nullopt;
  Spread out;
  out.unit = std::move(directions.unit);
  out.kept = std::move(directions.kept);
  out.dropped = std::move(directions.dropped);
  out.norms = std::move(directions.norms);
  stats::CoveringRadiusOptions cover_options;
  cover_options.probes = options.probes;
  cover_options.refine = options.refine;
  // Last and first network share one probe set: differences between them are not probe noise.
  std::seed_seq seq{static_cast<std::uint32_t>(options.seed),
                    static_cast<std::uint32_t>(options.seed >> 32), 0x53505244u};
  std::mt19937_64 rng(seq);
  out.cover = stats::EstimateCoveringRadius(out.unit, cover_options, rng);
  out.clusters = ClusterDirections(out.unit, options.cluster_degrees);
  return out;
}

nlohmann::json SpreadJson(const Spread& s, double null_median) {
  return {{"statistic", s.cover.theta / null_median},
          {"theta", s.cover.theta},
          {"theta_degrees", Degrees(s.cover.theta)},
          {"kept", s.kept.size()},
          {"dropped", s.dropped.size()},
          {"dropped_index", s.dropped},
          {"clusters", s.clusters.count},
          {"largest_cluster", s.clusters.largest},
          {"effective_directions", s.clusters.effective},
          {"norm_quantiles", NormQuantiles(s.norms)}};
}

void CheckShapes(const model::Network& last, const model::Network* first,
                 const model::Dataset& data) {
  const model::DenseLayer& layer = last.layers.front();
  if (data.dim() != layer.fan_in()) {
    raise(ExitCode::kBadData, "{}: the data have {} input columns but the first layer takes {}",
          kSupportSpreadName, data.dim(), layer.fan_in());
  }
  if (first == nullptr) return;
  if (first->layers.empty() || first->layers.front().weight.rows() != layer.weight.rows() ||
      first->layers.front().weight.cols() != layer.weight.cols()) {
    raise(ExitCode::kBadData,
          "{}: the first network's first layer does not have the last network's shape {} x {}",
          kSupportSpreadName, layer.fan_out(), layer.fan_in());
  }
}

bool FiniteLayer(const model::DenseLayer& layer) {
  return layer.weight.allFinite() && std::isfinite(layer.multiplier) &&
         (!layer.has_bias || layer.bias.allFinite());
}

std::optional<std::string> SkipReason(const model::Network& last, const model::Dataset& data) {
  if (last.layers.empty()) return std::string("the network has no layers");
  if (last.depth() < 2) return std::string("the network has no hidden layer: its outputs are not neurons to spread");
  const model::DenseLayer& layer = last.layers.front();
  if (layer.fan_out() < 2) {
    return fmt::format("the first layer has {} neuron(s); a spread needs at least 2", layer.fan_out());
  }
  if (layer.fan_in() < 1) return std::string("the first layer has no inputs");
  if (data.rows() < 2) {
    return fmt::format("the data have {} row(s); standardising needs at least 2", data.rows());
  }
  if (!FiniteLayer(layer)) return std::string("the first layer has non-finite parameters");
  return std::nullopt;
}

CheckResult Decide(CheckResult r, const Spread& s, double null_median, Index n) {
  r.statistic = s.cover.theta / null_median;
  r.status = r.statistic > r.threshold ? Status::kFail : Status::kPass;
  r.message = fmt::format(
      "the first-layer neurons leave an empty cap of {:.1f} degrees, {:.2f} times the {:.1f} "
      "degrees of {} uniform directions{}",
      Degrees(s.cover.theta), r.statistic, Degrees(null_median), n,
      r.status == Status::kFail ? ": the neurons no longer point in every direction" : "");
  return r;
}

}  // namespace

bool SupportSpreadOptions::IsValid(std::string* why) const {
  auto bad = [&](std::string message) {
    if (why != nullptr) *why = fmt::format("{}: {}", kSupportSpreadName, message);
    return false;
  };
  if (dims != 0 && (dims < 2 || dims > kMaxDims)) {
    return bad(fmt::format("dims is {}, must be 0 (automatic) or between 2 and {}", dims, kMaxDims));
  }
  if (probes < 1) return bad(fmt::format("probes is {}, must be >= 1", probes));
  if (refine < 0) return bad(fmt::format("refine is {}, must be >= 0", refine));
  if (null_replicas < 1) return bad(fmt::format("null_replicas is {}, must be >= 1", null_replicas));
  if (!(std::isfinite(threshold) && threshold > 0.0)) {
    return bad(fmt::format("threshold is {}, must be finite and > 0", threshold));
  }
  if (!(cluster_degrees > 0.0 && cluster_degrees < 180.0)) {
    return bad(fmt::format("cluster_degrees is {}, must be in (0, 180)", cluster_degrees));
  }
  if (max_rows < 2) return bad(fmt::format("max_rows is {}, must be >= 2", max_rows));
  return true;
}

CheckResult RunSupportSpread(const model::Network& last, const model::Network* first,
                             const model::Dataset& data, const SupportSpreadOptions& options) {
  if (std::string why; !options.IsValid(&why)) raise(ExitCode::kUsage, "{}", why);
  if (const auto reason = SkipReason(last, data)) {
    return Skipped(kSupportSpreadName, options.threshold, *reason);
  }
  CheckShapes(last, first, data);
  const model::DenseLayer& layer = last.layers.front();
  const Index n = layer.fan_out();
  const Index d = layer.fan_in();

  const model::Dataset rows = model::Subsample(data, options.max_rows, options.seed);
  const Standardisation standard = Standardise(rows.x);
  const bool augmented = layer.has_bias;
  const int requested = static_cast<int>(std::min<Index>(
      augmented ? d + 1 : d, options.dims == 0 ? kAutoDims : options.dims));
  const NeuronFrame frame = FrameOf(rows.x, standard, augmented, requested, options.seed);
  if (frame.basis.cols() < 2) {
    return Skipped(kSupportSpreadName, options.threshold,
                   augmented ? "every input column is constant"
                             : "the inputs span fewer than 2 directions and the first layer has "
                               "no bias");
  }
  const Index k = frame.basis.cols();
  const std::optional<Spread> spread = Measure(layer, standard, frame, options);
  if (!spread) {
    return Skipped(kSupportSpreadName, options.threshold,
                   "every first-layer neuron is zero in the data's principal directions");
  }

  stats::CoveringRadiusOptions null_options;
  null_options.probes = options.probes;
  null_options.refine = options.refine;
  const stats::CoveringRadiusNull null = stats::UniformCoveringRadiusNull(
      n, k, options.null_replicas, null_options, options.seed ^ 0x6a09e667f3bcc909ULL);

  CheckResult r;
  r.name = kSupportSpreadName;
  r.threshold = options.threshold;
  r = Decide(std::move(r), *spread, null.median, n);

  nlohmann::json& detail = r.detail;
  detail = SpreadJson(*spread, null.median);
  detail.erase("statistic");
  detail["null_median"] = null.median;
  detail["null_median_degrees"] = Degrees(null.median);
  detail["null_replicas"] = null.replicas;
  detail["probes"] = spread->cover.probes;
  detail["refined"] = spread->cover.refined;
  detail["dims"] = k;
  detail["dims_requested"] = requested;
  detail["frame"] = augmented ? "augmented" : "bias-free";
  detail["moments"] = VectorJson(frame.moments);
  detail["moment_fraction"] = frame.moments.sum() / frame.total;
  detail["neurons"] = n;
  detail["input_dim"] = d;
  detail["cluster_degrees"] = options.cluster_degrees;
  detail["empty_cap_direction"] = VectorJson(frame.basis * spread->cover.centre);
  detail["points_2d"] = Points2d(spread->unit);
  if (last.depth() >= 2) {
    const Eigen::VectorXd outgoing = last.layers[1].weight.colwise().norm().transpose();
    detail["outgoing_norm"] = VectorJson(outgoing(spread->kept));
    detail["outgoing_multiplier"] = last.layers[1].multiplier;
  }
  if (first != nullptr) {
    const model::DenseLayer& initial = first->layers.front();
    const std::optional<Spread> init =
        FiniteLayer(initial) ? Measure(initial, standard, frame, options) : std::nullopt;
    if (init) {
      detail["init"] = SpreadJson(*init, null.median);
      detail["statistic_init"] = init->cover.theta / null.median;
      detail["points_2d_init"] = Points2d(init->unit);
    } else {
      detail["init"] = {{"reason", "the first network's first layer is zero or non-finite"}};
    }
  }
  return r;
}

}  // namespace plaudit::checks
