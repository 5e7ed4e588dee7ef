#pragma once
// Mann-Kendall test for a monotone trend in a series taken in time order (Mann 1945,
// Kendall 1975; the procedure as set out in Gilbert 1987, ch. 16):
//     S      = sum_{i<j} sign(x_j - x_i)
//     Var(S) = [n(n-1)(2n+5) - sum_g t_g(t_g-1)(2t_g+5)] / 18     (t_g: size of tie group g)
//     z      = (S-1)/sqrt(Var) if S > 0,  (S+1)/sqrt(Var) if S < 0,  0 if S = 0
// with p-values from the normal approximation. S is counted in O(n log n) (a Fenwick tree over
// value ranks), so long loss logs are cheap.
#include <cstdint>
#include <vector>

#include <nlohmann/json.hpp>

namespace plaudit::stats {

struct MannKendallResult {
  std::int64_t n = 0;
  std::int64_t S = 0;
  double var_s = 0.0;        // with the ties correction; 0 when every value is tied or n < 2
  double z = 0.0;            // continuity-corrected; 0 when var_s == 0
  double p_two_sided = 1.0;  // P(|Z| >= |z|)
  double p_decreasing = 0.5; // P(Z <= z): small when the series falls
  double p_increasing = 0.5; // P(Z >= z): small when the series rises
  // Kendall's tau-b between the series and time: S / sqrt(n0 (n0 - n_ties)) with
  // n0 = n(n-1)/2 and n_ties = sum_g t_g(t_g-1)/2 (time has no ties). Equals tau-a = S / n0
  // when the values have no ties; NaN when every value is tied or n < 2.
  double tau = 0.0;
};

// `x` in time order; every value must be finite (std::invalid_argument otherwise).
MannKendallResult MannKendall(const std::vector<double>& x);

// {"n", "S", "var_s", "z", "p_two_sided", "p_decreasing", "p_increasing", "tau"}.
nlohmann::json MannKendallToJson(const MannKendallResult& r);

}  // namespace plaudit::stats
