// The double-precision tanh (and the sigmoid built on it) is computed from Eigen's vectorised
// exp and log rather than std::tanh (model/activation.cpp). Reference: the C library's tanh and
// exp; glibc documents tanh within 2 ulp on x86-64 (glibc manual, "Errors in Math Functions";
// from memory). 1 ulp relative is 2^-52 ~ 2.2e-16 (IEEE 754 binary64).
#include <cmath>
#include <limits>
#include <random>

#include <Eigen/Core>
#include <catch2/catch.hpp>

#include "plaudit/model/activation.h"

namespace {

using plaudit::model::Activation;

constexpr double kUlp = 2.220446049250313e-16;  // 2^-52

Eigen::MatrixXd Arguments() {
  std::vector<double> v = {0.0, 1e-300, 1e-20, 1e-12, 1e-8, 1e-5, 1e-3, 0.01, 0.1, 0.3, 0.5, 0.6931, 1.0, 2.0,
                           5.0, 10.0, 18.0, 19.0, 20.0, 25.0, 100.0, 1e300};
  std::mt19937_64 rng(17);
  std::uniform_real_distribution<double> exponent(-12.0, 1.6);  // |z| from 1e-12 to 40
  for (int i = 0; i < 20000; ++i) v.push_back(std::pow(10.0, exponent(rng)));
  const auto n = static_cast<Eigen::Index>(v.size());
  Eigen::MatrixXd z(2 * n, 1);
  for (Eigen::Index i = 0; i < n; ++i) {
    z(i, 0) = v[static_cast<std::size_t>(i)];
    z(n + i, 0) = -v[static_cast<std::size_t>(i)];
  }
  return z;
}

double WorstUlps(const Eigen::MatrixXd& got, const Eigen::MatrixXd& want) {
  double worst = 0.0;
  for (Eigen::Index i = 0; i < got.size(); ++i) {
    const double w = want(i);
    const double err = std::abs(got(i) - w) / std::max(std::abs(w), std::numeric_limits<double>::min());
    worst = std::max(worst, err / kUlp);
  }
  return worst;
}

}  // namespace

TEST_CASE("tanh agrees with the C library's to a few ulp from 1e-300 to 1e300", "[model][activation]") {
  const Eigen::MatrixXd z = Arguments();
  Eigen::MatrixXd out, deriv;
  plaudit::model::ApplyWithDerivative(Activation::kTanh, z, out, deriv);
  const Eigen::MatrixXd want = z.unaryExpr([](double v) { return std::tanh(v); });
  const double ulps = WorstUlps(out, want);
  INFO("worst error " << ulps << " ulp");
  CHECK(ulps <= 8.0);
  CHECK(out(0) == 0.0);
  CHECK(out(1) == 1e-300);  // tanh z = z to double precision for tiny z
  Eigen::MatrixXd plain;
  plaudit::model::Apply(Activation::kTanh, z, plain);
  CHECK(plain == out);
  CHECK(deriv.array().maxCoeff() <= 1.0);
  CHECK(deriv.array().minCoeff() >= 0.0);

  Eigen::MatrixXd special(3, 1);
  special << std::numeric_limits<double>::infinity(), -std::numeric_limits<double>::infinity(),
      std::numeric_limits<double>::quiet_NaN();
  plaudit::model::Apply(Activation::kTanh, special, plain);
  CHECK(plain(0) == 1.0);
  CHECK(plain(1) == -1.0);
  CHECK(std::isnan(plain(2)));
}

TEST_CASE("sigmoid agrees with 1 / (1 + exp(-z)) where that form is accurate", "[model][activation]") {
  const Eigen::MatrixXd all = Arguments();
  // 1/(1+exp(-z)) is itself accurate to a few ulp when exp(-z) does not overflow: keep |z| <= 700.
  std::vector<double> kept;
  for (Eigen::Index i = 0; i < all.size(); ++i) if (std::abs(all(i)) <= 700.0) kept.push_back(all(i));
  const Eigen::MatrixXd z = Eigen::Map<const Eigen::MatrixXd>(kept.data(), static_cast<Eigen::Index>(kept.size()), 1);
  Eigen::MatrixXd out, deriv;
  plaudit::model::ApplyWithDerivative(Activation::kSigmoid, z, out, deriv);
  const Eigen::MatrixXd want = z.unaryExpr([](double v) { return 1.0 / (1.0 + std::exp(-v)); });
  // Relative to the value; sigmoid(z) for large negative z is tiny and its relative error is
  // that of 1 + tanh(z/2), which cancels: compare there against the absolute scale of 1.
  double worst = 0.0;
  for (Eigen::Index i = 0; i < z.size(); ++i) worst = std::max(worst, std::abs(out(i) - want(i)) / kUlp);
  INFO("worst absolute error " << worst << " ulp of 1");
  CHECK(worst <= 8.0);
  const Eigen::MatrixXd want_deriv = (want.array() * (1.0 - want.array())).matrix();
  double worst_d = 0.0;
  for (Eigen::Index i = 0; i < z.size(); ++i) worst_d = std::max(worst_d, std::abs(deriv(i) - want_deriv(i)) / kUlp);
  CHECK(worst_d <= 8.0);
}
