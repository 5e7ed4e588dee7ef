#include "plaudit/stats/regression.h"

#include <cmath>
#include <limits>
#include <stdexcept>

namespace plaudit::stats {
namespace {

void CheckInputs(const std::vector<double>& x, const std::vector<double>& y) {
  if (x.size() != y.size()) throw std::invalid_argument("FitLine: x and y differ in length");
  if (x.size() < 3) throw std::invalid_argument("FitLine: needs at least 3 points");
  for (std::size_t i = 0; i < x.size(); ++i) {
    if (!std::isfinite(x[i]) || !std::isfinite(y[i])) {
      throw std::invalid_argument("FitLine: non-finite value");
    }
  }
}

double Mean(const std::vector<double>& v) {
  double sum = 0.0;
  for (double e : v) sum += e;
  return sum / static_cast<double>(v.size());
}

double SignedInfinity(double slope) {
  if (slope == 0.0) return 0.0;
  const double inf = std::numeric_limits<double>::infinity();
  return slope > 0.0 ? inf : -inf;
}

}  // namespace

LineFit FitLine(const std::vector<double>& x, const std::vector<double>& y) {
  CheckInputs(x, y);
  const double mx = Mean(x);
  const double my = Mean(y);
  double sxx = 0.0;
  double sxy = 0.0;
  for (std::size_t i = 0; i < x.size(); ++i) {
    sxx += (x[i] - mx) * (x[i] - mx);
    sxy += (x[i] - mx) * (y[i] - my);
  }
  if (!(sxx > 0.0)) throw std::invalid_argument("FitLine: all x are equal");

  LineFit fit;
  fit.n = static_cast<std::int64_t>(x.size());
  fit.slope = sxy / sxx;
  fit.intercept = my - fit.slope * mx;
  double rss = 0.0;
  for (std::size_t i = 0; i < x.size(); ++i) {
    const double r = (y[i] - my) - fit.slope * (x[i] - mx);
    rss += r * r;
  }
  fit.residual_variance = rss / static_cast<double>(fit.n - 2);
  fit.slope_se = std::sqrt(fit.residual_variance / sxx);
  fit.slope_t = fit.slope_se > 0.0 ? fit.slope / fit.slope_se : SignedInfinity(fit.slope);
  return fit;
}

}  // namespace plaudit::stats
