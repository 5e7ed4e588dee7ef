#include "workload.h"

#include <chrono>
#include <fstream>

#include <fmt/format.h>

#include "plaudit/core/error.h"
#include "plaudit/train/teacher.h"
#include "plaudit/train/trainer.h"

namespace plaudit::bench {
namespace fs = std::filesystem;

std::string WorkloadRecipe::Describe() const {
  return fmt::format("{}: d={} -> {} -> 1 tanh (mean-field, biases, squared loss), N={}, {} snapshots "
                     "(steps 0..{} every {})",
                     name, dim, fmt::join(widths, " -> "), rows, snapshots(), steps, save_every);
}

WorkloadRecipe DefaultRecipe() {
  WorkloadRecipe r;
  r.name = "default";
  return r;
}

WorkloadRecipe ScaledRecipe() {
  WorkloadRecipe r;
  r.name = "scaled";
  r.dim = 256;
  r.widths = {2048, 2048};
  r.rows = 32768;
  r.teacher_width = 128;
  r.steps = 39;
  r.save_every = 1;
  return r;
}

nlohmann::json RecipeToJson(const WorkloadRecipe& r) {
  return {{"name", r.name},           {"dim", r.dim},     {"widths", r.widths},
          {"rows", r.rows},           {"teacher", "smooth"}, {"teacher_width", r.teacher_width},
          {"noise", r.noise},         {"steps", r.steps}, {"save_every", r.save_every},
          {"lr", r.lr},               {"data_seed", r.data_seed}, {"train_seed", r.train_seed},
          {"chunk_rows", train::TrainOptions{}.chunk_rows}, {"block_rows", train::TrainOptions{}.block_rows}};
}

PreparedWorkload PrepareWorkload(const WorkloadRecipe& recipe, const fs::path& cache) {
  const fs::path home = cache / recipe.name;
  const fs::path recipe_file = home / "recipe.json";
  PreparedWorkload out;
  out.run = home / "run";
  const nlohmann::json wanted = RecipeToJson(recipe);
  if (std::ifstream in(recipe_file); in) {
    const nlohmann::json found = nlohmann::json::parse(in, nullptr, false);
    if (found == wanted) return out;
  }
  const auto start = std::chrono::steady_clock::now();
  std::error_code ec;
  fs::remove(recipe_file, ec);
  fs::create_directories(home, ec);
  if (ec) raise(ExitCode::kBadData, "{}: cannot create the workload directory ({})", home.string(), ec.message());

  train::TeacherOptions t;
  t.kind = train::TeacherKind::kSmooth;
  t.dim = recipe.dim;
  t.width = recipe.teacher_width;
  t.rows = recipe.rows;
  t.noise = recipe.noise;
  t.seed = recipe.data_seed;
  const train::TeacherData data = train::MakeTeacherData(t);

  train::TrainOptions o;
  o.widths = recipe.widths;
  o.activation = model::Activation::kTanh;
  o.parameterization = io::Parameterization::kMeanField;
  o.loss = model::Loss::kSquared;
  o.hidden_bias = true;
  o.lr = recipe.lr;
  o.steps = recipe.steps;
  o.save_every = recipe.save_every;
  o.seed = recipe.train_seed;
  o.threads = recipe.threads;
  o.overwrite = true;
  o.notes = "benchmark workload " + recipe.name;
  fmt::print("generating workload {} in {} (once; later runs reuse it)\n", recipe.name, home.string());
  std::fflush(stdout);
  const train::TrainResult result = train::Train(data.data, o, out.run);
  if (result.diverged) raise(ExitCode::kBadData, "workload {}: training diverged", recipe.name);

  std::ofstream f(recipe_file, std::ios::trunc);
  f << wanted.dump(2) << '\n';
  if (!f.flush()) raise(ExitCode::kBadData, "{}: cannot write", recipe_file.string());
  out.generated = true;
  out.seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  fmt::print("  {} snapshots, final loss {:.5g}, {:.1f} s\n", result.saved_steps.size(), result.final_loss, out.seconds);
  return out;
}

}  // namespace plaudit::bench
