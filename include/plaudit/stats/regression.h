#pragma once
// Ordinary least squares of y on x with an intercept, y = a + b x, and the classical standard
// error of the slope:
//     b  = Sxy / Sxx,   s^2 = sum (y_i - a - b x_i)^2 / (n - 2),   se(b) = s / sqrt(Sxx)
// Sums are taken about the means so that large x (training steps) lose no precision.
#include <cstdint>
#include <vector>

namespace plaudit::stats {

struct LineFit {
  std::int64_t n = 0;
  double slope = 0.0;
  double intercept = 0.0;
  double residual_variance = 0.0;  // s^2 on n - 2 degrees of freedom
  double slope_se = 0.0;           // s / sqrt(Sxx)
  // slope / slope_se; when the residuals are exactly zero: +inf, -inf or 0 by the slope's sign.
  double slope_t = 0.0;
};

// x and y of equal length n >= 3 with at least two distinct x; all finite
// (std::invalid_argument otherwise).
LineFit FitLine(const std::vector<double>& x, const std::vector<double>& y);

}  // namespace plaudit::stats
