#include "plaudit/checks/two_way_diversity.h"

#include <algorithm>
#include <cmath>
#include <map>
#include <optional>
#include <random>
#include <utility>
#include <vector>

#include <fmt/format.h>

#include "plaudit/core/error.h"
#include "plaudit/stats/covering_radius.h"
#include "plaudit/stats/pca.h"

namespace plaudit::checks {
namespace {

using Eigen::Index;
using Eigen::MatrixXd;

constexpr int kMaxDims = 8;
// A projected vector shorter than this share of the longest vector has no direction.
constexpr double kZeroProjection = 1e-12;
constexpr std::uint64_t kNullSalt = 0x3c6ef372fe94f82bULL;

double Degrees(double radians) { return radians * 180.0 / std::acos(-1.0); }

enum class Side { kIncoming, kOutgoing };
const char* SideName(Side s) { return s == Side::kIncoming ? "incoming" : "outgoing"; }

// Incoming: rows of W_l (0-based l); outgoing: columns of W_{l+1}, one row per neuron of layer l.
MatrixXd Vectors(const model::Network& net, int layer0, Side side) {
  if (side == Side::kIncoming) return net.layers[static_cast<std::size_t>(layer0)].weight;
  return net.layers[static_cast<std::size_t>(layer0) + 1].weight.transpose();
}

struct Spread {
  stats::CoveringRadius cover;
  Index dims = 0;
  Index kept = 0, dropped = 0;
  double moment_fraction = 0.0;
};

// The vectors on the sphere of their own k leading principal directions, and the largest empty
// cap there. nullopt when every vector is zero.
std::optional<Spread> Measure(const MatrixXd& v, Index k, const TwoWayDiversityOptions& o,
                              std::uint32_t tag) {
  const stats::PrincipalAxes axes = stats::PrincipalDirections(v, k, /*centre=*/false, o.seed);
  const MatrixXd projected = v * axes.directions;
  const Eigen::VectorXd length = projected.rowwise().norm();
  const double floor = kZeroProjection * v.rowwise().norm().maxCoeff();
  std::vector<Index> kept;
  for (Index j = 0; j < v.rows(); ++j) {
    if (length(j) > floor) kept.push_back(j);
  }
  if (kept.empty()) return std::nullopt;
  Spread s;
  s.dims = k;
  s.kept = static_cast<Index>(kept.size());
  s.dropped = v.rows() - s.kept;
  s.moment_fraction = axes.total > 0.0 ? axes.moments.sum() / axes.total : 0.0;
  const MatrixXd unit = length(kept).cwiseInverse().asDiagonal() * projected(kept, Eigen::all);
  stats::CoveringRadiusOptions cover_options;
  cover_options.probes = o.probes;
  cover_options.refine = o.refine;
  // The first and last network of one (layer, side) share a probe set, so their difference is
  // not probe noise.
  std::seed_seq seq{static_cast<std::uint32_t>(o.seed), static_cast<std::uint32_t>(o.seed >> 32),
                    0x54574456u, tag};
  std::mt19937_64 rng(seq);
  s.cover = stats::EstimateCoveringRadius(unit, cover_options, rng);
  return s;
}

// Median covering radius of n uniform directions on S^{k-1}, computed once per (n, k).
class NullCache {
 public:
  explicit NullCache(const TwoWayDiversityOptions& o) : options_(o) {}
  const stats::CoveringRadiusNull& Get(Index n, Index k) {
    const auto key = std::make_pair(n, k);
    auto it = cache_.find(key);
    if (it == cache_.end()) {
      stats::CoveringRadiusOptions c;
      c.probes = options_.probes;
      c.refine = options_.refine;
      it = cache_.emplace(key, stats::UniformCoveringRadiusNull(n, k, options_.null_replicas, c,
                                                                options_.seed ^ kNullSalt))
               .first;
    }
    return it->second;
  }

 private:
  const TwoWayDiversityOptions& options_;
  std::map<std::pair<Index, Index>, stats::CoveringRadiusNull> cache_;
};

struct SideResult {
  Side side = Side::kIncoming;
  bool measured = false;
  double ratio = 0.0;
  nlohmann::json json;
};

SideResult MeasureSide(const model::Network& last, const model::Network* first, int layer0,
                       Side side, const TwoWayDiversityOptions& o, NullCache& nulls) {
  SideResult out;
  out.side = side;
  const MatrixXd v = Vectors(last, layer0, side);
  const Index n = v.rows();
  const Index k = std::min<Index>(o.dims, v.cols());
  if (k < 2) {
    out.json = {{"reason", fmt::format("the {} vectors have {} coordinate(s); a direction needs at "
                                       "least 2", SideName(side), v.cols())}};
    return out;
  }
  const std::uint32_t tag = static_cast<std::uint32_t>(2 * layer0 + (side == Side::kOutgoing ? 1 : 0));
  const std::optional<Spread> s = Measure(v, k, o, tag);
  if (!s) {
    out.json = {{"reason", fmt::format("every {} vector is zero", SideName(side))}};
    return out;
  }
  const stats::CoveringRadiusNull& null = nulls.Get(n, k);
  out.measured = true;
  out.ratio = s->cover.theta / null.median;
  out.json = {{"ratio", out.ratio},
              {"theta_degrees", Degrees(s->cover.theta)},
              {"null_median_degrees", Degrees(null.median)},
              {"null_replicas", null.replicas.size()},
              {"dims", s->dims},
              {"kept", s->kept},
              {"dropped", s->dropped},
              {"moment_fraction", s->moment_fraction}};
  if (first != nullptr) {
    const MatrixXd v0 = Vectors(*first, layer0, side);
    const std::optional<Spread> s0 = v0.allFinite() ? Measure(v0, k, o, tag) : std::nullopt;
    if (s0) {
      out.json["ratio_init"] = s0->cover.theta / null.median;
      out.json["theta_degrees_init"] = Degrees(s0->cover.theta);
    } else {
      out.json["init_reason"] = "the first network's vectors are zero or non-finite";
    }
  }
  return out;
}

void CheckShapes(const model::Network& last, const model::Network* first) {
  if (first == nullptr) return;
  if (!model::SameLayerShapes(*first, last)) {
    raise(ExitCode::kBadData, "{}: the first network does not have the last network's layer shapes",
          kTwoWayDiversityName);
  }
}

}  // namespace

bool TwoWayDiversityOptions::IsValid(std::string* why) const {
  auto bad = [&](std::string message) {
    if (why != nullptr) *why = fmt::format("{}: {}", kTwoWayDiversityName, message);
    return false;
  };
  if (dims < 2 || dims > kMaxDims) {
    return bad(fmt::format("dims is {}, must be between 2 and {}", dims, kMaxDims));
  }
  if (probes < 1) return bad(fmt::format("probes is {}, must be >= 1", probes));
  if (refine < 0) return bad(fmt::format("refine is {}, must be >= 0", refine));
  if (null_replicas < 1) return bad(fmt::format("null_replicas is {}, must be >= 1", null_replicas));
  if (!(std::isfinite(threshold) && threshold > 0.0)) {
    return bad(fmt::format("threshold is {}, must be finite and > 0", threshold));
  }
  return true;
}

CheckResult RunTwoWayDiversity(const model::Network& last, const model::Network* first,
                               const TwoWayDiversityOptions& options) {
  if (std::string why; !options.IsValid(&why)) raise(ExitCode::kUsage, "{}", why);
  if (last.depth() < 3) {
    return Skipped(kTwoWayDiversityName, options.threshold,
                   fmt::format("the network has {} layer(s); a middle layer needs at least 3",
                               last.depth()));
  }
  CheckShapes(last, first);
  for (int l = 1; l < last.depth(); ++l) {
    if (!last.layers[static_cast<std::size_t>(l)].weight.allFinite()) {
      return Skipped(kTwoWayDiversityName, options.threshold,
                     fmt::format("layer {} has non-finite weights", l + 1));
    }
  }

  NullCache nulls(options);
  nlohmann::json layers = nlohmann::json::array();
  const SideResult* worst = nullptr;
  int worst_layer = 0;
  std::vector<SideResult> results;
  results.reserve(static_cast<std::size_t>(2 * last.depth()));
  for (int l = 1; l + 1 < last.depth(); ++l) {
    nlohmann::json entry = {{"layer", l + 1},
                            {"width", last.layers[static_cast<std::size_t>(l)].fan_out()}};
    for (Side side : {Side::kIncoming, Side::kOutgoing}) {
      results.push_back(MeasureSide(last, first, l, side, options, nulls));
      const SideResult& r = results.back();
      entry[SideName(side)] = r.json;
      if (r.measured && (worst == nullptr || r.ratio > worst->ratio)) {
        worst = &r;
        worst_layer = l + 1;
      }
    }
    layers.push_back(std::move(entry));
  }
  if (worst == nullptr) {
    return Skipped(kTwoWayDiversityName, options.threshold,
                   "no middle layer has incoming or outgoing vectors that can be measured");
  }

  CheckResult result;
  result.name = kTwoWayDiversityName;
  result.threshold = options.threshold;
  result.statistic = worst->ratio;
  const bool failed = result.statistic > options.threshold;
  result.status = failed ? Status::kFail : Status::kPass;
  const double theta = worst->json["theta_degrees"].get<double>();
  const double null = worst->json["null_median_degrees"].get<double>();
  result.message = fmt::format(
      "{} weights of middle layer {} leave an empty cap of {:.1f} degrees, {:.2f} times the {:.1f} "
      "degrees of uniform directions{}",
      worst->side == Side::kIncoming ? "the incoming" : "the outgoing", worst_layer, theta,
      result.statistic, null,
      failed ? ": its neurons no longer differ in that direction"
             : " (the least diverse direction of any middle layer)");
  result.detail = {{"threshold", options.threshold},
                   {"dims_requested", options.dims},
                   {"worst_layer", worst_layer},
                   {"worst_direction", SideName(worst->side)},
                   {"first_network", first != nullptr},
                   {"layers", std::move(layers)}};
  return result;
}

}  // namespace plaudit::checks
