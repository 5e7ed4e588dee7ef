#pragma once
// What a run directory holds, for `plaudit inspect`: architecture, data, snapshots, and the loss
// recomputed from the weights beside the logged one.
#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "plaudit/io/run_dir.h"

namespace plaudit::audit {

struct InspectOptions {
  bool all_losses = false;         // compute the loss at every snapshot, not only first and last
  Eigen::Index max_rows = 0;       // subsample the data for the loss (0 = all rows)
  std::uint64_t seed = 0;
};

struct LayerSummary {
  std::string weight, bias;  // bias empty when absent
  std::string activation;
  Eigen::Index fan_in = 0, fan_out = 0;
  double multiplier = 1.0;
  bool trainable = true;
};

struct SnapshotSummary {
  std::int64_t step = 0;
  std::optional<double> loss;         // computed from the weights
  std::optional<double> logged_loss;  // from scalars.jsonl at the same step
};

struct RunSummary {
  std::string run;
  std::string parameterization, loss, weight_layout, notes;
  std::vector<LayerSummary> layers;
  std::size_t parameters = 0;
  bool has_data = false;
  Eigen::Index data_rows = 0, data_dims = 0, data_rows_used = 0;
  std::optional<double> baseline_loss;  // best constant predictor
  std::vector<SnapshotSummary> snapshots;
  std::size_t scalar_records = 0;
};

RunSummary Inspect(const io::RunDir& run, const InspectOptions& options);
nlohmann::json RunSummaryToJson(const RunSummary& summary);
std::string RunSummaryToText(const RunSummary& summary);

}  // namespace plaudit::audit
