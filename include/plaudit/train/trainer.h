#pragma once
// The built-in trainer: full-batch gradient descent or minibatch SGD on a fully-connected
// network, writing a run directory of the contract (../shared/run-format.md).
//
// Update of layer l (0-based), in the parameterization's own scale:
//   W_l -= lr * model::WeightGradScale(net, l) * dL/dW_l,   b_l -= lr * model::BiasGradScale(net, l) * dL/db_l,
// so under mean-field each weight moves O(1) in O(1) time whatever the width (standard: scale 1).
//
// Step t's snapshot holds the parameters after t updates; the loss logged with it is the
// full-batch loss at those parameters (minibatch runs evaluate it at every logged step), so it
// equals what model::Evaluate recomputes from the snapshot.
#include <atomic>
#include <cstdint>
#include <filesystem>
#include <functional>
#include <random>
#include <string>
#include <vector>

#include "plaudit/io/manifest.h"
#include "plaudit/model/dataset.h"
#include "plaudit/model/evaluate.h"
#include "plaudit/model/network.h"
#include "plaudit/train/init.h"

namespace plaudit::train {

struct TrainOptions {
  std::vector<Eigen::Index> widths = {64, 64};  // hidden layer widths, input to output; empty: a linear model
  model::Activation activation = model::Activation::kTanh;  // hidden layers; the output is identity
  io::Parameterization parameterization = io::Parameterization::kMeanField;
  model::Loss loss = model::Loss::kSquared;
  // Output width for cross-entropy; 0: one more than the largest label. (squared: y's columns; logistic: 1.)
  Eigen::Index classes = 0;
  bool hidden_bias = true;   // biases in the hidden layers
  bool output_bias = false;  // bias in the output layer
  // Rows per SGD step, drawn without replacement and reshuffled each epoch (a last batch smaller
  // than this is dropped); 0: full-batch gradient descent. Requires 0 <= batch_size <= N.
  Eigen::Index batch_size = 0;
  double lr = 0.5;               // step size, > 0
  std::int64_t steps = 2000;     // updates, >= 0
  // Snapshots at step 0, every multiple of save_every, and the final step; 0: first and last only.
  std::int64_t save_every = 100;
  // scalars.jsonl gets a line at every saved step and every multiple of log_every; 0: saved steps only.
  std::int64_t log_every = 0;
  std::uint64_t seed = 1;  // seeds the initial weights and the minibatch order
  InitOptions init;
  // Layers held fixed (0-based; negative counts from the output, -1 = output layer): marked
  // trainable=false in run.json. Freezing the output gives the common two-layer student set-up.
  std::vector<int> frozen_layers;
  // Worker threads. Rows are split into fixed chunks of chunk_rows and the chunk results are
  // summed in order, so results depend on chunk_rows but never on threads.
  int threads = 1;
  Eigen::Index chunk_rows = 4096;
  Eigen::Index block_rows = 1024;  // rows per matrix product inside a chunk (model::EvalOptions)
  bool overwrite = false;          // replace the run files of a non-empty output directory
  std::string notes;               // appended to the manifest's notes
};

// One evaluation during training, for progress displays.
struct StepReport {
  std::int64_t step = 0;
  std::int64_t steps = 0;   // the planned number of updates
  double loss = 0.0;        // full-batch loss, or the minibatch's when `full_batch` is false
  bool full_batch = true;
};

struct TrainHooks {
  // After each snapshot is written, with its step and full-batch loss; false stops training.
  std::function<bool(std::int64_t step, double loss)> on_snapshot;
  // After every gradient evaluation (cheap: called once a step).
  std::function<void(const StepReport&)> on_step;
  // Checked once a step; when set, the current parameters are saved as the final snapshot.
  const std::atomic<bool>* stop = nullptr;
};

struct TrainResult {
  std::int64_t final_step = 0;            // step of the last snapshot
  double final_loss = 0.0;                // full-batch loss there
  std::vector<std::int64_t> saved_steps;  // in order
  bool stopped_early = false;             // by `stop` or on_snapshot
  bool diverged = false;                  // a non-finite loss ended training
  double seconds = 0.0;
};

// Output width the data imply for the options' loss (see TrainOptions::classes).
Eigen::Index OutputWidth(const model::Dataset& data, const TrainOptions& options);

// Throws Error(kUsage) naming the field when an option is out of its documented range.
void ValidateTrainOptions(const TrainOptions& options);

// Manifest of the network the options describe: fc1 .. fcH for hidden layers, head for the output.
io::Manifest TrainManifest(const TrainOptions& options);

// The network at step 0, with weights drawn from `rng` (as Train does from options.seed).
model::Network InitialNetwork(const TrainOptions& options, Eigen::Index input_dim, Eigen::Index output_dim,
                              std::mt19937_64& rng);

// Gradient steps on a network held in memory: the engine Train runs, usable on its own.
class Descent {
 public:
  // Keeps a reference to `data`, which must outlive this object. `seed` orders the minibatches.
  Descent(const model::Dataset& data, const TrainOptions& options, std::uint64_t seed);

  // Full-batch loss and (with_gradient) raw gradients of the trainable layers and those above.
  model::Evaluation FullBatch(const model::Network& net, bool with_gradient) const;
  // Loss and gradients that drive the next update: FullBatch, or the next minibatch.
  model::Evaluation NextGradient(const model::Network& net);
  // Euclidean norm of the scaled gradient over the trainable parameters.
  double ScaledGradNorm(const model::Network& net, const model::Evaluation& ev) const;
  // The update above, on the trainable layers.
  void Apply(model::Network& net, const model::Evaluation& ev) const;

  bool full_batch() const { return batch_size_ == 0; }
  int lowest_trainable() const { return lowest_trainable_; }

 private:
  model::Evaluation EvaluateChunks(const model::Network& net, const std::vector<model::Dataset>& chunks,
                                   int lowest) const;
  std::vector<model::Dataset> SplitChunks(const model::Dataset& data) const;

  const model::Dataset& data_;
  std::vector<model::Dataset> chunks_;  // the full batch, split once
  Eigen::Index batch_size_ = 0;
  Eigen::Index chunk_rows_ = 4096;
  Eigen::Index block_rows_ = 1024;
  int threads_ = 1;
  double lr_ = 0.5;
  int lowest_trainable_ = 0;
  std::vector<Eigen::Index> order_;  // current epoch's row order
  std::size_t cursor_ = 0;
  std::mt19937_64 rng_;
};

// Train on `data` and write the run directory `out`: run.json, data.npz, snapshots/step-N.npz
// and scalars.jsonl ({"step","loss","lr","grad_norm"}, plus "batch_loss" for SGD). Refuses
// (Error kUsage) a non-empty `out` unless options.overwrite, which removes only the contract's
// files (run.json, data.npz, scalars.jsonl, snapshots/step-*.npz) before writing.
TrainResult Train(const model::Dataset& data, const TrainOptions& options, const std::filesystem::path& out,
                  const TrainHooks& hooks = {});

}  // namespace plaudit::train
