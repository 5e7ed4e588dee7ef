// plaudit_bench: per-component wall times of the audit on a fixed workload, the throughput the
// gradient pass attains, and the machine's own GEMM rate measured the same way, so every time
// can be read against the limit its operation count implies. See scripts/bench.sh.
#include "bench_build_info.h"
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <set>
#include <sstream>
#include <thread>

#include <sys/wait.h>

#include <CLI/CLI.hpp>
#include <Eigen/Core>
#include <fmt/format.h>

#include "figures.h"
#include "op_count.h"
#include "plaudit/audit/audit.h"
#include "plaudit/audit/trajectory.h"
#include "plaudit/checks/curvature.h"
#include "plaudit/checks/gradient_decay.h"
#include "plaudit/checks/layer_degeneracy.h"
#include "plaudit/checks/two_way_diversity.h"
#include "plaudit/core/allocator.h"
#include "plaudit/core/threads.h"
#include "plaudit/core/error.h"
#include "plaudit/model/evaluate.h"
#include "plaudit/train/trainer.h"
#include "timer.h"
#include "workload.h"

namespace plaudit::bench {
namespace {

namespace fs = std::filesystem;

struct BenchArgs {
  bool scale = false;
  std::string workloads = PLAUDIT_BENCH_WORKLOADS;
  int runs = 5;
  Eigen::Index gemm_size = 2048;
  std::vector<std::string> only;  // empty: every group
  std::string cli = PLAUDIT_CLI;
};

const std::vector<std::string> kGroups = {"gemm", "gradient", "float32", "snapshot", "spread", "residual",
                                          "plateau", "deep", "audit", "process", "train"};

std::string SimdLevel() {
#if defined(__AVX512F__)
  return "AVX-512";
#elif defined(__AVX2__) && defined(__FMA__)
  return "AVX2+FMA";
#elif defined(__AVX__)
  return "AVX";
#else
  return "SSE2";
#endif
}

std::string LoadAverage() {
  std::ifstream in("/proc/loadavg");
  std::string one, five, fifteen;
  if (!(in >> one >> five >> fifteen)) return "unknown";
  return fmt::format("{} {} {}", one, five, fifteen);
}

// C = A B for random n x n matrices, `copies` products at once on their own threads (Eigen
// runs one product on one thread unless built with OpenMP): the rate the gradient pass can be
// held to, for the same precision and number of threads.
template <typename Scalar>
double GemmRate(Eigen::Index n, int copies, int runs, Figure& figure) {
  using Matrix = Eigen::Matrix<Scalar, Eigen::Dynamic, Eigen::Dynamic>;
  std::vector<Matrix> a, b, c;
  for (int i = 0; i < copies; ++i) {
    a.push_back(Matrix::Random(n, n));
    b.push_back(Matrix::Random(n, n));
    c.emplace_back(n, n);
  }
  auto product = [&](int i) { c[static_cast<std::size_t>(i)].noalias() = a[static_cast<std::size_t>(i)] * b[static_cast<std::size_t>(i)]; };
  figure.time = TimeRuns(runs, [&] {
    std::vector<std::thread> pool;
    for (int i = 1; i < copies; ++i) pool.emplace_back(product, i);
    product(0);
    for (auto& t : pool) t.join();
    for (const auto& m : c) Consume(static_cast<double>(m(0, 0)));
  }, /*warmup=*/1);
  const double flops = 2.0 * static_cast<double>(n) * static_cast<double>(n) * static_cast<double>(n) * copies;
  FlopCount count;
  (sizeof(Scalar) == 4 ? count.sgl : count.dbl) = flops;
  figure.flops = count;
  figure.threads = copies;
  return flops / figure.time.median;
}

int RunProcess(const std::string& command) {
  const int status = std::system(command.c_str());
  if (status == -1) raise(ExitCode::kBadData, "cannot start: {}", command);
  return WEXITSTATUS(status);
}

std::string Quote(const std::string& s) {
  std::string out = "'";
  for (char c : s) out += c == '\'' ? std::string("'\\''") : std::string(1, c);
  return out + "'";
}

int Run(const BenchArgs& args) {
  for (const auto& g : args.only) {
    if (std::find(kGroups.begin(), kGroups.end(), g) == kGroups.end()) {
      raise(ExitCode::kUsage, "unknown group '{}' (known: {})", g, fmt::join(kGroups, ", "));
    }
  }
  const auto want = [&](const std::string& g) {
    return args.only.empty() || std::find(args.only.begin(), args.only.end(), g) != args.only.end();
  };
  const WorkloadRecipe recipe = args.scale ? ScaledRecipe() : DefaultRecipe();
  const fs::path cache(args.workloads);
  const PreparedWorkload work = PrepareWorkload(recipe, cache);
  const int runs = args.runs;

  fmt::print("plaudit benchmark\n");
  fmt::print("  workload   {}\n", recipe.Describe());
  fmt::print("  run dir    {}{}\n", work.run.string(), work.generated ? fmt::format(" (generated in {:.1f} s)", work.seconds) : " (cached)");
  fmt::print("  build      {}; SIMD {}; Eigen {}.{}.{}, {} thread(s) per product\n", PLAUDIT_BENCH_BUILD, SimdLevel(),
             EIGEN_WORLD_VERSION, EIGEN_MAJOR_VERSION, EIGEN_MINOR_VERSION, Eigen::nbThreads());
  fmt::print("  machine    {} hardware threads; load average {} at start (other jobs share the machine)\n",
             std::thread::hardware_concurrency(), LoadAverage());
  fmt::print("  timing     median of {} runs, with min and max; std::chrono::steady_clock\n\n", runs);
  std::fflush(stdout);

  std::vector<Figure> figures;
  auto add = [&](Figure f) {
    fmt::print("  {:<46} {}\n", f.label, Seconds(f.time.median));
    std::fflush(stdout);
    figures.push_back(std::move(f));
  };

  GemmRates gemm;
  if (want("gemm")) {
    const Eigen::Index n = args.gemm_size;
    for (int copies : {1, 2}) {
      Figure d{fmt::format("gemm_double_{}", copies), fmt::format("GEMM double {}^3{}", n, copies == 2 ? ", two at once" : "")};
      (copies == 1 ? gemm.dbl1 : gemm.dbl2) = GemmRate<double>(n, copies, runs, d);
      add(d);
      Figure s{fmt::format("gemm_float_{}", copies), fmt::format("GEMM float {}^3{}", n, copies == 2 ? ", two at once" : "")};
      (copies == 1 ? gemm.sgl1 : gemm.sgl2) = GemmRate<float>(n, copies, runs, s);
      add(s);
    }
  }
  auto bounded = [&](Figure f) {
    if (f.flops && gemm.measured()) f.bound = gemm.Bound(*f.flops, f.threads);
    return f;
  };

  const io::RunDir run(work.run);
  const audit::AuditOptions defaults;
  const audit::AuditInputs inputs = audit::ReadAuditInputs(run, defaults);
  const model::Dataset& data = *inputs.data;
  std::vector<bool> manifest_frozen;
  for (const auto& l : run.manifest().layers) manifest_frozen.push_back(!l.trainable);
  const int layer = checks::ResolveGradientLayer(defaults.gradient_decay, inputs.last.depth(), manifest_frozen);
  const auto snapshots = static_cast<Eigen::Index>(inputs.snaps.size());
  const Eigen::Index rows = data.rows();
  const double pass_flops = GradientPassFlops(inputs.last, rows, layer, snapshots);
  const double forward_share = ForwardFlops(inputs.last, rows) * static_cast<double>(snapshots) / pass_flops;
  fmt::print("  gradient pass: {} snapshots x {} rows, backward down to layer {} (1-based); counted {:.4g} GFLOP, "
             "{:.0f}% of it forward\n",
             snapshots, rows, layer + 1, pass_flops * 1e-9, 100.0 * forward_share);
  std::fflush(stdout);

  // The gradient pass alone, every snapshot's network already in memory, in one precision.
  auto in_memory_pass = [&](model::Precision precision, const std::string& key, const std::string& label) {
    std::vector<model::Network> nets;
    for (const auto& ref : inputs.snaps) nets.push_back(model::NetworkFromArrays(run.manifest(), run.ReadSnapshot(ref), ref.path.string()));
    model::EvalOptions eval;
    eval.block_rows = defaults.block_rows;
    eval.lowest_grad_layer = layer;
    eval.precision = precision;
    Figure f{key, fmt::format("{}, {} nets in memory", label, snapshots)};
    f.time = TimeRuns(runs, [&] {
      for (const auto& net : nets) Consume(model::Evaluate(net, data, eval).loss);
    });
    const bool single = precision == model::Precision::kFloat32;
    f.flops = FlopCount{single ? 0.0 : pass_flops, single ? pass_flops : 0.0};
    add(bounded(f));
  };
  if (want("gradient")) {
    in_memory_pass(model::Precision::kDouble, "gradient_memory", "gradient pass");
    for (int threads : {1, 2}) {
      audit::TrajectoryOptions t;
      t.block_rows = defaults.block_rows;
      t.lowest_grad_layer = layer;
      t.threads = threads;
      Figure f{fmt::format("trajectory_{}", threads), "trajectory (read + gradient pass + stats)"};
      f.threads = threads;
      f.time = TimeRuns(runs, [&] { Consume(audit::ComputeTrajectory(run, inputs.snaps, &data, t).points.back().loss); });
      f.flops = FlopCount{pass_flops, 0.0};
      add(bounded(f));
    }
  }
  if (want("float32")) {
    // The same pass in single precision (audit --precision float32 before its double refinement).
    in_memory_pass(model::Precision::kFloat32, "gradient_memory_f32", "gradient pass in float32");
  }
  if (want("snapshot")) {
    audit::TrajectoryOptions t;
    t.block_rows = defaults.block_rows;
    t.lowest_grad_layer = layer;
    Figure f{"snapshot", "one snapshot (a new snapshot under watch)"};
    f.time = TimeRuns(runs, [&] { Consume(audit::EvaluateSnapshot(run, inputs.snaps.back(), &data, t).loss); });
    f.flops = FlopCount{pass_flops / static_cast<double>(snapshots), 0.0};
    add(bounded(f));
  }
  int spread_dims = 6;  // the check's default k for d >= 5 with a bias; replaced by what it used
  if (want("spread")) {
    checks::CheckResult result;
    Figure f{"support_spread", fmt::format("support-spread ({} probes, {} replicas)", defaults.support_spread.probes,
                                           defaults.support_spread.null_replicas)};
    f.time = TimeRuns(runs, [&] { result = checks::RunSupportSpread(inputs.last, &inputs.first, data, defaults.support_spread); });
    if (result.detail.contains("dims")) spread_dims = result.detail["dims"].get<int>();
    f.flops = SupportSpreadFlops(inputs.last.layers.front().fan_out(), spread_dims, defaults.support_spread);
    add(bounded(f));
  }
  if (want("residual")) {
    const auto& o = defaults.residual_fit;
    Figure f{"residual_fit", fmt::format("residual-fit (M={}, {} folds, {} ridge, B={})", o.features, o.folds, o.ridge_grid,
                                         o.permutations)};
    f.threads = ThreadsFor(o.threads);
    f.time = TimeRuns(runs, [&] { Consume(checks::RunResidualFit(inputs.last, data, inputs.baseline_loss, o).statistic); });
    f.flops = ResidualFitFlops(inputs.last, rows, o);
    add(bounded(f));
  }
  std::optional<audit::AuditReport> report;
  if (want("plateau") || want("audit")) report = audit::RunAudit(run, defaults);  // also warms the file cache
  if (want("plateau")) {
    Figure f{"loss_plateau", fmt::format("loss-plateau ({} points)", report->loss_series.steps.size())};
    f.time = TimeRuns(runs, [&] {
      Consume(checks::RunLossPlateau(report->loss_series, inputs.baseline_loss, defaults.loss_plateau).statistic);
    });
    add(f);
  }
  if (want("deep")) {
    // The checks after the contract's four. Curvature runs only at a plateau in the audit, so
    // it is timed here on its own, on the audit's default row cap.
    checks::CurvatureOptions c = defaults.curvature;
    c.block_rows = defaults.block_rows;
    c.seed = 0x94d049bb133111ebULL;
    const model::Dataset sample = model::Subsample(data, defaults.curvature_rows, c.seed);
    checks::CheckResult result;
    Figure f{"curvature", fmt::format("curvature ({} rows, up to {} Lanczos steps)", sample.rows(), c.max_iterations)};
    f.time = TimeRuns(runs, [&] { result = checks::RunCurvature(inputs.last, sample, inputs.baseline_loss, c); });
    add(f);
    const auto& d = result.detail;
    fmt::print("    curvature: {} Hessian-vector products, {} loss evaluations, ratio {}, saddle {}\n",
               d.value("hessian_vector_products", 0), d.value("loss_evaluations", 0),
               d.contains("ratio") ? d["ratio"].dump() : "n/a", d.contains("saddle") ? d["saddle"].dump() : "n/a");
    checks::LayerDegeneracyOptions ld = defaults.layer_degeneracy;
    ld.block_rows = defaults.block_rows;
    Figure g{"layer_degeneracy", "layer-degeneracy"};
    g.time = TimeRuns(runs, [&] { Consume(checks::RunLayerDegeneracy(inputs.last, &inputs.first, data, ld).statistic); });
    add(g);
    Figure h{"two_way_diversity", "two-way-diversity"};
    h.time = TimeRuns(runs, [&] {
      Consume(checks::RunTwoWayDiversity(inputs.last, &inputs.first, defaults.two_way_diversity).statistic);
    });
    add(h);
  }
  // The audit's own default: 0 = every hardware thread.
  const int audit_threads = ThreadsFor(defaults.threads);
  if (want("audit")) {
    Figure f{"run_audit", "RunAudit, default options"};
    f.threads = audit_threads;
    f.time = TimeRuns(runs, [&] { Consume(audit::RunAudit(run, defaults).last_loss); });
    // Trajectory on audit_threads threads, support-spread on one, residual-fit's folds on the
    // hardware threads: each part is bounded at its own rate.
    const FlopCount trajectory{pass_flops, 0.0};
    const FlopCount spread = SupportSpreadFlops(inputs.last.layers.front().fan_out(), spread_dims, defaults.support_spread);
    const FlopCount residual = ResidualFitFlops(inputs.last, rows, defaults.residual_fit);
    FlopCount all = trajectory;
    all += spread;
    all += residual;
    f.flops = all;
    if (gemm.measured()) {
      const int rf_threads = ThreadsFor(0);
      f.bound = gemm.Bound(trajectory, audit_threads) + gemm.Bound(spread, 1) + gemm.Bound(residual, rf_threads);
    }
    add(f);
    fmt::print("    verdict {} at step {}\n", audit::VerdictToString(report->verdict), report->step);
    audit::AuditOptions single = defaults;
    single.precision = model::Precision::kFloat32;
    std::optional<audit::AuditReport> r32;
    Figure g{"run_audit_f32", "RunAudit, --precision float32"};
    g.threads = audit_threads;
    g.time = TimeRuns(runs, [&] { r32 = audit::RunAudit(run, single); });
    add(g);
    fmt::print("    verdict {} at step {}; {} of {} snapshots recomputed in double\n", audit::VerdictToString(r32->verdict),
               r32->step, r32->trajectory.recomputed_in_double, r32->trajectory.points.size());
    audit::AuditOptions judged = defaults;
    judged.all_layer_gradients = false;
    Figure h{"run_audit_judged", "RunAudit, --judged-layer-only"};
    h.threads = audit_threads;
    h.time = TimeRuns(runs, [&] { Consume(audit::RunAudit(run, judged).last_loss); });
    add(h);
  }
  if (want("process")) {
    const std::string command = fmt::format("{} audit {} >/dev/null 2>&1", Quote(args.cli), Quote(work.run.string()));
    int status = 0;
    Figure f{"process", "plaudit audit, whole process"};
    f.time = TimeRuns(runs, [&] { status = RunProcess(command); });
    if (status > 3) raise(ExitCode::kBadData, "`{}` exited with {}", command, status);
    add(f);
    const std::string single = fmt::format("{} audit {} --precision float32 >/dev/null 2>&1", Quote(args.cli), Quote(work.run.string()));
    Figure g{"process_f32", "plaudit audit --precision float32, whole process"};
    g.time = TimeRuns(runs, [&] { status = RunProcess(single); });
    if (status > 3) raise(ExitCode::kBadData, "`{}` exited with {}", single, status);
    add(g);
  }
  std::vector<Figure> training;
  if (want("train")) {
    const model::Dataset full = model::ReadDataset(run.data_path(), run.manifest().loss, inputs.last.output_dim());
    train::TrainOptions o;
    o.widths = recipe.widths;
    o.lr = recipe.lr;
    for (int threads : {1, 2}) {
      o.threads = threads;
      std::mt19937_64 rng(recipe.train_seed);
      model::Network net = train::InitialNetwork(o, full.dim(), inputs.last.output_dim(), rng);
      train::Descent descent(full, o, rng());
      Figure f{fmt::format("train_step_{}", threads), "training step (Descent, full batch)"};
      f.threads = threads;
      f.time = TimeRuns(runs, [&] {
        const model::Evaluation ev = descent.NextGradient(net);
        descent.Apply(net, ev);
        Consume(ev.loss);
      });
      f.flops = FlopCount{ForwardFlops(net, full.rows()) + BackwardFlops(net, full.rows(), 0), 0.0};
      add(bounded(f));
      training.push_back(f);
    }
  }

  fmt::print("\n");
  PrintTable(figures);
  fmt::print("\nbound = counted matrix-product flops / GEMM rate of the same precision and thread count; "
             "x bound = median / bound\n");
  const auto find = [&](const std::string& key) -> const Figure* {
    for (const auto& f : figures) if (f.key == key) return &f;
    return nullptr;
  };
  if (gemm.measured()) {
    if (const Figure* g = find("gradient_memory")) {
      fmt::print("gradient pass attains {:.3g} GFLOP/s = {:.0f}% of the 1-thread double GEMM ({:.3g} GFLOP/s); target >= 60%\n",
                 g->gflops(), 100.0 * g->gflops() * 1e9 / gemm.dbl1, gemm.dbl1 * 1e-9);
    }
    if (const Figure* t = find("trajectory_2")) {
      fmt::print("trajectory on 2 threads attains {:.3g} GFLOP/s = {:.0f}% of two concurrent GEMMs ({:.3g} GFLOP/s)\n",
                 t->gflops(), 100.0 * t->gflops() * 1e9 / gemm.dbl2, gemm.dbl2 * 1e-9);
    }
  }
  if (const Figure* a = find("run_audit")) {
    fmt::print("whole audit (RunAudit, defaults): {} median; target < 8 s\n", Seconds(a->time.median));
  }
  if (const Figure* g = find("gradient_memory_f32"); g != nullptr && gemm.measured()) {
    fmt::print("float32 gradient pass attains {:.3g} GFLOP/s = {:.0f}% of the 1-thread float GEMM ({:.3g} GFLOP/s)\n",
               g->gflops(), 100.0 * g->gflops() * 1e9 / gemm.sgl1, gemm.sgl1 * 1e-9);
  }
  if (const Figure* s = find("snapshot"); s != nullptr && find("trajectory_1") != nullptr) {
    fmt::print("{} x one snapshot = {} against the whole trajectory's {}: cost linear in snapshots\n", snapshots,
               Seconds(static_cast<double>(snapshots) * s->time.median), Seconds(find("trajectory_1")->time.median));
  }
  for (const Figure& f : training) {
    fmt::print("training: {:.3g} steps/s on {} thread(s) ({:.3g} GFLOP/s, forward + backward to layer 1)\n",
               1.0 / f.time.median, f.threads, f.gflops());
  }

  // Keep this run's figures; print the growth when the other workload has been measured too.
  nlohmann::json saved = {{"recipe", RecipeToJson(recipe)}, {"build", PLAUDIT_BENCH_BUILD}, {"figures", FiguresToJson(figures)}};
  const fs::path mine = cache / recipe.name / "figures.json";
  std::ofstream(mine, std::ios::trunc) << saved.dump(2) << '\n';
  const WorkloadRecipe other = args.scale ? DefaultRecipe() : ScaledRecipe();
  if (std::ifstream in(cache / other.name / "figures.json"); in) {
    const nlohmann::json theirs = nlohmann::json::parse(in, nullptr, false);
    if (!theirs.is_discarded() && theirs.contains("figures")) {
      const nlohmann::json& small = args.scale ? theirs : saved;
      const nlohmann::json& large = args.scale ? saved : theirs;
      PrintGrowth(small["figures"], large["figures"], DefaultRecipe().name, ScaledRecipe().name);
      if (theirs.value("build", std::string()) != PLAUDIT_BENCH_BUILD) {
        fmt::print("(the {} figures come from another build: {})\n", other.name, theirs.value("build", std::string("?")));
      }
    }
  }
  return 0;
}

}  // namespace
}  // namespace plaudit::bench

int main(int argc, char** argv) {
  plaudit::KeepFreedMemoryForReuse();
  plaudit::bench::BenchArgs args;
  CLI::App app{"plaudit_bench: per-component wall times of the audit against the machine's GEMM rate"};
  app.add_flag("--scale", args.scale, "Use the 4x workload (d=256, widths 2048, N=32768) instead of the default");
  app.add_option("--workloads", args.workloads, "Directory the generated workloads are cached in")->capture_default_str();
  app.add_option("--runs", args.runs, "Timed runs per figure (median, min and max are printed)")
      ->check(CLI::PositiveNumber)->capture_default_str();
  app.add_option("--gemm-size", args.gemm_size, "Size n of the n^3 reference GEMM")->check(CLI::PositiveNumber)->capture_default_str();
  app.add_option("--only", args.only, "Measure only these groups: gemm, gradient, float32, snapshot, spread, residual, "
                                      "plateau, deep, audit, process, train (bounds need gemm)")->delimiter(',');
  app.add_option("--cli", args.cli, "The plaudit executable timed as a process")->capture_default_str();
  CLI11_PARSE(app, argc, argv);
  try {
    return plaudit::bench::Run(args);
  } catch (const plaudit::Error& e) {
    std::fprintf(stderr, "plaudit_bench: %s\n", e.what());
    return e.exit_status();
  } catch (const std::exception& e) {
    std::fprintf(stderr, "plaudit_bench: %s\n", e.what());
    return 1;
  }
}
