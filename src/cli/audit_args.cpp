#include "cli/audit_args.h"

#include <fstream>

#include "cli/options.h"
#include "plaudit/core/error.h"

namespace plaudit::cli {
namespace {

struct ThresholdFlag {
  const char* flag;
  const char* key;  // check.field as in the thresholds file
  const char* help;
};

constexpr ThresholdFlag kThresholdFlags[] = {
    {"--decay-ratio", "gradient-decay.decay_ratio", "gradient-decay fails when sup|grad| now / peak > this (1e-2)"},
    {"--slope-t", "gradient-decay.slope_t", "gradient-decay fails when the tail slope of log sup|grad| has t > this (2)"},
    {"--floor-ratio", "gradient-decay.floor_ratio", "... but only warns when rho <= this and the tail is flat: an SGD noise floor (0.1)"},
    {"--spread-threshold", "support-spread.threshold", "support-spread fails when empty cap / random-direction median > this (2)"},
    {"--alpha", "residual-fit.alpha", "residual-fit explains only when p <= this (0.01)"},
    {"--effect-threshold", "residual-fit.effect_threshold", "... and the out-of-fold loss fraction removed >= this (0.01)"},
    {"--min-removable", "residual-fit.min_removable_rel", "... and the removable loss >= this x L0 (1e-4)"},
    {"--plateau-rel", "loss-plateau.rel_threshold", "plateau when the tail drop / current loss < this (1e-2)"},
    {"--plateau-abs", "loss-plateau.abs_threshold", "... or when the tail drop / L0 < this (1e-4)"},
    {"--curvature-threshold", "curvature.threshold", "curvature fails when lambda_min < -this x lambda_max (1e-3) ..."},
    {"--curvature-decrease", "curvature.min_decrease_rel", "... and a step along it lowers the loss by >= this x L0 (1e-4)"},
    {"--degeneracy-threshold", "layer-degeneracy.threshold", "layer-degeneracy fails when a deep layer's mean |corr| >= this (0.95)"},
    {"--two-way-threshold", "two-way-diversity.threshold", "two-way-diversity fails when a middle layer's empty cap / random median > this (2)"},
    {"--global-ratio", "verdict.global_loss_ratio", "global outright when loss <= this x L0 (1e-6)"},
};

nlohmann::json ReadJsonFile(const std::string& path) {
  std::ifstream in(path);
  if (!in) raise(ExitCode::kMissing, "{}: thresholds file not found", path);
  const auto j = nlohmann::json::parse(in, nullptr, false);
  if (j.is_discarded()) raise(ExitCode::kBadData, "{}: not valid JSON", path);
  return j;
}

}  // namespace

void AddAuditArgs(CLI::App& app, AuditArgs& args) {
  app.add_option("run", args.run, "Run directory")->required();
  AddFormatOption(app, args.format, {"text", "json"});
  auto& o = args.options;
  app.add_option("--seed", o.seed, "Seed for every random choice (row subsample, probes, features, permutations)")->capture_default_str();
  app.add_option("--threads", o.threads, "Snapshots evaluated in parallel (0 = every hardware thread)")
      ->check(CLI::Range(0, 256))->capture_default_str();
  app.add_option("--max-rows", o.max_rows, "Audit rows: subsample data.npz to at most this many (0 = all)")
      ->check(CLI::NonNegativeNumber)->capture_default_str();
  app.add_option("--block-rows", o.block_rows, "Rows per block of the forward/backward pass")->check(CLI::PositiveNumber)->capture_default_str();
  app.add_option("--layer", o.gradient_decay.layer, "Layer (1-based) whose gradient is judged; 0 = by depth")
      ->check(CLI::NonNegativeNumber)->capture_default_str();
  app.add_option("--features", o.residual_fit.features, "residual-fit: fresh random units")->check(CLI::PositiveNumber)->capture_default_str();
  app.add_option("--permutations", o.residual_fit.permutations, "residual-fit: permutations of the null")->check(CLI::PositiveNumber)->capture_default_str();
  app.add_option("--probes", o.support_spread.probes, "support-spread: random probes of the sphere")->check(CLI::PositiveNumber)->capture_default_str();
  app.add_option("--curvature-iterations", o.curvature.max_iterations, "curvature: Lanczos steps (Hessian-vector products)")
      ->check(CLI::Range(2, 100000))->capture_default_str();
  app.add_option("--curvature-rows", o.curvature_rows, "curvature: audit rows it uses (seeded subsample; 0 = all)")
      ->check(CLI::NonNegativeNumber)->capture_default_str();
  app.add_option("--curvature-method", args.curvature_method, "curvature: Hessian-vector products exact (R-operator) or by central differences")
      ->check(CLI::IsMember({"exact", "central-difference"}))->capture_default_str();
  app.add_option("--curvature", args.curvature_when, "When to run the curvature check: at a plateau with a decayed gradient, always, or never")
      ->check(CLI::IsMember({"plateau", "always", "never"}))->capture_default_str();
  app.add_option("--precision", args.precision,
                 "Arithmetic of the gradient pass over the snapshots: double, or float32 with the last snapshot and "
                 "any whose gradient fell below 1e-3 of its peak recomputed in double")
      ->check(CLI::IsMember({"double", "float32"}))->capture_default_str();
  app.add_flag("--judged-layer-only", args.judged_layer_only, "Stop the backward pass at the judged layer (no per-layer gradient table)");
  AddAuditThresholdArgs(app, args);
}

void AddAuditThresholdArgs(CLI::App& app, AuditArgs& args) {
  app.add_option("--thresholds", args.thresholds_file, "JSON file of thresholds, shaped like the report's 'thresholds'");
  for (const auto& f : kThresholdFlags) {
    app.add_option_function<double>(f.flag, [&args, key = f.key](double v) { args.threshold_flags[key] = v; }, f.help);
  }
}

audit::AuditOptions AuditArgs::Resolve() const {
  audit::AuditOptions resolved = options;
  resolved.curvature_when = *audit::CurvatureWhenFromString(curvature_when);
  resolved.curvature.method = curvature_method == "exact" ? model::HessianMethod::kExact
                                                          : model::HessianMethod::kCentralDifference;
  if (judged_layer_only) resolved.all_layer_gradients = false;
  resolved.precision = *model::PrecisionFromString(precision);
  if (!thresholds_file.empty()) audit::ApplyThresholds(ReadJsonFile(thresholds_file), thresholds_file, resolved);
  nlohmann::json flags = nlohmann::json::object();
  for (const auto& [key, value] : threshold_flags) {
    const auto dot = key.find('.');
    flags[key.substr(0, dot)][key.substr(dot + 1)] = value;
  }
  audit::ApplyThresholds(flags, "command line", resolved);
  if (std::string why; !resolved.IsValid(&why)) raise(ExitCode::kUsage, "invalid option: {}", why);
  return resolved;
}

}  // namespace plaudit::cli
