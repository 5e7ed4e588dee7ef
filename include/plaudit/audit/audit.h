#pragma once
// `plaudit audit`: read run -> evaluate the snapshots -> run the checks -> reach a verdict.
// Rendering lives in plaudit/report; this header only computes.
#include <cstdint>
#include <filesystem>
#include <limits>
#include <optional>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "plaudit/audit/trajectory.h"
#include "plaudit/audit/verdict.h"
#include "plaudit/checks/check_result.h"
#include "plaudit/checks/curvature.h"
#include "plaudit/checks/gradient_decay.h"
#include "plaudit/checks/layer_degeneracy.h"
#include "plaudit/checks/loss_plateau.h"
#include "plaudit/checks/residual_fit.h"
#include "plaudit/checks/support_spread.h"
#include "plaudit/checks/two_way_diversity.h"
#include "plaudit/io/run_dir.h"
#include "plaudit/model/dataset.h"
#include "plaudit/model/network.h"

namespace plaudit::audit {

// When the curvature check runs. Its cost (a few dozen Hessian-vector products on every audit
// row) buys a decision only where the verdict would otherwise be spurious or global.
enum class CurvatureWhen {
  kAtPlateau,  // the loss is flat and the judged gradient has decayed (or settled at its floor)
  kAlways,
  kNever,
};
const char* CurvatureWhenToString(CurvatureWhen w);
std::optional<CurvatureWhen> CurvatureWhenFromString(const std::string& name);  // plateau, always, never

struct AuditOptions {
  // Audit rows: data.npz subsampled to at most this many rows (seeded); 0 = all rows.
  Eigen::Index max_rows = 8192;
  std::uint64_t seed = 0;        // one seed for every random choice of the audit
  // Snapshots evaluated in parallel; 0 = every hardware thread. The report does not depend on it.
  int threads = 0;
  Eigen::Index block_rows = 1024;
  // Global outright when the last loss <= global_loss_ratio * L0 (an interpolating optimum).
  double global_loss_ratio = 1e-6;

  checks::GradientDecayOptions gradient_decay;
  checks::SupportSpreadOptions support_spread;
  checks::ResidualFitOptions residual_fit;
  checks::LossPlateauOptions loss_plateau;
  checks::CurvatureOptions curvature;          // its block_rows and seed follow the audit's
  CurvatureWhen curvature_when = CurvatureWhen::kAtPlateau;
  // Audit rows the curvature check uses (seeded subsample; 0 = all): its cost is ~2 x
  // max_iterations gradient evaluations on these rows, so it is capped below max_rows.
  Eigen::Index curvature_rows = 2048;
  checks::LayerDegeneracyOptions layer_degeneracy;   // its block_rows and seed follow the audit's
  checks::TwoWayDiversityOptions two_way_diversity;  // its seed follows the audit's
  // Gradient statistics of every layer in the report (one backward pass to the input); false
  // stops the backward pass at the judged layer, which is all the verdict needs.
  bool all_layer_gradients = true;
  // Arithmetic of the gradient pass over the snapshots (TrajectoryOptions::precision). float32
  // recomputes in double the last snapshot and any whose gradient sup in a computed layer is
  // below float32_refine_below x that layer's peak, so the decay verdict reads double figures;
  // the other checks always run in double. Live runs (watch) always evaluate in double.
  model::Precision precision = model::Precision::kDouble;
  double float32_refine_below = 1e-3;  // in (0, 1]

  bool IsValid(std::string* why) const;
};

// Every threshold the audit used, by check, as recorded in the report.
nlohmann::json ThresholdsToJson(const AuditOptions& options);
// Overwrite thresholds from a JSON object of the same shape (--thresholds FILE.json);
// unknown keys are an error naming `file`.
void ApplyThresholds(const nlohmann::json& j, const std::string& file, AuditOptions& options);

struct AuditReport {
  std::string run;
  std::int64_t step = 0;                 // last snapshot
  Verdict verdict = Verdict::kInconclusive;
  std::string summary;
  std::vector<checks::CheckResult> checks;
  double baseline_loss = 0.0;            // L0, best constant predictor on the audit rows
  double last_loss = 0.0;
  Eigen::Index rows_used = 0, rows_total = 0;
  int gradient_layer = 0;                // 0-based layer judged by gradient-decay
  Trajectory trajectory;
  checks::LossSeries loss_series;
  nlohmann::json thresholds;
  std::uint64_t seed = 0;

  const checks::CheckResult* Find(const std::string& name) const;
};

AuditReport RunAudit(const io::RunDir& run, const AuditOptions& options);

// The pieces of RunAudit, for live runs that build the trajectory one snapshot at a time.
struct AuditInputs {
  std::vector<io::SnapshotRef> snaps;
  model::Network first, last;            // networks at the first and last snapshot
  std::optional<model::Dataset> data;    // audit rows (subsampled); absent without data.npz
  Eigen::Index rows_total = 0;
  double baseline_loss = std::numeric_limits<double>::quiet_NaN();
};
AuditInputs ReadAuditInputs(const io::RunDir& run, const AuditOptions& options);
// RunAudit on inputs already read (callers that also draw from them, e.g. the HTML report).
AuditReport RunAudit(const io::RunDir& run, const AuditInputs& inputs, const AuditOptions& options);
// Judge with a trajectory already computed down to `gradient_layer` (0-based).
AuditReport AuditFromTrajectory(const io::RunDir& run, const AuditInputs& inputs, Trajectory trajectory,
                                int gradient_layer, const AuditOptions& options);

// Run one check by name (`plaudit check NAME`); unknown names are kUsage errors listing the known ones.
checks::CheckResult RunSingleCheck(const io::RunDir& run, const std::string& name, const AuditOptions& options);
std::vector<std::string> CheckNames();

}  // namespace plaudit::audit
