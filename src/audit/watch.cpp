#include "plaudit/audit/watch.h"

#include <algorithm>
#include <cmath>

#include "plaudit/core/error.h"

namespace plaudit::audit {
namespace {

std::vector<bool> ManifestFrozen(const io::Manifest& m) {
  std::vector<bool> frozen;
  for (const auto& l : m.layers) frozen.push_back(!l.trainable);
  return frozen;
}

nlohmann::json Number(double v) { return std::isfinite(v) ? nlohmann::json(v) : nlohmann::json(nullptr); }

}  // namespace

const char* WatchEventKindToString(WatchEventKind k) {
  switch (k) {
    case WatchEventKind::kStarted: return "started";
    case WatchEventKind::kSnapshot: return "snapshot";
    case WatchEventKind::kPlateau: return "plateau";
    case WatchEventKind::kVerdict: return "verdict";
    case WatchEventKind::kRetry: return "retry";
    case WatchEventKind::kSkipped: return "skipped";
    case WatchEventKind::kIdle: return "idle";
  }
  return "?";
}

nlohmann::json WatchEventToJson(const WatchEvent& e) {
  nlohmann::json j{{"event", WatchEventKindToString(e.kind)}, {"step", e.step}};
  if (e.kind == WatchEventKind::kSnapshot || e.kind == WatchEventKind::kPlateau || e.kind == WatchEventKind::kVerdict) {
    j["loss"] = Number(e.loss);
    j["loss_relative"] = Number(e.loss_relative);
    j["gradient_ratio"] = Number(e.gradient_ratio);
    j["plateau"] = e.plateau;
  }
  if (e.verdict) j["verdict"] = VerdictToString(*e.verdict);
  if (!e.message.empty()) j["message"] = e.message;
  return j;
}

RunWatcher::RunWatcher(std::filesystem::path root, WatchOptions options)
    : root_(std::move(root)), options_(std::move(options)) {
  if (std::string why; !options_.audit.IsValid(&why)) raise(ExitCode::kUsage, "{}", why);
}

bool RunWatcher::Start(std::vector<WatchEvent>& events) {
  if (!run_) {
    std::error_code ec;
    if (!std::filesystem::exists(root_ / "run.json", ec)) return false;  // the trainer has not begun
    run_.emplace(root_);
    trajectory_.frozen = ManifestFrozen(run_->manifest());
    events.push_back({WatchEventKind::kStarted, 0, 0, 0, 0, false, std::nullopt,
                      fmt::format("{} layers, {} parameterization", run_->manifest().layers.size(),
                                  io::ParameterizationToString(run_->manifest().parameterization)),
                      nullptr});
  }
  return true;
}

void RunWatcher::ReadNewScalars(bool& changed) {
  const io::ScalarLog log = io::ReadScalars(run_->scalars_path(), scalars_offset_);
  if (!log.records.empty()) changed = true;
  scalars_.insert(scalars_.end(), log.records.begin(), log.records.end());
  scalars_offset_ = std::max(scalars_offset_, log.consumed_bytes);
}

bool RunWatcher::PlateauNow() const {
  // The run as of the newest snapshot: lines logged after it (all of them, when a finished run
  // is watched) must not declare a plateau before the snapshots reach it.
  const std::int64_t upto = trajectory_.points.back().step;
  checks::LossSeries logged;
  logged.source = "scalars";
  for (const auto& r : scalars_) {
    if (r.step > upto) continue;
    logged.steps.push_back(r.step);
    logged.loss.push_back(r.loss);
  }
  checks::LossSeries series;
  const int min_points = options_.audit.loss_plateau.min_points;
  if (static_cast<int>(logged.steps.size()) >= min_points || !inputs_.data) {
    series = std::move(logged);
  } else {
    series.source = "snapshots";
    for (const auto& p : trajectory_.points) {
      series.steps.push_back(p.step);
      series.loss.push_back(p.loss);
    }
  }
  const auto r = checks::RunLossPlateau(series, inputs_.baseline_loss, options_.audit.loss_plateau);
  return r.status == checks::Status::kPass;
}

std::vector<WatchEvent> RunWatcher::Poll() {
  std::vector<WatchEvent> events;
  if (!Start(events)) return events;
  bool changed = !events.empty();
  ReadNewScalars(changed);
  const io::Manifest& manifest = run_->manifest();
  const int depth = static_cast<int>(manifest.layers.size());

  std::vector<io::SnapshotRef> fresh;
  for (const auto& ref : run_->Snapshots()) {
    const bool known = std::any_of(trajectory_.points.begin(), trajectory_.points.end(),
                                   [&](const SnapshotPoint& p) { return p.step == ref.step; }) ||
                       std::count(given_up_.begin(), given_up_.end(), ref.step) > 0;
    if (!known) fresh.push_back(ref);
  }
  for (const auto& ref : fresh) {
    TrajectoryOptions t;
    t.block_rows = options_.audit.block_rows;
    model::Network net;
    SnapshotPoint point;
    try {
      if (trajectory_.points.empty()) {
        // The first readable snapshot fixes the judged layer and loads the audit data.
        net = model::NetworkFromArrays(manifest, run_->ReadSnapshot(ref), ref.path.string());
        inputs_.first = net;
        if (run_->has_data()) {
          model::Dataset full = model::ReadDataset(run_->data_path(), manifest.loss, net.output_dim());
          inputs_.rows_total = full.rows();
          inputs_.data = model::Subsample(full, options_.audit.max_rows, options_.audit.seed);
          inputs_.baseline_loss = model::ConstantBaselineLoss(*inputs_.data, manifest.loss, net.output_dim());
        }
        const std::vector<bool> frozen = ManifestFrozen(manifest);
        layer_ = checks::ResolveGradientLayer(options_.audit.gradient_decay, depth, frozen);
        std::vector<bool> if_fixed = frozen;
        if_fixed[static_cast<std::size_t>(layer_)] = true;  // the fallback, should the layer turn out fixed
        trajectory_.lowest_grad_layer = std::min(layer_, checks::ResolveGradientLayer(options_.audit.gradient_decay, depth, if_fixed));
        if (options_.audit.all_layer_gradients) trajectory_.lowest_grad_layer = 0;
      }
      t.lowest_grad_layer = trajectory_.lowest_grad_layer;
      point = EvaluateSnapshot(*run_, ref, inputs_.data ? &*inputs_.data : nullptr, t, &net);
    } catch (const Error& e) {
      if (e.code() != ExitCode::kBadData && e.code() != ExitCode::kMissing) throw;
      const int tries = ++retries_[ref.step];
      if (tries > options_.max_retries) {
        given_up_.push_back(ref.step);
        events.push_back({WatchEventKind::kSkipped, ref.step, 0, 0, 0, plateau_, std::nullopt, e.what(), nullptr});
      } else {
        events.push_back({WatchEventKind::kRetry, ref.step, 0, 0, 0, plateau_, std::nullopt, e.what(), nullptr});
      }
      continue;
    }
    changed = true;
    if (!trajectory_.points.empty() && ref.step < trajectory_.points.back().step) continue;  // late arrival, out of order
    trajectory_.points.push_back(point);
    inputs_.snaps.push_back(ref);
    inputs_.last = net;
    // Frozen: marked fixed, or unchanged since the first snapshot in every snapshot so far.
    const auto same = FrozenLayers(manifest, inputs_.first, net);
    for (std::size_t l = 0; l < same.size(); ++l) {
      const bool was = trajectory_.points.size() == 2 ? true : trajectory_.frozen[l];
      trajectory_.frozen[l] = !manifest.layers[l].trainable || (trajectory_.points.size() >= 2 && was && same[l]);
    }
    layer_ = std::max(trajectory_.lowest_grad_layer,
                      checks::ResolveGradientLayer(options_.audit.gradient_decay, depth, trajectory_.frozen));
    const double sup = point.grad[static_cast<std::size_t>(layer_)].sup;
    max_sup_ = std::max(max_sup_, sup);
    WatchEvent ev{WatchEventKind::kSnapshot, point.step, point.loss,
                  inputs_.baseline_loss > 0 ? point.loss / inputs_.baseline_loss : std::nan(""),
                  max_sup_ > 0 ? sup / max_sup_ : 0.0, plateau_, std::nullopt, "", nullptr};

    const bool plateau = PlateauNow();
    if (plateau != plateau_) {
      plateau_ = plateau;
      ev.plateau = plateau;
      events.push_back(ev);
      WatchEvent pe = ev;
      pe.kind = WatchEventKind::kPlateau;
      pe.message = plateau ? "the loss has stopped falling" : "the loss is falling again";
      events.push_back(pe);
      audited_this_plateau_ = false;
    } else {
      events.push_back(ev);
    }
    ++since_audit_;
    const bool undecided = last_verdict_ && (*last_verdict_ == Verdict::kMoving || *last_verdict_ == Verdict::kInconclusive);
    if (plateau_ && audited_this_plateau_ && undecided && since_audit_ >= options_.reaudit_every) audited_this_plateau_ = false;
    if (plateau_ && !audited_this_plateau_) {
      since_audit_ = 0;
      auto report = std::make_shared<AuditReport>(AuditFromTrajectory(*run_, inputs_, trajectory_, layer_, options_.audit));
      audited_this_plateau_ = true;
      last_verdict_ = report->verdict;
      WatchEvent ve = ev;
      ve.kind = WatchEventKind::kVerdict;
      ve.verdict = report->verdict;
      ve.message = report->summary;
      ve.report = report;
      events.push_back(ve);
    }
  }
  quiet_polls_ = changed ? 0 : quiet_polls_ + 1;
  if (changed) idle_reported_ = false;
  if (!idle_reported_ && quiet_polls_ >= options_.idle_polls) {
    idle_reported_ = true;
    events.push_back({WatchEventKind::kIdle, trajectory_.points.empty() ? 0 : trajectory_.points.back().step, 0, 0, 0,
                      plateau_, std::nullopt, fmt::format("no new snapshot or scalar line for {} polls", quiet_polls_),
                      nullptr});
  }
  return events;
}

}  // namespace plaudit::audit
