#pragma once
// One pass over the snapshots: loss and per-layer gradient statistics at each saved step.
// Every check that looks at the run over time reads this instead of re-reading snapshots.
#include <cstdint>
#include <string>
#include <vector>

#include "plaudit/io/run_dir.h"
#include "plaudit/model/dataset.h"
#include "plaudit/model/evaluate.h"
#include "plaudit/model/network.h"

namespace plaudit::audit {

// Magnitudes of one layer's weight gradient, in the parameterization's scale
// (model::WeightGradScale), over its entries.
struct GradientStats {
  double sup = 0.0;   // max |g|
  double p99 = 0.0;   // 99th percentile of |g|
  double mean = 0.0;  // mean |g|
  double rms = 0.0;   // sqrt(mean g^2)
  // Per-neuron (row of W_l) gradient norm: largest and mean, to see a few neurons keep moving.
  double neuron_sup = 0.0;
  double neuron_mean = 0.0;
};

GradientStats ComputeGradientStats(const Eigen::MatrixXd& scaled_grad);

struct SnapshotPoint {
  std::int64_t step = 0;
  double loss = 0.0;  // computed from the weights on the audit rows (NaN when no data)
  bool finite = true;   // every parameter finite
  // One entry per layer; layers below the lowest one asked for are left default.
  std::vector<GradientStats> grad;
  bool grad_from_file = false;  // taken from grad/<name> arrays (no data given)
  bool float32 = false;         // loss and gradients from the float32 pass (not recomputed in double)
};

struct Trajectory {
  std::vector<SnapshotPoint> points;  // in step order
  std::vector<bool> frozen;           // per layer: marked trainable=false or unchanged throughout
  int lowest_grad_layer = 0;
  model::Precision precision = model::Precision::kDouble;
  int recomputed_in_double = 0;       // float32 only: points evaluated in double (the last and the refined)
};

struct TrajectoryOptions {
  int lowest_grad_layer = 0;        // backward pass stops here (0-based)
  Eigen::Index block_rows = 1024;
  int threads = 1;                  // snapshots evaluated in parallel; results do not depend on it
  // float32: every snapshot is first evaluated in single precision; the last one, and any whose
  // gradient sup in some computed layer is below `refine_below` times that layer's largest sup
  // over the run, are evaluated again in double. Those are the points whose gradients cancel
  // far enough for float32 rounding to matter, and the ones the decay verdict reads.
  model::Precision precision = model::Precision::kDouble;
  double refine_below = 1e-3;
};

// Evaluate one snapshot (for live runs, which add one point at a time). `net_out`, when given,
// receives the network read from it.
SnapshotPoint EvaluateSnapshot(const io::RunDir& run, const io::SnapshotRef& ref, const model::Dataset* data,
                               const TrajectoryOptions& options, model::Network* net_out = nullptr);

// Layers to treat as held fixed: marked trainable=false, or identical in `first` and `now`.
std::vector<bool> FrozenLayers(const io::Manifest& manifest, const model::Network& first, const model::Network& now);

// Every snapshot of a run holds one architecture: throws Error(kBadData) naming `file`, the
// layer and `reference_file` when a weight's shape differs from the reference snapshot's.
void RequireSameArchitecture(const io::Manifest& manifest, const model::Network& reference,
                             const std::string& reference_file, const model::Network& net, const std::string& file);

// Evaluate every snapshot on `data` (nullptr: use grad/<name> arrays from the snapshots).
Trajectory ComputeTrajectory(const io::RunDir& run, const std::vector<io::SnapshotRef>& snaps,
                             const model::Dataset* data, const TrajectoryOptions& options);

}  // namespace plaudit::audit
