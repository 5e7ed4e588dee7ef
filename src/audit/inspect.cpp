#include "plaudit/audit/inspect.h"

#include <cmath>
#include <map>

#include <fmt/format.h>

#include "plaudit/core/error.h"
#include "plaudit/model/dataset.h"
#include "plaudit/model/evaluate.h"
#include "plaudit/model/network.h"

namespace plaudit::audit {
namespace {

nlohmann::json OptionalNumber(const std::optional<double>& v) {
  return v && std::isfinite(*v) ? nlohmann::json(*v) : nlohmann::json(nullptr);
}

std::string Cell(const std::optional<double>& v) { return v ? fmt::format("{:.6g}", *v) : std::string("-"); }

}  // namespace

RunSummary Inspect(const io::RunDir& run, const InspectOptions& options) {
  const io::Manifest& m = run.manifest();
  RunSummary s;
  s.run = run.root().string();
  s.parameterization = io::ParameterizationToString(m.parameterization);
  s.loss = model::LossToString(m.loss);
  s.weight_layout = io::WeightLayoutToString(m.weight_layout);
  s.notes = m.notes;
  const auto snaps = run.Snapshots();
  std::map<std::int64_t, double> logged;
  const io::ScalarLog log = run.Scalars();
  s.scalar_records = log.records.size();
  for (const auto& r : log.records) logged[r.step] = r.loss;

  std::optional<model::Network> first;
  if (!snaps.empty()) first = model::NetworkFromArrays(m, run.ReadSnapshot(snaps.front()), snaps.front().path.string());
  for (std::size_t l = 0; l < m.layers.size(); ++l) {
    LayerSummary ls;
    ls.weight = m.layers[l].weight;
    ls.bias = m.layers[l].bias.value_or("");
    ls.activation = model::ActivationToString(m.layers[l].activation);
    ls.trainable = m.layers[l].trainable;
    if (first) {
      const auto& layer = first->layers[l];
      ls.fan_in = layer.fan_in();
      ls.fan_out = layer.fan_out();
      ls.multiplier = layer.multiplier;
    }
    s.layers.push_back(ls);
  }
  if (first) s.parameters = first->parameter_count();

  std::optional<model::Dataset> data;
  s.has_data = run.has_data();
  if (s.has_data && first) {
    model::Dataset full = model::ReadDataset(run.data_path(), m.loss, first->output_dim());
    if (full.dim() != first->input_dim()) {
      raise(ExitCode::kBadData, "{}: 'x' has {} columns but the first layer takes {} inputs", run.data_path().string(),
            full.dim(), first->input_dim());
    }
    s.data_rows = full.rows();
    s.data_dims = full.dim();
    data = model::Subsample(full, options.max_rows, options.seed);
    s.data_rows_used = data->rows();
    s.baseline_loss = model::ConstantBaselineLoss(*data, m.loss, first->output_dim());
  }
  for (std::size_t i = 0; i < snaps.size(); ++i) {
    SnapshotSummary ss;
    ss.step = snaps[i].step;
    if (auto it = logged.find(ss.step); it != logged.end()) ss.logged_loss = it->second;
    const bool wanted = options.all_losses || i == 0 || i + 1 == snaps.size();
    if (wanted && data) {
      const model::Network net =
          i == 0 ? *first : model::NetworkFromArrays(m, run.ReadSnapshot(snaps[i]), snaps[i].path.string());
      model::EvalOptions eval;
      eval.lowest_grad_layer = -1;
      ss.loss = model::Evaluate(net, *data, eval).loss;
    }
    s.snapshots.push_back(ss);
  }
  return s;
}

nlohmann::json RunSummaryToJson(const RunSummary& s) {
  nlohmann::json j;
  j["run"] = s.run;
  j["parameterization"] = s.parameterization;
  j["loss"] = s.loss;
  j["weight_layout"] = s.weight_layout;
  j["parameters"] = s.parameters;
  j["layers"] = nlohmann::json::array();
  for (const auto& l : s.layers) {
    j["layers"].push_back({{"weight", l.weight},
                           {"bias", l.bias.empty() ? nlohmann::json(nullptr) : nlohmann::json(l.bias)},
                           {"activation", l.activation},
                           {"inputs", l.fan_in},
                           {"outputs", l.fan_out},
                           {"multiplier", l.multiplier},
                           {"trainable", l.trainable}});
  }
  j["data"] = s.has_data ? nlohmann::json{{"rows", s.data_rows},
                                          {"dims", s.data_dims},
                                          {"rows_used", s.data_rows_used},
                                          {"baseline_loss", OptionalNumber(s.baseline_loss)}}
                         : nlohmann::json(nullptr);
  j["snapshots"] = nlohmann::json::array();
  for (const auto& ss : s.snapshots) {
    j["snapshots"].push_back({{"step", ss.step}, {"loss", OptionalNumber(ss.loss)}, {"logged_loss", OptionalNumber(ss.logged_loss)}});
  }
  j["scalar_records"] = s.scalar_records;
  if (!s.notes.empty()) j["notes"] = s.notes;
  return j;
}

std::string RunSummaryToText(const RunSummary& s) {
  std::string out = fmt::format("run        {}\nnetwork    {} parameterization, {} loss, {} parameters\n", s.run,
                                s.parameterization, s.loss, s.parameters);
  out += fmt::format("\n  {:>5}  {:<22} {:<18} {:>11}  {:<10} {:>10}  {}\n", "layer", "weight", "bias", "shape",
                     "activation", "multiplier", "trained");
  for (std::size_t l = 0; l < s.layers.size(); ++l) {
    const auto& ly = s.layers[l];
    out += fmt::format("  {:>5}  {:<22} {:<18} {:>11}  {:<10} {:>10.4g}  {}\n", l + 1, ly.weight,
                       ly.bias.empty() ? "-" : ly.bias, fmt::format("{}x{}", ly.fan_out, ly.fan_in), ly.activation,
                       ly.multiplier, ly.trainable ? "yes" : "no (fixed)");
  }
  if (s.has_data) {
    out += fmt::format("\ndata       {} rows x {} inputs", s.data_rows, s.data_dims);
    if (s.data_rows_used != s.data_rows) out += fmt::format(" ({} used)", s.data_rows_used);
    out += fmt::format("; best constant predictor loss L0 = {}\n", Cell(s.baseline_loss));
  } else {
    out += "\ndata       none (no audit data: only saved gradients can be judged)\n";
  }
  out += fmt::format("snapshots  {}", s.snapshots.size());
  if (!s.snapshots.empty()) out += fmt::format(" (steps {} .. {})", s.snapshots.front().step, s.snapshots.back().step);
  out += fmt::format("; {} logged scalar lines\n", s.scalar_records);
  out += fmt::format("\n  {:>10}  {:>14}  {:>14}  {:>10}\n", "step", "loss", "logged loss", "loss / L0");
  for (const auto& ss : s.snapshots) {
    if (!ss.loss && !ss.logged_loss) continue;
    const std::optional<double> rel =
        ss.loss && s.baseline_loss && *s.baseline_loss > 0 ? std::optional<double>(*ss.loss / *s.baseline_loss) : std::nullopt;
    out += fmt::format("  {:>10}  {:>14}  {:>14}  {:>10}\n", ss.step, Cell(ss.loss), Cell(ss.logged_loss), Cell(rel));
  }
  return out;
}

}  // namespace plaudit::audit
