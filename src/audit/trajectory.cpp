#include "plaudit/audit/trajectory.h"

#include <algorithm>
#include <atomic>
#include <cmath>
#include <exception>
#include <thread>

#include "plaudit/core/error.h"
#include "plaudit/model/evaluate.h"

namespace plaudit::audit {
namespace {

// Everything one snapshot contributes; the network is kept so frozen layers can be detected.
struct SnapshotWork {
  SnapshotPoint point;
  model::Network net;
};

SnapshotWork Work(const io::RunDir& run, const io::SnapshotRef& ref, const model::Dataset* data,
                  const TrajectoryOptions& options) {
  const io::ArrayMap arrays = run.ReadSnapshot(ref);
  const std::string file = ref.path.string();
  SnapshotWork work;
  work.net = model::NetworkFromArrays(run.manifest(), arrays, file);
  const model::Network& net = work.net;
  work.point.step = ref.step;
  work.point.finite = net.AllFinite();
  work.point.grad.resize(static_cast<std::size_t>(net.depth()));
  const int lowest = std::clamp(options.lowest_grad_layer, 0, net.depth() - 1);
  if (data != nullptr) {
    if (data->dim() != net.input_dim()) {
      raise(ExitCode::kBadData, "{}: the first layer takes {} inputs but the audit data have {} columns", file,
            net.input_dim(), data->dim());
    }
    model::EvalOptions eval;
    eval.block_rows = options.block_rows;
    eval.lowest_grad_layer = work.point.finite ? lowest : -1;
    eval.precision = options.precision;
    work.point.float32 = options.precision == model::Precision::kFloat32;
    const model::Evaluation ev = model::Evaluate(net, *data, eval);
    work.point.loss = ev.loss;
    if (!work.point.finite) return work;
    for (int l = lowest; l < net.depth(); ++l) {
      work.point.grad[static_cast<std::size_t>(l)] =
          ComputeGradientStats(ev.weight_grad[static_cast<std::size_t>(l)] * model::WeightGradScale(net, l));
    }
    return work;
  }
  // No data: gradients as the trainer saved them, already in the parameterization's scale.
  work.point.loss = std::nan("");
  work.point.grad_from_file = true;
  for (int l = lowest; l < net.depth(); ++l) {
    const auto& spec = run.manifest().layers[static_cast<std::size_t>(l)];
    const auto it = arrays.find("grad/" + spec.weight);
    if (it == arrays.end()) {
      raise(ExitCode::kBadData, "{}: no audit data and no gradient array 'grad/{}' to judge layer {}", file,
            spec.weight, l + 1);
    }
    Eigen::MatrixXd g = it->second.AsMatrix(file);
    if (run.manifest().weight_layout == io::WeightLayout::kInOut) g.transposeInPlace();
    if (g.rows() != net.layers[static_cast<std::size_t>(l)].fan_out() || g.cols() != net.layers[static_cast<std::size_t>(l)].fan_in()) {
      raise(ExitCode::kBadData, "{}: gradient 'grad/{}' has shape {} unlike its weight", file, spec.weight,
            it->second.ShapeString());
    }
    work.point.grad[static_cast<std::size_t>(l)] = ComputeGradientStats(g);
  }
  return work;
}

std::vector<std::size_t> IndexRange(std::size_t from, std::size_t to) {
  std::vector<std::size_t> out;
  for (std::size_t i = from; i < to; ++i) out.push_back(i);
  return out;
}

// Evaluate snaps[i] for every i in `which` on options.threads threads, comparing each with the
// first network; the first failure is rethrown once every thread has stopped.
void EvaluateInParallel(const io::RunDir& run, const std::vector<io::SnapshotRef>& snaps, const model::Dataset* data,
                        const TrajectoryOptions& options, const std::vector<std::size_t>& which,
                        const SnapshotWork& first, std::vector<SnapshotPoint>& points,
                        std::vector<std::vector<bool>>& same) {
  const io::Manifest& manifest = run.manifest();
  std::atomic<std::size_t> next{0};
  std::exception_ptr failure;
  std::atomic<bool> failed{false};
  auto worker = [&] {
    for (std::size_t k = next++; k < which.size() && !failed; k = next++) {
      const std::size_t i = which[k];
      try {
        SnapshotWork w = Work(run, snaps[i], data, options);
        RequireSameArchitecture(manifest, first.net, snaps.front().path.string(), w.net, snaps[i].path.string());
        same[i] = FrozenLayers(manifest, first.net, w.net);
        points[i] = std::move(w.point);
      } catch (...) {
        if (!failed.exchange(true)) failure = std::current_exception();
      }
    }
  };
  const int threads = std::max(1, std::min<int>(options.threads, static_cast<int>(which.size())));
  std::vector<std::thread> pool;
  for (int t = 1; t < threads; ++t) pool.emplace_back(worker);
  worker();
  for (auto& t : pool) t.join();
  if (failure) std::rethrow_exception(failure);
}

// The float32 points to evaluate again in double: those whose gradient sup in any computed layer
// is at most refine_below x that layer's largest sup over the run (the last is already double).
std::vector<std::size_t> PointsToRefine(const std::vector<SnapshotPoint>& points, double refine_below) {
  std::vector<double> peak;
  for (const auto& p : points) {
    if (!p.finite) continue;
    peak.resize(std::max(peak.size(), p.grad.size()), 0.0);
    for (std::size_t l = 0; l < p.grad.size(); ++l) peak[l] = std::max(peak[l], p.grad[l].sup);
  }
  std::vector<std::size_t> redo;
  for (std::size_t i = 0; i < points.size(); ++i) {
    const auto& p = points[i];
    if (!p.finite || !p.float32) continue;
    bool low = false;
    for (std::size_t l = 0; l < p.grad.size() && !low; ++l) {
      low = peak[l] > 0.0 && p.grad[l].sup <= refine_below * peak[l];
    }
    if (low) redo.push_back(i);
  }
  return redo;
}

}  // namespace

SnapshotPoint EvaluateSnapshot(const io::RunDir& run, const io::SnapshotRef& ref, const model::Dataset* data,
                               const TrajectoryOptions& options, model::Network* net_out) {
  SnapshotWork work = Work(run, ref, data, options);
  if (net_out != nullptr) *net_out = std::move(work.net);
  return std::move(work.point);
}

std::vector<bool> FrozenLayers(const io::Manifest& manifest, const model::Network& first, const model::Network& now) {
  std::vector<bool> frozen(manifest.layers.size(), false);
  const bool compare = &first != &now;
  for (std::size_t l = 0; l < frozen.size(); ++l) {
    // Eigen's == on matrices of different sizes reads out of bounds: compare shapes first.
    const bool same = compare && first.layers[l].weight.rows() == now.layers[l].weight.rows() &&
                      first.layers[l].weight.cols() == now.layers[l].weight.cols() &&
                      first.layers[l].weight == now.layers[l].weight && first.layers[l].bias == now.layers[l].bias;
    frozen[l] = !manifest.layers[l].trainable || same;
  }
  return frozen;
}

void RequireSameArchitecture(const io::Manifest& manifest, const model::Network& reference,
                             const std::string& reference_file, const model::Network& net, const std::string& file) {
  const bool in_out = manifest.weight_layout == io::WeightLayout::kInOut;
  // Shapes as the files store them.
  const auto shape = [in_out](const Eigen::MatrixXd& w) {
    return in_out ? fmt::format("({}, {})", w.cols(), w.rows()) : fmt::format("({}, {})", w.rows(), w.cols());
  };
  for (std::size_t l = 0; l < manifest.layers.size(); ++l) {
    const Eigen::MatrixXd& a = reference.layers[l].weight;
    const Eigen::MatrixXd& b = net.layers[l].weight;
    if (a.rows() != b.rows() || a.cols() != b.cols()) {
      raise(ExitCode::kBadData,
            "{}: layer {} weight '{}' has shape {} but {} in {} (every snapshot of a run must have one architecture)",
            file, l + 1, manifest.layers[l].weight, shape(b), shape(a), reference_file);
    }
  }
}

GradientStats ComputeGradientStats(const Eigen::MatrixXd& g) {
  GradientStats s;
  if (g.size() == 0) return s;
  Eigen::ArrayXd mags = Eigen::Map<const Eigen::ArrayXd>(g.data(), g.size()).abs();
  s.sup = mags.maxCoeff();
  s.mean = mags.mean();
  s.rms = std::sqrt(mags.square().mean());
  std::vector<double> sorted(mags.data(), mags.data() + mags.size());
  const std::size_t k = static_cast<std::size_t>(std::floor(0.99 * static_cast<double>(sorted.size() - 1)));
  std::nth_element(sorted.begin(), sorted.begin() + static_cast<std::ptrdiff_t>(k), sorted.end());
  s.p99 = sorted[k];
  const Eigen::VectorXd row_norm = g.rowwise().norm();
  s.neuron_sup = row_norm.maxCoeff();
  s.neuron_mean = row_norm.mean();
  return s;
}

Trajectory ComputeTrajectory(const io::RunDir& run, const std::vector<io::SnapshotRef>& snaps,
                             const model::Dataset* data, const TrajectoryOptions& options) {
  Trajectory traj;
  traj.lowest_grad_layer = options.lowest_grad_layer;
  const io::Manifest& manifest = run.manifest();
  traj.frozen.assign(manifest.layers.size(), false);
  for (std::size_t l = 0; l < manifest.layers.size(); ++l) traj.frozen[l] = !manifest.layers[l].trainable;
  if (snaps.empty()) return traj;

  // Snapshot 0 is kept as the reference for "unchanged"; every other network is dropped as soon
  // as it is compared, so memory holds at most one snapshot per thread.
  // float32: the last snapshot is always wanted in double, so it is evaluated so at once, the rest
  // in float32, and then again in double those whose gradient fell low.
  const bool split = options.precision == model::Precision::kFloat32 && data != nullptr;
  TrajectoryOptions exact = options;
  exact.precision = model::Precision::kDouble;
  const std::size_t last = snaps.size() - 1;
  SnapshotWork first = Work(run, snaps.front(), data, split && last == 0 ? exact : options);
  std::vector<SnapshotPoint> points(snaps.size());
  std::vector<std::vector<bool>> same(snaps.size());
  points[0] = first.point;
  EvaluateInParallel(run, snaps, data, options, IndexRange(1, split ? last : snaps.size()), first, points, same);
  if (split) {
    if (last > 0) EvaluateInParallel(run, snaps, data, exact, {last}, first, points, same);
    const std::vector<std::size_t> redo = PointsToRefine(points, options.refine_below);
    EvaluateInParallel(run, snaps, data, exact, redo, first, points, same);
    traj.precision = model::Precision::kFloat32;
    traj.recomputed_in_double = static_cast<int>(redo.size()) + 1;
  }

  if (snaps.size() >= 2) {
    for (std::size_t l = 0; l < traj.frozen.size(); ++l) {
      bool unchanged = true;
      for (std::size_t i = 1; i < snaps.size(); ++i) unchanged = unchanged && same[i][l];
      traj.frozen[l] = traj.frozen[l] || unchanged;
    }
  }
  traj.points = std::move(points);
  return traj;
}

}  // namespace plaudit::audit
