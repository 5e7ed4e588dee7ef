#include "plaudit/checks/gradient_decay.h"

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <limits>
#include <utility>

#include <fmt/format.h>

#include "plaudit/core/error.h"
#include "plaudit/stats/regression.h"

namespace plaudit::checks {
namespace {

constexpr double kTiny = std::numeric_limits<double>::min();

bool IsFrozen(const std::vector<bool>& frozen, int layer0) {
  return layer0 >= 0 && static_cast<std::size_t>(layer0) < frozen.size() &&
         frozen[static_cast<std::size_t>(layer0)];
}

struct LayerSeries {
  std::vector<std::int64_t> step_ids;
  std::vector<double> steps, sup, mean, p99;  // steps as doubles for the fit
};

LayerSeries Extract(const audit::Trajectory& trajectory, int layer0) {
  LayerSeries s;
  const auto layer = static_cast<std::size_t>(layer0);
  for (const audit::SnapshotPoint& p : trajectory.points) {
    if (p.grad.size() <= layer) {
      raise(ExitCode::kUsage, "{}: layer {} out of range: step {} holds gradients for {} layers",
            kGradientDecayName, layer0 + 1, p.step, p.grad.size());
    }
    s.step_ids.push_back(p.step);
    s.steps.push_back(static_cast<double>(p.step));
    s.sup.push_back(p.grad[layer].sup);
    s.mean.push_back(p.grad[layer].mean);
    s.p99.push_back(p.grad[layer].p99);
  }
  return s;
}

// Index of the first snapshot whose statistics are not all finite; size() when all are.
std::size_t FirstNonFinite(const LayerSeries& s) {
  std::size_t i = 0;
  while (i < s.sup.size() && std::isfinite(s.sup[i]) && std::isfinite(s.mean[i]) &&
         std::isfinite(s.p99[i])) {
    ++i;
  }
  return i;
}

double Median(std::vector<double> v) {
  std::sort(v.begin(), v.end());
  const std::size_t mid = v.size() / 2;
  return v.size() % 2 == 1 ? v[mid] : 0.5 * (v[mid - 1] + v[mid]);
}

// Least squares of log S on step over the last third of the snapshots (at least 3).
stats::LineFit TailFit(const LayerSeries& s, std::size_t* tail_start) {
  const std::size_t n = s.steps.size();
  const std::size_t k = std::min(n, std::max<std::size_t>(3, (n + 2) / 3));
  *tail_start = n - k;
  std::vector<double> x(s.steps.end() - static_cast<std::ptrdiff_t>(k), s.steps.end());
  std::vector<double> y;
  for (std::size_t i = *tail_start; i < n; ++i) y.push_back(std::log(std::max(s.sup[i], kTiny)));
  return stats::FitLine(x, y);
}

struct Uniformity {
  std::vector<double> values;
  double last = 1.0, median = 1.0, ratio = 1.0;
};

// U = S / M; an all-zero gradient (M = 0) is counted as perfectly uniform, U = 1.
Uniformity ComputeUniformity(const LayerSeries& s) {
  Uniformity u;
  for (std::size_t i = 0; i < s.sup.size(); ++i) {
    u.values.push_back(s.mean[i] > 0.0 ? s.sup[i] / s.mean[i] : 1.0);
  }
  u.last = u.values.back();
  u.median = Median(u.values);
  u.ratio = u.last / std::max(u.median, kTiny);
  return u;
}

std::string Message(int layer1, bool decayed, bool growing, double rho, double t,
                    std::size_t tail_points) {
  if (growing) {
    return fmt::format("layer {} gradient is growing over the last {} snapshots (t = {:.3g})",
                       layer1, tail_points, t);
  }
  if (!decayed) {
    return fmt::format("layer {} gradient is still {:.3g} of its peak: it has not decayed",
                       layer1, rho);
  }
  return fmt::format("layer {} gradient fell to {:.3g} of its peak and is not growing", layer1,
                     rho);
}

}  // namespace

int DefaultGradientLayer(int depth, const std::vector<bool>& frozen) {
  if (depth < 1) raise(ExitCode::kBadData, "network has {} layers; at least 1 is needed", depth);
  const int choice = depth == 1 ? 0 : (depth <= 3 ? 1 : depth - 1);
  if (!IsFrozen(frozen, choice)) return choice;
  for (int d = 1; d < depth; ++d) {
    if (choice + d < depth && !IsFrozen(frozen, choice + d)) return choice + d;
    if (choice - d >= 0 && !IsFrozen(frozen, choice - d)) return choice - d;
  }
  return choice;
}

int ResolveGradientLayer(const GradientDecayOptions& options, int depth,
                         const std::vector<bool>& frozen) {
  if (options.layer == 0) return DefaultGradientLayer(depth, frozen);
  if (options.layer < 0 || options.layer > depth) {
    raise(ExitCode::kUsage, "{}: layer {} out of range: the network has {} layers",
          kGradientDecayName, options.layer, depth);
  }
  return options.layer - 1;
}

bool GradientDecayOptions::IsValid(std::string* why) const {
  auto fail = [why](const char* text) {
    if (why != nullptr) *why = text;
    return false;
  };
  if (layer < 0) return fail("layer must be >= 0 (0 = default choice)");
  if (!(decay_ratio > 0.0) || !std::isfinite(decay_ratio)) {
    return fail("decay_ratio must be positive and finite");
  }
  if (!std::isfinite(slope_t)) return fail("slope_t must be finite");
  if (!(floor_ratio >= decay_ratio) || !std::isfinite(floor_ratio)) {
    return fail("floor_ratio must be finite and >= decay_ratio");
  }
  if (min_snapshots < 3) return fail("min_snapshots must be at least 3");
  if (!(uniformity_factor >= 1.0) || !std::isfinite(uniformity_factor)) {
    return fail("uniformity_factor must be finite and >= 1");
  }
  return true;
}

CheckResult RunGradientDecay(const audit::Trajectory& trajectory, int layer0,
                             const GradientDecayOptions& options) {
  std::string why;
  if (!options.IsValid(&why)) raise(ExitCode::kUsage, "{}: {}", kGradientDecayName, why);
  if (layer0 < 0) raise(ExitCode::kUsage, "{}: layer index {} is negative", kGradientDecayName, layer0);
  const double threshold = options.decay_ratio;
  const int layer1 = layer0 + 1;
  auto skip = [&](std::string reason) {
    CheckResult r = Skipped(kGradientDecayName, threshold, std::move(reason));
    r.detail["layer"] = layer1;
    return r;
  };
  if (IsFrozen(trajectory.frozen, layer0)) {
    return skip(fmt::format("layer {} was held fixed during training; its gradient is not "
                            "expected to vanish", layer1));
  }
  const std::size_t n = trajectory.points.size();
  if (n < static_cast<std::size_t>(options.min_snapshots)) {
    return skip(fmt::format("only {} snapshots; at least {} are needed", n, options.min_snapshots));
  }
  const LayerSeries s = Extract(trajectory, layer0);
  if (layer0 < trajectory.lowest_grad_layer) {
    return skip(fmt::format("gradient of layer {} was not computed", layer1));
  }
  const std::size_t bad = FirstNonFinite(s);
  if (bad < n) {
    return skip(fmt::format("non-finite gradient of layer {} at step {}", layer1, s.step_ids[bad]));
  }

  const auto peak = std::max_element(s.sup.begin(), s.sup.end());
  const double max_sup = *peak;
  const double rho = s.sup.back() / std::max(max_sup, kTiny);
  std::size_t tail_start = 0;
  const stats::LineFit fit = TailFit(s, &tail_start);
  const Uniformity u = ComputeUniformity(s);
  const bool decayed = !(rho > options.decay_ratio);
  const bool growing = fit.slope_t > options.slope_t;

  CheckResult r;
  r.name = kGradientDecayName;
  // Settled: far below the peak, then flat (neither falling nor growing significantly).
  const bool settled = !decayed && !growing && rho <= options.floor_ratio && fit.slope_t >= -options.slope_t;
  r.status = decayed && !growing ? Status::kPass : (settled ? Status::kWarn : Status::kFail);
  r.statistic = rho;
  r.threshold = threshold;
  r.detail = {{"layer", layer1},
              {"rho", rho},
              {"decay_ratio", options.decay_ratio},
              {"decayed", decayed},
              {"growing", growing},
              {"settled", settled},
              {"floor_ratio", options.floor_ratio},
              {"steps", s.step_ids},
              {"sup", s.sup},
              {"mean", s.mean},
              {"p99", s.p99},
              {"max_sup", max_sup},
              {"max_sup_step", s.step_ids[static_cast<std::size_t>(peak - s.sup.begin())]},
              {"tail_start_step", s.step_ids[tail_start]},
              {"tail_points", fit.n},
              {"slope", fit.slope},
              {"slope_se", fit.slope_se},
              {"slope_t", fit.slope_t},
              {"slope_t_threshold", options.slope_t},
              {"uniformity", u.values},
              {"uniformity_last", u.last},
              {"uniformity_median", u.median},
              {"uniformity_ratio", u.ratio},
              {"uniformity_factor", options.uniformity_factor},
              {"few_neurons_moving", u.last > options.uniformity_factor * u.median}};
  r.message = settled ? fmt::format("layer {} gradient settled at {:.3g} of its peak with a flat tail (t = {:.3g}): "
                                    "a noise floor, as constant-step SGD leaves",
                                    layer1, rho, fit.slope_t)
                      : Message(layer1, decayed, growing, rho, fit.slope_t, static_cast<std::size_t>(fit.n));
  return r;
}

}  // namespace plaudit::checks
