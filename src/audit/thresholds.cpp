// The thresholds file (--thresholds FILE.json) and the report's record of thresholds share one
// shape: {"<check>": {"<field>": number}}. One table lists every threshold once.
#include <functional>

#include "plaudit/audit/audit.h"
#include "plaudit/core/error.h"

namespace plaudit::audit {
namespace {

struct ThresholdField {
  const char* check;
  const char* field;
  std::function<double&(AuditOptions&)> ref;
};

const std::vector<ThresholdField>& Fields() {
  static const std::vector<ThresholdField> fields = {
      {"gradient-decay", "decay_ratio", [](AuditOptions& o) -> double& { return o.gradient_decay.decay_ratio; }},
      {"gradient-decay", "slope_t", [](AuditOptions& o) -> double& { return o.gradient_decay.slope_t; }},
      {"gradient-decay", "floor_ratio", [](AuditOptions& o) -> double& { return o.gradient_decay.floor_ratio; }},
      {"support-spread", "threshold", [](AuditOptions& o) -> double& { return o.support_spread.threshold; }},
      {"residual-fit", "alpha", [](AuditOptions& o) -> double& { return o.residual_fit.alpha; }},
      {"residual-fit", "effect_threshold", [](AuditOptions& o) -> double& { return o.residual_fit.effect_threshold; }},
      {"residual-fit", "min_removable_rel", [](AuditOptions& o) -> double& { return o.residual_fit.min_removable_rel; }},
      {"loss-plateau", "rel_threshold", [](AuditOptions& o) -> double& { return o.loss_plateau.rel_threshold; }},
      {"loss-plateau", "abs_threshold", [](AuditOptions& o) -> double& { return o.loss_plateau.abs_threshold; }},
      {"curvature", "threshold", [](AuditOptions& o) -> double& { return o.curvature.threshold; }},
      {"curvature", "min_decrease_rel", [](AuditOptions& o) -> double& { return o.curvature.min_decrease_rel; }},
      {"layer-degeneracy", "threshold", [](AuditOptions& o) -> double& { return o.layer_degeneracy.threshold; }},
      {"two-way-diversity", "threshold", [](AuditOptions& o) -> double& { return o.two_way_diversity.threshold; }},
      {"verdict", "global_loss_ratio", [](AuditOptions& o) -> double& { return o.global_loss_ratio; }},
  };
  return fields;
}

}  // namespace

nlohmann::json ThresholdsToJson(const AuditOptions& options) {
  AuditOptions copy = options;
  nlohmann::json j = nlohmann::json::object();
  for (const auto& f : Fields()) j[f.check][f.field] = f.ref(copy);
  return j;
}

void ApplyThresholds(const nlohmann::json& j, const std::string& file, AuditOptions& options) {
  if (!j.is_object()) raise(ExitCode::kBadData, "{}: thresholds must be a JSON object of checks", file);
  for (const auto& [check, fields] : j.items()) {
    if (!fields.is_object()) raise(ExitCode::kBadData, "{}: '{}' must be an object of thresholds", file, check);
    for (const auto& [field, value] : fields.items()) {
      // Named copies: lambdas may capture structured bindings only from C++20 on.
      const std::string& check_name = check;
      const std::string& field_name = field;
      const auto it = std::find_if(Fields().begin(), Fields().end(), [&](const ThresholdField& f) {
        return check_name == f.check && field_name == f.field;
      });
      if (it == Fields().end()) {
        std::vector<std::string> known;
        for (const auto& f : Fields()) known.push_back(fmt::format("{}.{}", f.check, f.field));
        raise(ExitCode::kBadData, "{}: unknown threshold '{}.{}' (known: {})", file, check, field, fmt::join(known, ", "));
      }
      if (!value.is_number()) raise(ExitCode::kBadData, "{}: threshold '{}.{}' must be a number", file, check, field);
      it->ref(options) = value.get<double>();
    }
  }
}

}  // namespace plaudit::audit
