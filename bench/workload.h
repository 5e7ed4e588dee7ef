#pragma once
// The benchmark workloads: a seeded teacher data set and a short real training run on it,
// written once as a run directory and reused while its recorded recipe matches.
//
// default: mean-field network d=64 -> 512 -> 512 -> 1, tanh, hidden biases, squared loss;
//          N = 8192 rows from a smooth teacher; full-batch descent, 78 steps saved every 2
//          (40 snapshots).
// scaled:  4x in every size (d=256, widths 2048, N=32768): 64x the arithmetic of a pass.
//          39 steps saved every step, again 40 snapshots, so the audit's work is comparable and
//          the training, whose cost is not what is measured, stays affordable.
#include <cstdint>
#include <filesystem>
#include <string>
#include <vector>

#include <Eigen/Core>
#include <nlohmann/json.hpp>

namespace plaudit::bench {

struct WorkloadRecipe {
  std::string name;
  Eigen::Index dim = 64;
  std::vector<Eigen::Index> widths = {512, 512};
  Eigen::Index rows = 8192;
  Eigen::Index teacher_width = 32;  // smooth teacher neurons
  double noise = 0.05;              // label noise std: the plateau is not at zero loss
  std::int64_t steps = 78;
  std::int64_t save_every = 2;
  double lr = 0.5;                  // the trainer's default
  std::uint64_t data_seed = 0x70a5e1;
  std::uint64_t train_seed = 0x51ab;
  int threads = 2;                  // training only; results do not depend on it

  std::int64_t snapshots() const { return steps / save_every + 1 + (steps % save_every != 0 ? 1 : 0); }
  std::string Describe() const;
};

WorkloadRecipe DefaultRecipe();
WorkloadRecipe ScaledRecipe();
nlohmann::json RecipeToJson(const WorkloadRecipe& recipe);

struct PreparedWorkload {
  std::filesystem::path run;  // the run directory
  bool generated = false;     // false: reused from the cache
  double seconds = 0.0;       // generation time when generated
};

// <cache>/<name>/run, generated when absent or made by a different recipe. The recipe file is
// written last, so an interrupted generation is redone.
PreparedWorkload PrepareWorkload(const WorkloadRecipe& recipe, const std::filesystem::path& cache);

}  // namespace plaudit::bench
