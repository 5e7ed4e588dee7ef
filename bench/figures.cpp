#include "figures.h"

#include <fmt/format.h>

namespace plaudit::bench {

double GemmRates::Bound(const FlopCount& c, int threads) const {
  const double d = threads >= 2 ? dbl2 : dbl1;
  const double s = threads >= 2 ? sgl2 : sgl1;
  return c.dbl / d + (c.sgl > 0.0 ? c.sgl / s : 0.0);
}

std::string Seconds(double s) {
  if (s >= 1.0) return fmt::format("{:.3g} s", s);
  if (s >= 1e-3) return fmt::format("{:.3g} ms", s * 1e3);
  return fmt::format("{:.3g} us", s * 1e6);
}

void PrintTable(const std::vector<Figure>& figures) {
  fmt::print("{:<46} {:>3} {:>10} {:>10} {:>10} {:>9} {:>8} {:>10} {:>7}\n", "component", "thr", "median", "min", "max",
             "GFLOP", "GFLOP/s", "bound", "x bound");
  for (const Figure& f : figures) {
    std::string gflop = "-", rate = "-", bound = "-", ratio = "-";
    if (f.flops) {
      gflop = fmt::format("{:.3g}", f.flops->total() * 1e-9);
      rate = fmt::format("{:.3g}", f.gflops());
    }
    if (f.bound) {
      bound = Seconds(*f.bound);
      ratio = fmt::format("{:.2f}", f.time.median / *f.bound);
    }
    fmt::print("{:<46} {:>3} {:>10} {:>10} {:>10} {:>9} {:>8} {:>10} {:>7}\n", f.label, f.threads, Seconds(f.time.median),
               Seconds(f.time.min), Seconds(f.time.max), gflop, rate, bound, ratio);
  }
}

nlohmann::json FiguresToJson(const std::vector<Figure>& figures) {
  nlohmann::json rows = nlohmann::json::object();
  for (const Figure& f : figures) {
    nlohmann::json& r = rows[f.key];
    r["label"] = f.label;
    r["threads"] = f.threads;
    r["median"] = f.time.median;
    r["min"] = f.time.min;
    r["max"] = f.time.max;
    r["runs"] = f.time.runs;
    if (f.flops) r["flops"] = f.flops->total();
    if (f.bound) r["bound"] = *f.bound;
  }
  return rows;
}

void PrintGrowth(const nlohmann::json& small, const nlohmann::json& large, const std::string& small_name,
                 const std::string& large_name) {
  fmt::print("\ngrowth {} -> {} (time factor; counted-work factor where counted)\n", small_name, large_name);
  fmt::print("{:<46} {:>10} {:>10} {:>8} {:>8}\n", "component", small_name, large_name, "time x", "work x");
  for (auto it = small.begin(); it != small.end(); ++it) {
    if (!large.contains(it.key()) || it.key().rfind("gemm", 0) == 0) continue;
    const auto& a = it.value();
    const auto& b = large[it.key()];
    const double ta = a["median"].get<double>(), tb = b["median"].get<double>();
    const std::string work = a.contains("flops") && b.contains("flops")
                                 ? fmt::format("{:.3g}", b["flops"].get<double>() / a["flops"].get<double>())
                                 : std::string("-");
    fmt::print("{:<46} {:>10} {:>10} {:>8.3g} {:>8}\n", a["label"].get<std::string>(), Seconds(ta), Seconds(tb), tb / ta, work);
  }
}

}  // namespace plaudit::bench
