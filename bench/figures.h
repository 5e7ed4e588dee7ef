#pragma once
// The benchmark's table: one row per measured component, with its operation count, attained
// rate and the lower bound that count implies at the measured GEMM rate. Saved as JSON beside
// the workload so a later run on the other workload can print how each figure grew.
#include <filesystem>
#include <optional>
#include <string>
#include <utility>
#include <vector>

#include <nlohmann/json.hpp>

#include "op_count.h"
#include "timer.h"

namespace plaudit::bench {

struct Figure {
  Figure() = default;
  Figure(std::string key_, std::string label_) : key(std::move(key_)), label(std::move(label_)) {}
  std::string key;    // stable name, used to match rows between workloads
  std::string label;  // what was timed, for people
  int threads = 1;
  Timing time;
  std::optional<FlopCount> flops;  // counted work (see op_count.h)
  std::optional<double> bound;     // seconds: flops at the GEMM rate of the same precision and threads
  double gflops() const { return flops ? flops->total() / time.median * 1e-9 : 0.0; }
};

struct GemmRates {
  double dbl1 = 0.0, dbl2 = 0.0, sgl1 = 0.0, sgl2 = 0.0;  // flop/s, 1 thread and 2 threads in all
  bool measured() const { return dbl1 > 0.0; }
  // Seconds the counted work needs at these rates with `threads` threads (1 or 2).
  double Bound(const FlopCount& c, int threads) const;
};

// "1.23 s", "45.6 ms", "789 us".
std::string Seconds(double s);

void PrintTable(const std::vector<Figure>& figures);

nlohmann::json FiguresToJson(const std::vector<Figure>& figures);
// Rows of the two runs with the same key: median, counted work and the factor between them.
void PrintGrowth(const nlohmann::json& small, const nlohmann::json& large, const std::string& small_name,
                 const std::string& large_name);

}  // namespace plaudit::bench
