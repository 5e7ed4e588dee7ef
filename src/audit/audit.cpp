#include "plaudit/audit/audit.h"

#include <cmath>
#include <optional>

#include "plaudit/audit/decide.h"
#include "plaudit/core/error.h"
#include "plaudit/core/threads.h"
#include "plaudit/model/dataset.h"
#include "plaudit/model/network.h"

namespace plaudit::audit {
namespace {

using Inputs = AuditInputs;

}  // namespace

AuditInputs ReadAuditInputs(const io::RunDir& run, const AuditOptions& options) {
  Inputs in;
  std::error_code ec;
  if (!std::filesystem::is_directory(run.snapshot_dir(), ec)) {
    raise(ExitCode::kMissing, "{}: snapshots directory not found", run.snapshot_dir().string());
  }
  in.snaps = run.Snapshots();
  if (in.snaps.empty()) {
    raise(ExitCode::kBadData, "{}: no snapshots (expected files named step-<N>.npz)", run.snapshot_dir().string());
  }
  const auto& m = run.manifest();
  in.first = model::NetworkFromArrays(m, run.ReadSnapshot(in.snaps.front()), in.snaps.front().path.string());
  in.last = in.snaps.size() == 1 ? in.first
                                 : model::NetworkFromArrays(m, run.ReadSnapshot(in.snaps.back()), in.snaps.back().path.string());
  RequireSameArchitecture(m, in.first, in.snaps.front().path.string(), in.last, in.snaps.back().path.string());
  if (run.has_data()) {
    model::Dataset full = model::ReadDataset(run.data_path(), m.loss, in.last.output_dim());
    if (full.dim() != in.last.input_dim()) {
      raise(ExitCode::kBadData, "{}: 'x' has {} columns but the first layer takes {} inputs", run.data_path().string(),
            full.dim(), in.last.input_dim());
    }
    in.rows_total = full.rows();
    in.data = model::Subsample(full, options.max_rows, options.seed);
    in.baseline_loss = model::ConstantBaselineLoss(*in.data, m.loss, in.last.output_dim());
  }
  return in;
}

namespace {

std::vector<bool> ManifestFrozen(const io::Manifest& m) {
  std::vector<bool> frozen;
  for (const auto& l : m.layers) frozen.push_back(!l.trainable);
  return frozen;
}

// The trajectory down to the judged layer. Layers found unchanged across snapshots count as
// frozen too, which can move the default choice lower: then evaluate again down to it.
Trajectory TrajectoryForLayer(const io::RunDir& run, const Inputs& in, const AuditOptions& options, int& layer) {
  const int depth = static_cast<int>(run.manifest().layers.size());
  layer = checks::ResolveGradientLayer(options.gradient_decay, depth, ManifestFrozen(run.manifest()));
  TrajectoryOptions t;
  t.block_rows = options.block_rows;
  t.threads = ThreadsFor(options.threads);
  t.lowest_grad_layer = options.all_layer_gradients ? 0 : layer;
  t.precision = options.precision;
  t.refine_below = options.float32_refine_below;
  Trajectory traj = ComputeTrajectory(run, in.snaps, in.data ? &*in.data : nullptr, t);
  const int resolved = checks::ResolveGradientLayer(options.gradient_decay, depth, traj.frozen);
  if (resolved < t.lowest_grad_layer) {
    t.lowest_grad_layer = resolved;
    std::vector<bool> frozen = traj.frozen;
    traj = ComputeTrajectory(run, in.snaps, in.data ? &*in.data : nullptr, t);
    traj.frozen = frozen;
  }
  layer = resolved;
  return traj;
}

checks::LossSeries LossSeriesOf(const io::RunDir& run, const Trajectory& traj, int min_points) {
  checks::LossSeries s;
  const io::ScalarLog log = run.Scalars();
  if (static_cast<int>(log.records.size()) >= min_points || traj.points.empty() || std::isnan(traj.points[0].loss)) {
    s.source = "scalars";
    for (const auto& r : log.records) {
      s.steps.push_back(r.step);
      s.loss.push_back(r.loss);
    }
    if (!s.steps.empty() || traj.points.empty() || std::isnan(traj.points[0].loss)) return s;
  }
  s.source = "snapshots";
  for (const auto& p : traj.points) {
    s.steps.push_back(p.step);
    s.loss.push_back(p.loss);
  }
  return s;
}

// Where the run first went non-finite, or empty.
std::string FirstNonFinite(const Trajectory& traj, const checks::LossSeries& series) {
  for (const auto& p : traj.points) {
    if (!p.finite) return fmt::format("parameters at step {}", p.step);
    if (std::isinf(p.loss) || (std::isnan(p.loss) && !p.grad_from_file)) return fmt::format("loss at step {}", p.step);
  }
  for (std::size_t i = 0; i < series.loss.size(); ++i) {
    if (!std::isfinite(series.loss[i])) return fmt::format("logged loss at step {}", series.steps[i]);
  }
  return {};
}

checks::ResidualFitOptions Seeded(checks::ResidualFitOptions o, std::uint64_t seed) {
  o.seed = seed ^ 0x9e3779b97f4a7c15ULL;
  return o;
}
checks::SupportSpreadOptions Seeded(checks::SupportSpreadOptions o, std::uint64_t seed) {
  o.seed = seed ^ 0xbf58476d1ce4e5b9ULL;
  return o;
}

checks::CurvatureOptions Seeded(checks::CurvatureOptions o, const AuditOptions& audit) {
  o.seed = audit.seed ^ 0x94d049bb133111ebULL;
  o.block_rows = audit.block_rows;
  o.record_seconds = false;  // the report stays byte-identical across runs; the cost is in the counts
  return o;
}
checks::LayerDegeneracyOptions Seeded(checks::LayerDegeneracyOptions o, const AuditOptions& audit) {
  o.seed = audit.seed ^ 0x2545f4914f6cdd1dULL;
  o.block_rows = audit.block_rows;
  return o;
}
checks::TwoWayDiversityOptions Seeded(checks::TwoWayDiversityOptions o, std::uint64_t seed) {
  o.seed = seed ^ 0xd6e8feb86659fd93ULL;
  return o;
}

checks::CheckResult NeedsData(const char* name, double threshold) {
  return checks::Skipped(name, threshold, "the run has no audit data (data.npz)");
}

// Curvature under CurvatureWhen::kAtPlateau: only where the loss is flat and the judged gradient
// has died down, the one state in which a saddle changes the verdict.
std::optional<std::string> CurvatureNotNeeded(const AuditOptions& options, const checks::CheckResult& gradient,
                                              const checks::CheckResult& plateau) {
  if (options.curvature_when == CurvatureWhen::kAlways) return std::nullopt;
  if (options.curvature_when == CurvatureWhen::kNever) return std::string("not requested (curvature: never)");
  if (plateau.status == checks::Status::kFail) return std::string("not needed: the loss is still falling");
  if (gradient.status == checks::Status::kFail) return std::string("not needed: the judged gradient has not decayed");
  if (!plateau.ran() || !gradient.ran()) return std::string("not needed: the plateau could not be judged");
  return std::nullopt;
}

checks::CheckResult CurvatureOf(const Inputs& in, const AuditOptions& options) {
  if (!in.data) return NeedsData(checks::kCurvatureName, options.curvature.threshold);
  const checks::CurvatureOptions curvature = Seeded(options.curvature, options);
  const model::Dataset rows = model::Subsample(*in.data, options.curvature_rows, curvature.seed);
  // L0 stays that of the audit rows, so the decrease is read on the same scale as every other check.
  return checks::RunCurvature(in.last, rows, in.baseline_loss, curvature);
}
checks::CheckResult LayerDegeneracyOf(const Inputs& in, const AuditOptions& options) {
  if (!in.data) return NeedsData(checks::kLayerDegeneracyName, options.layer_degeneracy.threshold);
  return checks::RunLayerDegeneracy(in.last, &in.first, *in.data, Seeded(options.layer_degeneracy, options));
}
checks::CheckResult TwoWayDiversityOf(const Inputs& in, const AuditOptions& options) {
  return checks::RunTwoWayDiversity(in.last, &in.first, Seeded(options.two_way_diversity, options.seed));
}

}  // namespace

bool AuditOptions::IsValid(std::string* why) const {
  auto bad = [&](std::string msg) {
    if (why) *why = std::move(msg);
    return false;
  };
  if (max_rows < 0) return bad(fmt::format("max-rows is {}, must be >= 0", max_rows));
  if (curvature_rows < 0) return bad(fmt::format("curvature-rows is {}, must be >= 0", curvature_rows));
  if (threads < 0) return bad(fmt::format("threads is {}, must be >= 0 (0 = every hardware thread)", threads));
  if (block_rows < 1) return bad(fmt::format("block-rows is {}, must be >= 1", block_rows));
  if (!(float32_refine_below > 0.0 && float32_refine_below <= 1.0)) {
    return bad(fmt::format("float32-refine-below is {}, must be in (0, 1]", float32_refine_below));
  }
  if (!(global_loss_ratio >= 0.0)) return bad(fmt::format("global-loss-ratio is {}, must be >= 0", global_loss_ratio));
  return gradient_decay.IsValid(why) && support_spread.IsValid(why) && residual_fit.IsValid(why) &&
         loss_plateau.IsValid(why) && Seeded(curvature, *this).IsValid(why) &&
         Seeded(layer_degeneracy, *this).IsValid(why) && two_way_diversity.IsValid(why);
}

const char* CurvatureWhenToString(CurvatureWhen w) {
  switch (w) {
    case CurvatureWhen::kAtPlateau: return "plateau";
    case CurvatureWhen::kAlways: return "always";
    case CurvatureWhen::kNever: return "never";
  }
  return "plateau";
}

std::optional<CurvatureWhen> CurvatureWhenFromString(const std::string& name) {
  for (CurvatureWhen w : {CurvatureWhen::kAtPlateau, CurvatureWhen::kAlways, CurvatureWhen::kNever}) {
    if (name == CurvatureWhenToString(w)) return w;
  }
  return std::nullopt;
}

const checks::CheckResult* AuditReport::Find(const std::string& name) const {
  for (const auto& c : checks) if (c.name == name) return &c;
  return nullptr;
}

std::vector<std::string> CheckNames() {
  return {"gradient-decay", "support-spread",   "residual-fit",     "loss-plateau",
          "curvature",      "layer-degeneracy", "two-way-diversity"};
}

AuditReport RunAudit(const io::RunDir& run, const AuditOptions& options) {
  if (std::string why; !options.IsValid(&why)) raise(ExitCode::kUsage, "{}", why);
  return RunAudit(run, ReadAuditInputs(run, options), options);
}

AuditReport RunAudit(const io::RunDir& run, const AuditInputs& in, const AuditOptions& options) {
  if (std::string why; !options.IsValid(&why)) raise(ExitCode::kUsage, "{}", why);
  int layer = 0;
  Trajectory traj = TrajectoryForLayer(run, in, options, layer);
  return AuditFromTrajectory(run, in, std::move(traj), layer, options);
}

AuditReport AuditFromTrajectory(const io::RunDir& run, const AuditInputs& in, Trajectory trajectory, int gradient_layer,
                                const AuditOptions& options) {
  AuditReport report;
  report.run = run.root().string();
  report.step = in.snaps.back().step;
  report.seed = options.seed;
  report.thresholds = ThresholdsToJson(options);
  report.baseline_loss = in.baseline_loss;
  report.rows_total = in.rows_total;
  report.rows_used = in.data ? in.data->rows() : 0;
  report.gradient_layer = gradient_layer;
  report.trajectory = std::move(trajectory);
  report.loss_series = LossSeriesOf(run, report.trajectory, options.loss_plateau.min_points);
  report.last_loss = report.trajectory.points.back().loss;
  if (std::isnan(report.last_loss) && !report.loss_series.loss.empty()) report.last_loss = report.loss_series.loss.back();

  DecisionInputs d;
  d.diverged_where = FirstNonFinite(report.trajectory, report.loss_series);
  d.diverged = !d.diverged_where.empty() || !in.last.AllFinite();
  if (d.diverged && d.diverged_where.empty()) d.diverged_where = fmt::format("parameters at step {}", report.step);

  if (d.diverged) {
    for (const auto& name : CheckNames()) report.checks.push_back(checks::Skipped(name, std::nan(""), "the run diverged"));
  } else {
    report.checks.push_back(checks::RunGradientDecay(report.trajectory, report.gradient_layer, options.gradient_decay));
    report.checks.push_back(in.data ? checks::RunSupportSpread(in.last, &in.first, *in.data, Seeded(options.support_spread, options.seed))
                                    : NeedsData("support-spread", options.support_spread.threshold));
    report.checks.push_back(in.data ? checks::RunResidualFit(in.last, *in.data, in.baseline_loss, Seeded(options.residual_fit, options.seed))
                                    : NeedsData("residual-fit", options.residual_fit.effect_threshold));
    report.checks.push_back(checks::RunLossPlateau(report.loss_series, in.baseline_loss, options.loss_plateau));
    const auto not_needed = CurvatureNotNeeded(options, report.checks[0], report.checks[3]);
    report.checks.push_back(not_needed ? checks::Skipped(checks::kCurvatureName, options.curvature.threshold, *not_needed)
                                       : CurvatureOf(in, options));
    report.checks.push_back(LayerDegeneracyOf(in, options));
    report.checks.push_back(TwoWayDiversityOf(in, options));
  }
  d.last_loss = report.last_loss;
  d.baseline_loss = in.baseline_loss;
  d.global_loss_ratio = options.global_loss_ratio;
  d.gradient_layer = report.gradient_layer;
  d.gradient_decay = report.Find("gradient-decay");
  d.loss_plateau = report.Find("loss-plateau");
  d.residual_fit = report.Find("residual-fit");
  d.support_spread = report.Find("support-spread");
  d.curvature = report.Find(checks::kCurvatureName);
  d.layer_degeneracy = report.Find(checks::kLayerDegeneracyName);
  d.two_way_diversity = report.Find(checks::kTwoWayDiversityName);
  d.depth = in.last.depth();
  const Decision decision = Decide(d);
  report.verdict = decision.verdict;
  report.summary = decision.summary;
  return report;
}

checks::CheckResult RunSingleCheck(const io::RunDir& run, const std::string& name, const AuditOptions& options) {
  const auto names = CheckNames();
  if (std::find(names.begin(), names.end(), name) == names.end()) {
    raise(ExitCode::kUsage, "unknown check '{}' (known: {})", name, fmt::join(names, ", "));
  }
  if (std::string why; !options.IsValid(&why)) raise(ExitCode::kUsage, "{}", why);
  const Inputs in = ReadAuditInputs(run, options);
  if (name == "support-spread") {
    return in.data ? checks::RunSupportSpread(in.last, &in.first, *in.data, Seeded(options.support_spread, options.seed))
                   : NeedsData("support-spread", options.support_spread.threshold);
  }
  if (name == "residual-fit") {
    return in.data ? checks::RunResidualFit(in.last, *in.data, in.baseline_loss, Seeded(options.residual_fit, options.seed))
                   : NeedsData("residual-fit", options.residual_fit.effect_threshold);
  }
  if (name == checks::kCurvatureName) return CurvatureOf(in, options);  // asked for by name: always
  if (name == checks::kLayerDegeneracyName) return LayerDegeneracyOf(in, options);
  if (name == checks::kTwoWayDiversityName) return TwoWayDiversityOf(in, options);
  int layer = 0;
  const Trajectory traj = TrajectoryForLayer(run, in, options, layer);
  if (name == "gradient-decay") return checks::RunGradientDecay(traj, layer, options.gradient_decay);
  return checks::RunLossPlateau(LossSeriesOf(run, traj, options.loss_plateau.min_points), in.baseline_loss,
                                options.loss_plateau);
}

}  // namespace plaudit::audit
