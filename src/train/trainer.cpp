#include "plaudit/train/trainer.h"

#include <algorithm>
#include <chrono>
#include <cmath>
#include <exception>
#include <fstream>
#include <numeric>
#include <thread>

#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include "plaudit/core/error.h"
#include "plaudit/io/npz.h"
#include "plaudit/io/run_dir.h"
#include "plaudit/train/draws.h"

namespace plaudit::train {
namespace {

namespace fs = std::filesystem;

int Depth(const TrainOptions& o) { return static_cast<int>(o.widths.size()) + 1; }

std::vector<bool> TrainableLayers(const TrainOptions& o) {
  const int depth = Depth(o);
  std::vector<bool> trainable(static_cast<std::size_t>(depth), true);
  for (int i : o.frozen_layers) {
    const int l = i < 0 ? depth + i : i;
    if (l < 0 || l >= depth) {
      raise(ExitCode::kUsage, "frozen layer {} does not exist (the network has {} layers)", i, depth);
    }
    trainable[static_cast<std::size_t>(l)] = false;
  }
  if (std::none_of(trainable.begin(), trainable.end(), [](bool t) { return t; })) {
    raise(ExitCode::kUsage, "every layer is frozen: nothing to train");
  }
  return trainable;
}

std::string LayerName(int layer, int depth) {
  return layer + 1 == depth ? std::string("head") : fmt::format("fc{}", layer + 1);
}

// A JSON value for a possibly non-finite number, spelled as the scalars reader accepts it.
nlohmann::ordered_json JsonNumber(double v) {
  if (std::isnan(v)) return "NaN";
  if (std::isinf(v)) return v > 0 ? "Infinity" : "-Infinity";
  return v;
}

bool DirectoryIsEmpty(const fs::path& dir) {
  std::error_code ec;
  return fs::directory_iterator(dir, ec) == fs::directory_iterator();
}

// Remove what an earlier run left, so no stale snapshot outlives it; other files are kept.
void RemoveRunFiles(const fs::path& out) {
  std::error_code ec;
  for (const char* name : {"run.json", "data.npz", "data.npz.tmp", "scalars.jsonl"}) fs::remove(out / name, ec);
  const fs::path snaps = out / "snapshots";
  if (!fs::is_directory(snaps, ec)) return;
  std::vector<fs::path> doomed;
  for (const auto& entry : fs::directory_iterator(snaps, ec)) {
    std::string name = entry.path().filename().string();
    if (name.size() > 4 && name.compare(name.size() - 4, 4, ".tmp") == 0) name.resize(name.size() - 4);
    if (io::SnapshotStep(name)) doomed.push_back(entry.path());
  }
  for (const auto& p : doomed) fs::remove(p, ec);
}

void PrepareOutput(const fs::path& out, bool overwrite) {
  std::error_code ec;
  if (fs::exists(out, ec)) {
    if (!fs::is_directory(out, ec)) raise(ExitCode::kUsage, "{}: exists and is not a directory", out.string());
    if (!DirectoryIsEmpty(out)) {
      if (!overwrite) {
        raise(ExitCode::kUsage, "{}: directory is not empty; refusing to overwrite it (allow overwrite to replace its run files)",
              out.string());
      }
      RemoveRunFiles(out);
    }
  }
  fs::create_directories(out / "snapshots", ec);
  if (ec) raise(ExitCode::kBadData, "{}: cannot create the run directory ({})", out.string(), ec.message());
}

void WriteText(const fs::path& path, const std::string& text) {
  const fs::path tmp = path.string() + ".tmp";
  {
    std::ofstream f(tmp, std::ios::binary | std::ios::trunc);
    f << text;
    if (!f.flush()) raise(ExitCode::kBadData, "{}: cannot write", tmp.string());
  }
  std::error_code ec;
  fs::rename(tmp, path, ec);
  if (ec) raise(ExitCode::kBadData, "{}: cannot rename into place ({})", path.string(), ec.message());
}

io::ArrayMap DataArrays(const model::Dataset& data, model::Loss loss) {
  io::ArrayMap arrays;
  arrays["x"] = io::MakeArray(data.x);
  if (loss == model::Loss::kSquared) {
    arrays["y"] = io::MakeArray(data.y);
  } else {
    arrays["y"] = io::MakeVector(data.y.col(0));  // integer labels, shape (N,) as the contract asks
    arrays["y"].dtype = io::DType::kI8;
  }
  return arrays;
}

std::string DescribeRun(const TrainOptions& o) {
  std::string text = fmt::format(
      "plaudit train: hidden widths [{}] {}, {} loss, {}, {}, lr {}, {} steps, seed {}, init {} (gain {}, scale {})",
      fmt::join(o.widths, ","), model::ActivationToString(o.activation), model::LossToString(o.loss),
      io::ParameterizationToString(o.parameterization),
      o.batch_size == 0 ? std::string("full-batch gradient descent") : fmt::format("SGD batch {}", o.batch_size), o.lr,
      o.steps, o.seed, InitSchemeToString(o.init.scheme), o.init.gain, o.init.scale);
  if (!o.notes.empty()) text += "; " + o.notes;
  return text;
}

// Weighted sum of chunk results: chunk c carries n_c / N of the mean.
model::Evaluation Combine(std::vector<model::Evaluation>& parts, const std::vector<model::Dataset>& chunks, int lowest) {
  Eigen::Index total = 0;
  for (const auto& c : chunks) total += c.rows();
  model::Evaluation sum = std::move(parts[0]);
  const auto weight = [&](std::size_t c) { return static_cast<double>(chunks[c].rows()) / static_cast<double>(total); };
  const double w0 = weight(0);
  sum.loss *= w0;
  const std::size_t depth = sum.weight_grad.size();
  for (std::size_t l = static_cast<std::size_t>(std::max(lowest, 0)); lowest >= 0 && l < depth; ++l) {
    sum.weight_grad[l] *= w0;
    sum.bias_grad[l] *= w0;
  }
  for (std::size_t c = 1; c < parts.size(); ++c) {
    const double w = weight(c);
    sum.loss += w * parts[c].loss;
    for (std::size_t l = static_cast<std::size_t>(std::max(lowest, 0)); lowest >= 0 && l < depth; ++l) {
      sum.weight_grad[l] += w * parts[c].weight_grad[l];
      sum.bias_grad[l] += w * parts[c].bias_grad[l];
    }
  }
  return sum;
}

}  // namespace

Eigen::Index OutputWidth(const model::Dataset& data, const TrainOptions& o) {
  switch (o.loss) {
    case model::Loss::kSquared: return data.y.cols();
    case model::Loss::kLogistic: return 1;
    case model::Loss::kCrossEntropy:
      if (o.classes > 0) return o.classes;
      return data.y.size() == 0 ? 1 : static_cast<Eigen::Index>(std::max(0.0, data.y.maxCoeff())) + 1;
  }
  return 1;
}

void ValidateTrainOptions(const TrainOptions& o) {
  for (Eigen::Index w : o.widths) {
    if (w < 1) raise(ExitCode::kUsage, "hidden widths must be >= 1, got {}", w);
  }
  if (!(o.lr > 0.0) || !std::isfinite(o.lr)) raise(ExitCode::kUsage, "learning rate must be a positive number, got {}", o.lr);
  if (o.steps < 0) raise(ExitCode::kUsage, "steps must be >= 0, got {}", o.steps);
  if (o.save_every < 0) raise(ExitCode::kUsage, "save-every must be >= 0, got {}", o.save_every);
  if (o.log_every < 0) raise(ExitCode::kUsage, "log-every must be >= 0, got {}", o.log_every);
  if (o.batch_size < 0) raise(ExitCode::kUsage, "batch size must be >= 0 (0: full batch), got {}", o.batch_size);
  if (o.classes < 0) raise(ExitCode::kUsage, "classes must be >= 0 (0: from the labels), got {}", o.classes);
  if (o.threads < 1) raise(ExitCode::kUsage, "threads must be >= 1, got {}", o.threads);
  if (o.chunk_rows < 1 || o.block_rows < 1) raise(ExitCode::kUsage, "chunk and block rows must be >= 1");
  TrainableLayers(o);
}

io::Manifest TrainManifest(const TrainOptions& o) {
  const int depth = Depth(o);
  const std::vector<bool> trainable = TrainableLayers(o);
  io::Manifest m;
  m.parameterization = o.parameterization;
  m.loss = o.loss;
  for (int l = 0; l < depth; ++l) {
    const bool output = l + 1 == depth;
    io::LayerSpec spec;
    spec.weight = LayerName(l, depth) + ".weight";
    if (output ? o.output_bias : o.hidden_bias) spec.bias = LayerName(l, depth) + ".bias";
    spec.activation = output ? model::Activation::kIdentity : o.activation;
    spec.trainable = trainable[static_cast<std::size_t>(l)];
    m.layers.push_back(spec);
  }
  m.notes = DescribeRun(o);
  return m;
}

model::Network InitialNetwork(const TrainOptions& o, Eigen::Index input_dim, Eigen::Index output_dim,
                              std::mt19937_64& rng) {
  const io::Manifest m = TrainManifest(o);
  model::Network net;
  net.loss = o.loss;
  Eigen::Index fan_in = input_dim;
  for (int l = 0; l < Depth(o); ++l) {
    const auto& spec = m.layers[static_cast<std::size_t>(l)];
    const Eigen::Index fan_out = l + 1 == Depth(o) ? output_dim : o.widths[static_cast<std::size_t>(l)];
    model::DenseLayer layer;
    layer.weight.setZero(fan_out, fan_in);
    layer.bias.setZero(fan_out);
    layer.has_bias = spec.bias.has_value();
    layer.activation = spec.activation;
    layer.multiplier = model::DefaultMultiplier(o.parameterization, l, fan_in);
    layer.trainable = spec.trainable;
    net.layers.push_back(std::move(layer));
    fan_in = fan_out;
  }
  InitializeWeights(net, o.parameterization, o.init, rng);
  return net;
}

Descent::Descent(const model::Dataset& data, const TrainOptions& o, std::uint64_t seed)
    : data_(data),
      batch_size_(o.batch_size),
      chunk_rows_(o.chunk_rows),
      block_rows_(o.block_rows),
      threads_(o.threads),
      lr_(o.lr),
      rng_(seed) {
  ValidateTrainOptions(o);
  if (batch_size_ > data.rows()) {
    raise(ExitCode::kUsage, "batch size {} exceeds the {} data rows", batch_size_, data.rows());
  }
  const std::vector<bool> trainable = TrainableLayers(o);
  lowest_trainable_ = static_cast<int>(std::find(trainable.begin(), trainable.end(), true) - trainable.begin());
  chunks_ = SplitChunks(data);
}

std::vector<model::Dataset> Descent::SplitChunks(const model::Dataset& data) const {
  std::vector<model::Dataset> chunks;
  for (Eigen::Index start = 0; start < data.rows(); start += chunk_rows_) {
    const Eigen::Index rows = std::min(chunk_rows_, data.rows() - start);
    chunks.push_back({data.x.middleRows(start, rows), data.y.middleRows(start, rows)});
  }
  return chunks;
}

model::Evaluation Descent::EvaluateChunks(const model::Network& net, const std::vector<model::Dataset>& chunks,
                                          int lowest) const {
  model::EvalOptions eo;
  eo.block_rows = block_rows_;
  eo.lowest_grad_layer = lowest;
  if (chunks.size() == 1) return model::Evaluate(net, chunks[0], eo);
  std::vector<model::Evaluation> parts(chunks.size());
  const std::size_t workers = std::min<std::size_t>(static_cast<std::size_t>(threads_), chunks.size());
  std::vector<std::exception_ptr> errors(workers);
  // Worker k takes chunks k, k + workers, ...: each chunk's result lands in its own slot.
  const auto work = [&](std::size_t k) {
    try {
      for (std::size_t c = k; c < chunks.size(); c += workers) parts[c] = model::Evaluate(net, chunks[c], eo);
    } catch (...) {
      errors[k] = std::current_exception();
    }
  };
  std::vector<std::thread> pool;
  for (std::size_t k = 1; k < workers; ++k) pool.emplace_back(work, k);
  work(0);
  for (auto& t : pool) t.join();
  for (auto& e : errors) {
    if (e) std::rethrow_exception(e);
  }
  return Combine(parts, chunks, lowest);
}

model::Evaluation Descent::FullBatch(const model::Network& net, bool with_gradient) const {
  return EvaluateChunks(net, chunks_, with_gradient ? lowest_trainable_ : -1);
}

model::Evaluation Descent::NextGradient(const model::Network& net) {
  if (full_batch()) return FullBatch(net, true);
  if (order_.empty() || cursor_ + static_cast<std::size_t>(batch_size_) > order_.size()) {
    order_.resize(static_cast<std::size_t>(data_.rows()));
    std::iota(order_.begin(), order_.end(), Eigen::Index{0});
    Shuffle(order_, rng_);
    cursor_ = 0;
  }
  const std::vector<Eigen::Index> rows(order_.begin() + static_cast<std::ptrdiff_t>(cursor_),
                                       order_.begin() + static_cast<std::ptrdiff_t>(cursor_ + static_cast<std::size_t>(batch_size_)));
  cursor_ += static_cast<std::size_t>(batch_size_);
  model::Dataset batch{data_.x(rows, Eigen::all), data_.y(rows, Eigen::all)};
  if (batch.rows() <= chunk_rows_) return EvaluateChunks(net, {batch}, lowest_trainable_);
  return EvaluateChunks(net, SplitChunks(batch), lowest_trainable_);
}

double Descent::ScaledGradNorm(const model::Network& net, const model::Evaluation& ev) const {
  double sq = 0.0;
  for (int l = lowest_trainable_; l < net.depth(); ++l) {
    const auto& layer = net.layers[static_cast<std::size_t>(l)];
    if (!layer.trainable) continue;
    sq += std::pow(model::WeightGradScale(net, l), 2) * ev.weight_grad[static_cast<std::size_t>(l)].squaredNorm();
    if (layer.has_bias) sq += std::pow(model::BiasGradScale(net, l), 2) * ev.bias_grad[static_cast<std::size_t>(l)].squaredNorm();
  }
  return std::sqrt(sq);
}

void Descent::Apply(model::Network& net, const model::Evaluation& ev) const {
  for (int l = lowest_trainable_; l < net.depth(); ++l) {
    auto& layer = net.layers[static_cast<std::size_t>(l)];
    if (!layer.trainable) continue;
    layer.weight.noalias() -= (lr_ * model::WeightGradScale(net, l)) * ev.weight_grad[static_cast<std::size_t>(l)];
    if (layer.has_bias) layer.bias.noalias() -= (lr_ * model::BiasGradScale(net, l)) * ev.bias_grad[static_cast<std::size_t>(l)];
  }
}

namespace {

// What one iteration of the loop decided and measured.
struct StepPlan {
  bool final = false;
  bool save = false;
  bool log = false;
};

StepPlan PlanStep(const TrainOptions& o, std::int64_t t, bool stop_now) {
  StepPlan p;
  p.final = t == o.steps || stop_now;
  p.save = p.final || t == 0 || (o.save_every > 0 && t % o.save_every == 0);
  p.log = p.save || (o.log_every > 0 && t % o.log_every == 0);
  return p;
}

void AppendScalars(std::ofstream& log, std::int64_t step, const model::Evaluation& full, double lr, double grad_norm,
                   const model::Evaluation* batch) {
  nlohmann::ordered_json line;
  line["step"] = step;
  line["loss"] = JsonNumber(full.loss);
  line["lr"] = lr;
  line["grad_norm"] = JsonNumber(grad_norm);
  if (batch != nullptr) line["batch_loss"] = JsonNumber(batch->loss);
  log << line.dump() << '\n';
  log.flush();  // readers follow the file while the run is live
}

}  // namespace

TrainResult Train(const model::Dataset& data, const TrainOptions& o, const fs::path& out, const TrainHooks& hooks) {
  const auto started = std::chrono::steady_clock::now();
  ValidateTrainOptions(o);
  const Eigen::Index out_dim = OutputWidth(data, o);
  model::ValidateDataset(data, o.loss, out_dim, "training data");
  if (o.batch_size > data.rows()) raise(ExitCode::kUsage, "batch size {} exceeds the {} data rows", o.batch_size, data.rows());
  const io::Manifest manifest = TrainManifest(o);
  std::mt19937_64 rng(o.seed);
  model::Network net = InitialNetwork(o, data.dim(), out_dim, rng);
  Descent descent(data, o, rng());

  PrepareOutput(out, o.overwrite);
  io::WriteNpz(out / "data.npz", DataArrays(data, o.loss));
  WriteText(out / "run.json", io::ManifestToJson(manifest));
  std::ofstream log(out / "scalars.jsonl", std::ios::binary | std::ios::trunc);
  if (!log) raise(ExitCode::kBadData, "{}: cannot write", (out / "scalars.jsonl").string());

  TrainResult result;
  for (std::int64_t t = 0;; ++t) {
    const bool stop_now = hooks.stop != nullptr && hooks.stop->load();
    StepPlan plan = PlanStep(o, t, stop_now);
    model::Evaluation full;
    model::Evaluation batch;
    if (descent.full_batch() || plan.log) full = descent.FullBatch(net, true);
    if (descent.full_batch() && !std::isfinite(full.loss)) result.diverged = true;
    if (!plan.final && !descent.full_batch()) {
      batch = descent.NextGradient(net);
      if (!std::isfinite(batch.loss)) {
        result.diverged = true;
        if (!plan.log) full = descent.FullBatch(net, true);
      }
    }
    if (result.diverged) plan.final = plan.save = plan.log = true;
    if (hooks.on_step) {
      const bool have_full = descent.full_batch() || plan.log;
      hooks.on_step({t, o.steps, have_full ? full.loss : batch.loss, have_full});
    }
    if (plan.log) {
      const bool with_batch = !descent.full_batch() && batch.weight_grad.size() > 0;
      AppendScalars(log, t, full, o.lr, descent.ScaledGradNorm(net, full), with_batch ? &batch : nullptr);
    }
    if (plan.save) {
      io::WriteNpz(out / "snapshots" / fmt::format("step-{}.npz", t), model::NetworkToArrays(manifest, net));
      result.saved_steps.push_back(t);
      if (hooks.on_snapshot && !hooks.on_snapshot(t, full.loss) && !plan.final) {
        result.stopped_early = true;
        plan.final = true;
      }
    }
    if (plan.final) {
      result.final_step = t;
      result.final_loss = full.loss;
      result.stopped_early = result.stopped_early || (stop_now && t < o.steps);
      break;
    }
    descent.Apply(net, descent.full_batch() ? full : batch);
  }
  result.seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - started).count();
  return result;
}

}  // namespace plaudit::train
