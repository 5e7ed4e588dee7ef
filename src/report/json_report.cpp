#include "plaudit/report/json_report.h"

#include <cmath>

namespace plaudit::report {
namespace {

nlohmann::json Number(double v) { return std::isfinite(v) ? nlohmann::json(v) : nlohmann::json(nullptr); }

nlohmann::json TrajectoryToJson(const audit::Trajectory& traj) {
  nlohmann::json points = nlohmann::json::array();
  for (const auto& p : traj.points) {
    nlohmann::json layers = nlohmann::json::array();
    for (std::size_t l = static_cast<std::size_t>(traj.lowest_grad_layer); l < p.grad.size(); ++l) {
      const auto& g = p.grad[l];
      layers.push_back({{"layer", l + 1}, {"sup", Number(g.sup)}, {"p99", Number(g.p99)}, {"mean", Number(g.mean)},
                        {"neuron_sup", Number(g.neuron_sup)}});
    }
    nlohmann::json point = {{"step", p.step}, {"loss", Number(p.loss)}, {"gradient", layers}};
    // Marked only when the run asked for float32, so double reports keep their exact bytes.
    if (traj.precision == model::Precision::kFloat32) point["precision"] = p.float32 ? "float32" : "double";
    points.push_back(std::move(point));
  }
  nlohmann::json frozen = nlohmann::json::array();
  for (std::size_t l = 0; l < traj.frozen.size(); ++l) if (traj.frozen[l]) frozen.push_back(l + 1);
  nlohmann::json j = {{"points", points}, {"frozen_layers", frozen}};
  if (traj.precision == model::Precision::kFloat32) {
    j["precision"] = "float32";
    j["recomputed_in_double"] = traj.recomputed_in_double;
  }
  return j;
}

}  // namespace

nlohmann::json AuditReportToJson(const audit::AuditReport& r) {
  nlohmann::json j;
  j["format"] = kReportFormat;
  j["run"] = r.run;
  j["step"] = r.step;
  j["verdict"] = audit::VerdictToString(r.verdict);
  j["summary"] = r.summary;
  j["checks"] = nlohmann::json::array();
  for (const auto& c : r.checks) j["checks"].push_back(checks::CheckResultToJson(c));
  j["baseline_loss"] = Number(r.baseline_loss);
  j["last_loss"] = Number(r.last_loss);
  j["last_loss_relative"] = r.baseline_loss > 0 ? Number(r.last_loss / r.baseline_loss) : nlohmann::json(nullptr);
  j["rows"] = {{"used", r.rows_used}, {"total", r.rows_total}};
  j["gradient_layer"] = r.gradient_layer + 1;
  j["seed"] = r.seed;
  j["thresholds"] = r.thresholds;
  j["loss_source"] = r.loss_series.source;
  j["trajectory"] = TrajectoryToJson(r.trajectory);
  return j;
}

}  // namespace plaudit::report
