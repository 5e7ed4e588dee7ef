#include <unistd.h>

#include <algorithm>
#include <charconv>
#include <chrono>
#include <iostream>
#include <memory>
#include <optional>

#include <fmt/core.h>
#include <fmt/format.h>

#include "cli/audit_args.h"
#include "cli/commands.h"
#include "cli/interrupt.h"
#include "cli/watch_printer.h"
#include "plaudit/audit/watch.h"
#include "plaudit/core/error.h"
#include "plaudit/io/csv.h"
#include "plaudit/io/npz.h"
#include "plaudit/train/trainer.h"

namespace plaudit::cli {
namespace {

struct TrainArgs {
  std::string data;
  std::string out;
  std::vector<std::string> targets;
  std::vector<std::string> inputs;
  std::string activation = "tanh";
  std::string parameterization = "mean-field";
  std::string loss = "squared";
  std::string init = "gaussian";
  std::string radius_law = "fixed";
  std::string widths;  // --widths as typed; see ParseWidths
  bool no_hidden_bias = false;
  bool watch = false;
  std::string stop_on;
  std::string format = "text";
  bool quiet = false;
  train::TrainOptions options;
  AuditArgs audit;  // thresholds etc. for --watch; audit.run is unused
};

model::Dataset LoadTrainingData(const TrainArgs& a) {
  const std::filesystem::path path(a.data);
  const std::string ext = path.extension().string();
  if (ext == ".csv") {
    const io::CsvData csv = io::ReadCsv(path, {a.targets, a.inputs});
    return {csv.x, csv.y};
  }
  if (ext != ".npz") raise(ExitCode::kUsage, "{}: training data must be a .csv or .npz file", a.data);
  if (!a.targets.empty() || !a.inputs.empty())
    raise(ExitCode::kUsage, "{}: --target and --inputs apply to CSV files only", a.data);
  // Shapes, finiteness and labels are checked as for audit data; classes are checked by the trainer.
  return model::ReadDataset(path, *model::LossFromString(a.loss), 0);
}

// --widths: hidden widths separated by commas; an empty or blank value means no hidden layer
// (a linear model). Parsed here because CLI11 reads an empty string as one width of 0.
std::vector<Eigen::Index> ParseWidths(const std::string& text) {
  constexpr const char* kBlank = " \t";
  std::vector<Eigen::Index> widths;
  if (text.find_first_not_of(kBlank) == std::string::npos) return widths;
  for (std::size_t start = 0;;) {
    const std::size_t comma = std::min(text.find(',', start), text.size());
    const std::size_t first = std::min(text.find_first_not_of(kBlank, start), comma);
    std::size_t last = comma;
    while (last > first && (text[last - 1] == ' ' || text[last - 1] == '\t')) --last;
    const char* begin = text.data() + first;
    const char* end = text.data() + last;
    long long value = 0;
    const auto [ptr, ec] = std::from_chars(begin, end, value);
    if (begin == end || ec != std::errc() || ptr != end || value < 1) {
      raise(ExitCode::kUsage, "--widths: '{}' is not a list of positive integers such as 64,64 (\"\" for a linear model)",
            text);
    }
    widths.push_back(static_cast<Eigen::Index>(value));
    if (comma == text.size()) return widths;
    start = comma + 1;
  }
}

void ResolveEnums(TrainArgs& a) {
  train::TrainOptions& o = a.options;
  o.widths = ParseWidths(a.widths);
  o.activation = *model::ActivationFromString(a.activation);
  o.parameterization = a.parameterization == "standard" ? io::Parameterization::kStandard : io::Parameterization::kMeanField;
  o.loss = *model::LossFromString(a.loss);
  o.init.scheme = *train::InitSchemeFromString(a.init);
  o.init.radius_law = a.radius_law == "log-uniform" ? train::RadiusLaw::kLogUniform : train::RadiusLaw::kFixed;
  o.hidden_bias = !a.no_hidden_bias;
  if (!a.stop_on.empty()) a.watch = true;
}

// A one-line progress bar, redrawn at most ten times a second.
class Progress {
 public:
  explicit Progress(bool enabled) : enabled_(enabled), start_(Clock::now()), last_(start_) {}
  void Update(const train::StepReport& r) {
    if (!enabled_) return;
    const auto now = Clock::now();
    if (r.step != r.steps && now - last_ < std::chrono::milliseconds(100)) return;
    last_ = now;
    const double secs = std::chrono::duration<double>(now - start_).count();
    const double rate = secs > 0 ? static_cast<double>(r.step) / secs : 0.0;
    const double frac = r.steps > 0 ? static_cast<double>(r.step) / static_cast<double>(r.steps) : 1.0;
    const int filled = static_cast<int>(frac * 24);
    const double eta = rate > 0 ? static_cast<double>(r.steps - r.step) / rate : 0.0;
    fmt::print("\r\033[K[{:<24}] step {}/{}  loss {:.5g}{}  {:.0f} steps/s  ETA {:.0f} s", std::string(static_cast<std::size_t>(filled), '#'),
               r.step, r.steps, r.loss, r.full_batch ? "" : " (batch)", rate, eta);
    std::fflush(stdout);
    drawn_ = true;
  }
  void End() {
    if (drawn_) fmt::print("\n");
    drawn_ = false;
  }

 private:
  using Clock = std::chrono::steady_clock;
  bool enabled_;
  Clock::time_point start_, last_;
  bool drawn_ = false;
};

int RunTrain(TrainArgs& a) {
  ResolveEnums(a);
  const model::Dataset data = LoadTrainingData(a);
  const bool tty = isatty(STDOUT_FILENO) != 0;
  InstallInterruptHandler();
  train::TrainHooks hooks;
  hooks.stop = InterruptFlag();
  Progress progress(tty && !a.watch && !a.quiet);
  hooks.on_step = [&progress](const train::StepReport& r) { progress.Update(r); };

  // --watch: the live monitor of `watch`, polled after each snapshot is written.
  std::optional<audit::RunWatcher> watcher;
  WatchPrinter printer(a.format == "jsonl", tty);
  std::optional<int> stop_status;
  if (a.watch) {
    audit::WatchOptions wo;
    wo.audit = a.audit.Resolve();
    wo.idle_polls = 1 << 30;  // a run we write ourselves is never idle
    // wo by value: the hook outlives this block.
    hooks.on_snapshot = [&, wo](std::int64_t, double) {
      if (!watcher) watcher.emplace(a.out, wo);
      for (const auto& e : watcher->Poll()) {
        printer.Print(e);
        if (e.kind != audit::WatchEventKind::kVerdict || !e.verdict) continue;
        const bool stop = (a.stop_on == "spurious" && *e.verdict == audit::Verdict::kSpurious) ||
                          (a.stop_on == "verdict" && *e.verdict != audit::Verdict::kMoving);
        if (stop) stop_status = static_cast<int>(audit::VerdictExitCode(*e.verdict));
      }
      return !stop_status.has_value();
    };
  }
  const train::TrainResult r = train::Train(data, a.options, a.out, hooks);
  progress.End();
  const std::string how = r.diverged ? "diverged (non-finite loss)"
                          : Interrupted() ? "interrupted; the run is valid up to this step"
                          : stop_status ? "stopped at a verdict"
                                        : "done";
  const std::string line = fmt::format("{}: {} snapshots, last step {}, loss {:.6g}, {:.1f} s: {}", a.out,
                                       r.saved_steps.size(), r.final_step, r.final_loss, r.seconds, how);
  if (a.watch) printer.Message("trained", line);
  else if (!a.quiet) fmt::print("{}\n", line);
  if (r.diverged) return static_cast<int>(ExitCode::kDiverged);
  if (stop_status) return *stop_status;
  return 0;
}

}  // namespace

Command AddTrainCommand(CLI::App& parent) {
  auto* app = parent.add_subcommand("train", "Train an MLP and write a run directory (optionally auditing it live)");
  auto a = std::make_shared<TrainArgs>();
  train::TrainOptions& o = a->options;
  app->add_option("data", a->data, "Training data: CSV with a header row, or an .npz with x and y")->required();
  app->add_option("-o,--out", a->out, "Run directory to write")->required();
  app->add_option("--target", a->targets, "CSV target column(s); default: the last column")->delimiter(',');
  app->add_option("--inputs", a->inputs, "CSV input columns; default: every other column")->delimiter(',');
  a->widths = fmt::format("{}", fmt::join(o.widths, ","));
  app->add_option("--widths", a->widths, "Hidden layer widths, e.g. 64,64 (\"\": no hidden layer, a linear model)")->capture_default_str();
  app->add_option("--activation", a->activation, "Hidden activation")
      ->check(CLI::IsMember({"identity", "relu", "leaky_relu", "tanh", "sigmoid", "softplus", "gelu"}))->capture_default_str();
  app->add_option("--param", a->parameterization, "Parameterization")->check(CLI::IsMember({"mean-field", "standard"}))->capture_default_str();
  app->add_option("--loss", a->loss, "Loss")->check(CLI::IsMember({"squared", "cross-entropy", "logistic"}))->capture_default_str();
  app->add_option("--classes", o.classes, "Output width for cross-entropy (0: from the labels)")->check(CLI::NonNegativeNumber);
  app->add_flag("--no-hidden-bias", a->no_hidden_bias, "No biases in the hidden layers");
  app->add_flag("--output-bias", o.output_bias, "A bias in the output layer");
  app->add_option("--batch", o.batch_size, "Minibatch rows for SGD (0: full-batch gradient descent)")->check(CLI::NonNegativeNumber)->capture_default_str();
  app->add_option("--lr", o.lr, "Step size (mean-field: scaled per layer so weights move O(1))")->check(CLI::PositiveNumber)->capture_default_str();
  app->add_option("--steps", o.steps, "Number of updates")->check(CLI::NonNegativeNumber)->capture_default_str();
  app->add_option("--save-every", o.save_every, "Snapshot every this many steps (0: first and last only)")->check(CLI::NonNegativeNumber)->capture_default_str();
  app->add_option("--log-every", o.log_every, "Also log the loss every this many steps")->check(CLI::NonNegativeNumber);
  app->add_option("--seed", o.seed, "Seed of the initial weights and minibatch order")->capture_default_str();
  app->add_option("--init", a->init, "Initialisation")->check(CLI::IsMember({"gaussian", "sphere", "collapsed", "latent"}))->capture_default_str();
  app->add_option("--init-gain", o.init.gain, "Gaussian std factor")->check(CLI::PositiveNumber)->capture_default_str();
  app->add_option("--init-scale", o.init.scale, "Multiplies every initial weight (small init: << 1)")->check(CLI::PositiveNumber)->capture_default_str();
  app->add_option("--radius-law", a->radius_law, "sphere: norm of first-layer rows")->check(CLI::IsMember({"fixed", "log-uniform"}))->capture_default_str();
  app->add_option("--radius", o.init.radius, "sphere, fixed law: row norm")->check(CLI::PositiveNumber);
  app->add_option("--radius-min", o.init.radius_min, "sphere, log-uniform law: smallest norm")->check(CLI::PositiveNumber);
  app->add_option("--radius-max", o.init.radius_max, "sphere, log-uniform law: largest norm")->check(CLI::PositiveNumber);
  app->add_option("--clusters", o.init.clusters, "collapsed: number of groups of identical first-layer neurons")->check(CLI::PositiveNumber)->capture_default_str();
  app->add_option("--jitter", o.init.jitter, "collapsed: noise std added to the copies (0: exact copies)")->check(CLI::NonNegativeNumber);
  app->add_option("--latent-dim", o.init.latent.latent_dim, "latent: dimension of each neuron's latent point")
      ->check(CLI::Range(1, 64))->capture_default_str();
  app->add_option("--latent-features", o.init.latent.features, "latent: random Fourier features per layer's smooth map")
      ->check(CLI::Range(1, 4096))->capture_default_str();
  app->add_option("--latent-lengthscale", o.init.latent.lengthscale, "latent: length scale of the smooth maps")
      ->check(CLI::PositiveNumber)->capture_default_str();
  app->add_option("--bias-std", o.init.bias_std, "Initial biases i.i.d. N(0, std^2) in layers with biases (0: zero biases)")
      ->check(CLI::NonNegativeNumber)->capture_default_str();
  app->add_option("--freeze", o.frozen_layers, "Layers held fixed, 0-based; -1 is the output layer")->delimiter(',');
  app->add_option("--train-threads", o.threads, "Worker threads for the gradient (results do not depend on it)")->check(CLI::PositiveNumber);
  app->add_flag("--overwrite", o.overwrite, "Replace the run files of a non-empty output directory");
  app->add_option("--notes", o.notes, "Free text for the manifest");
  app->add_flag("-q,--quiet", a->quiet, "No progress bar or closing line");
  app->add_flag("--watch", a->watch, "Audit the run live while training (as `plaudit watch`)");
  app->add_option("--stop-on", a->stop_on, "With --watch: stop training at a spurious verdict, or at any verdict but moving; exit with its code")
      ->check(CLI::IsMember({"spurious", "verdict"}));
  app->add_option("--watch-format", a->format, "With --watch: text lines, or jsonl events")->check(CLI::IsMember({"text", "jsonl"}))->capture_default_str();
  AddAuditThresholdArgs(*app, a->audit);
  return {app, [a] { return RunTrain(*a); }};
}

}  // namespace plaudit::cli
