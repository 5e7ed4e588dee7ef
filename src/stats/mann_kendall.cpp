#include "plaudit/stats/mann_kendall.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <stdexcept>

namespace plaudit::stats {
namespace {

// Counts of earlier values by rank; prefix sums answer "how many earlier values rank <= r".
class Fenwick {
 public:
  explicit Fenwick(std::size_t size) : tree_(size + 1, 0) {}
  void Add(std::size_t rank) {  // rank is 1-based
    for (std::size_t i = rank; i < tree_.size(); i += i & (~i + 1)) ++tree_[i];
  }
  std::int64_t Prefix(std::size_t rank) const {
    std::int64_t total = 0;
    for (std::size_t i = rank; i > 0; i -= i & (~i + 1)) total += tree_[i];
    return total;
  }

 private:
  std::vector<std::int64_t> tree_;
};

std::int64_t KendallS(const std::vector<double>& x, const std::vector<double>& sorted_unique) {
  Fenwick seen(sorted_unique.size());
  std::int64_t s = 0;
  for (std::size_t j = 0; j < x.size(); ++j) {
    const auto pos = std::lower_bound(sorted_unique.begin(), sorted_unique.end(), x[j]);
    const std::size_t rank = static_cast<std::size_t>(pos - sorted_unique.begin()) + 1;
    const std::int64_t below = seen.Prefix(rank - 1);
    const std::int64_t above = static_cast<std::int64_t>(j) - seen.Prefix(rank);
    s += below - above;
    seen.Add(rank);
  }
  return s;
}

struct TieSums {
  double variance_term = 0.0;  // sum t(t-1)(2t+5)
  double pairs = 0.0;          // sum t(t-1)/2
};

TieSums TieGroups(const std::vector<double>& sorted) {
  TieSums sums;
  std::size_t i = 0;
  while (i < sorted.size()) {
    std::size_t j = i;
    while (j < sorted.size() && sorted[j] == sorted[i]) ++j;
    const double t = static_cast<double>(j - i);
    sums.variance_term += t * (t - 1.0) * (2.0 * t + 5.0);
    sums.pairs += t * (t - 1.0) / 2.0;
    i = j;
  }
  return sums;
}

}  // namespace

MannKendallResult MannKendall(const std::vector<double>& x) {
  for (double v : x) {
    if (!std::isfinite(v)) throw std::invalid_argument("MannKendall: non-finite value in series");
  }
  MannKendallResult r;
  r.n = static_cast<std::int64_t>(x.size());
  std::vector<double> sorted = x;
  std::sort(sorted.begin(), sorted.end());
  const TieSums ties = TieGroups(sorted);
  sorted.erase(std::unique(sorted.begin(), sorted.end()), sorted.end());
  r.S = KendallS(x, sorted);

  const double n = static_cast<double>(r.n);
  r.var_s = std::max(0.0, (n * (n - 1.0) * (2.0 * n + 5.0) - ties.variance_term) / 18.0);
  if (r.var_s > 0.0 && r.S != 0) {
    const double corrected = static_cast<double>(r.S > 0 ? r.S - 1 : r.S + 1);
    r.z = corrected / std::sqrt(r.var_s);
  }
  const double root2 = std::sqrt(2.0);
  r.p_two_sided = std::erfc(std::fabs(r.z) / root2);
  r.p_increasing = 0.5 * std::erfc(r.z / root2);
  r.p_decreasing = 0.5 * std::erfc(-r.z / root2);

  const double n0 = n * (n - 1.0) / 2.0;
  const double denom = std::sqrt(n0 * (n0 - ties.pairs));
  r.tau = denom > 0.0 ? static_cast<double>(r.S) / denom
                      : std::numeric_limits<double>::quiet_NaN();
  return r;
}

nlohmann::json MannKendallToJson(const MannKendallResult& r) {
  return {{"n", r.n},           {"S", r.S},
          {"var_s", r.var_s},   {"z", r.z},
          {"p_two_sided", r.p_two_sided}, {"p_decreasing", r.p_decreasing},
          {"p_increasing", r.p_increasing}, {"tau", r.tau}};
}

}  // namespace plaudit::stats
