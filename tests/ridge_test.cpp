// Ridge regression with cross-fitting against scikit-learn, and the fold helpers.
// Reference values: tests/fixtures/ridge_diabetes.json, written by
// tests/reference/make_ridge_reference.py (scikit-learn 1.2 Ridge(solver="svd"), KFold,
// cross_val_score on the diabetes data of Efron et al. 2004).
#include <algorithm>
#include <fstream>
#include <numeric>
#include <stdexcept>
#include <string>
#include <vector>

#include <Eigen/Core>
#include <catch2/catch.hpp>
#include <nlohmann/json.hpp>

#include "plaudit/stats/folds.h"
#include "plaudit/stats/ridge.h"

namespace {

using Eigen::Index;
using Eigen::MatrixXd;
using plaudit::stats::ContiguousFolds;
using plaudit::stats::FitRidge;
using plaudit::stats::FoldList;
using plaudit::stats::RidgeStrengths;

constexpr double kRelTol = 1e-8;  // agreement asked of a double-precision solve vs sklearn's SVD

nlohmann::json Fixture() {
  std::ifstream in(std::string(PLAUDIT_FIXTURES) + "/ridge_diabetes.json");
  REQUIRE(in.good());
  return nlohmann::json::parse(in);
}

MatrixXd Matrix(const nlohmann::json& rows) {
  MatrixXd m(static_cast<Index>(rows.size()), static_cast<Index>(rows[0].size()));
  for (Index i = 0; i < m.rows(); ++i) {
    for (Index j = 0; j < m.cols(); ++j) m(i, j) = rows[static_cast<std::size_t>(i)][static_cast<std::size_t>(j)];
  }
  return m;
}

MatrixXd Column(const nlohmann::json& values) {
  MatrixXd m(static_cast<Index>(values.size()), 1);
  for (Index i = 0; i < m.rows(); ++i) m(i, 0) = values[static_cast<std::size_t>(i)];
  return m;
}

double RelativeError(const MatrixXd& got, const MatrixXd& want) {
  return (got - want).norm() / want.norm();
}

RidgeStrengths Absolute(std::vector<double> values) { return RidgeStrengths{std::move(values), false}; }

// sklearn stores coef_ as k x M; plaudit's weights are M x k.
void RequireFitMatches(const plaudit::stats::RidgeCoefficients& got, const nlohmann::json& ref) {
  const MatrixXd coef = Matrix(ref["coef"]).transpose();
  const MatrixXd intercept = Column(ref["intercept"]).transpose();
  INFO("alpha " << ref["alpha"].get<double>());
  CHECK(RelativeError(got.weights, coef) < kRelTol);
  CHECK(RelativeError(got.intercept, intercept) < kRelTol);
}

}  // namespace

TEST_CASE("ridge coefficients agree with scikit-learn on the diabetes data", "[ridge]") {
  const nlohmann::json fx = Fixture();
  const MatrixXd x = Matrix(fx["x"]);
  const MatrixXd y = Column(fx["y"]);
  REQUIRE(x.rows() == 442);
  REQUIRE(x.cols() == 10);
  std::vector<double> alphas;
  for (const auto& f : fx["fits"]) alphas.push_back(f["alpha"]);
  const auto fits = FitRidge(x, y, Absolute(alphas));
  REQUIRE(fits.size() == alphas.size());
  for (std::size_t j = 0; j < fits.size(); ++j) {
    CHECK(fits[j].lambda == alphas[j]);
    RequireFitMatches(fits[j], fx["fits"][j]);
  }
}

TEST_CASE("ridge with two target columns matches scikit-learn's multi-output fit", "[ridge]") {
  const nlohmann::json fx = Fixture();
  const MatrixXd x = Matrix(fx["x"]);
  MatrixXd y(x.rows(), 2);
  y.col(0) = Column(fx["y"]);
  y.col(1) = Column(fx["y2_second_column"]);
  std::vector<double> alphas;
  for (const auto& f : fx["fits_two_targets"]) alphas.push_back(f["alpha"]);
  const auto fits = FitRidge(x, y, Absolute(alphas));
  for (std::size_t j = 0; j < fits.size(); ++j) RequireFitMatches(fits[j], fx["fits_two_targets"][j]);
}

TEST_CASE("a relative ridge strength is scaled by trace(G)/M", "[ridge]") {
  const nlohmann::json fx = Fixture();
  const MatrixXd x = Matrix(fx["x"]);
  const MatrixXd y = Column(fx["y"]);
  const auto& rel = fx["relative"];
  const auto fits = FitRidge(x, y, RidgeStrengths{{rel["value"].get<double>()}, true});
  // alpha = value * trace(Xc^T Xc) / M, computed by the generator with NumPy.
  CHECK(fits[0].lambda == Approx(rel["alpha"].get<double>()).epsilon(1e-12));
  RequireFitMatches(fits[0], rel["fit"]);
}

TEST_CASE("ridge with fewer rows than features (kernel form) matches scikit-learn", "[ridge]") {
  const nlohmann::json fx = Fixture();
  const MatrixXd x = Matrix(fx["x"]).topRows(8);
  const MatrixXd y = Column(fx["y"]).topRows(8);
  std::vector<double> alphas;
  for (const auto& f : fx["wide_fits"]) alphas.push_back(f["alpha"]);
  const auto fits = FitRidge(x, y, Absolute(alphas));
  for (std::size_t j = 0; j < fits.size(); ++j) RequireFitMatches(fits[j], fx["wide_fits"][j]);
}

TEST_CASE("5-fold ridge CV errors agree with scikit-learn's KFold cross_val_score", "[ridge]") {
  const nlohmann::json fx = Fixture();
  const MatrixXd x = Matrix(fx["x"]);
  const MatrixXd y = Column(fx["y"]);
  std::vector<double> alphas;
  for (const auto& c : fx["cv"]) alphas.push_back(c["alpha"]);
  const FoldList folds = ContiguousFolds(x.rows(), 5);
  for (int threads : {1, 2}) {
    const MatrixXd mse = plaudit::stats::RidgeCvMeanSquaredError(x, y, folds, Absolute(alphas), threads);
    for (std::size_t j = 0; j < alphas.size(); ++j) {
      const auto& ref = fx["cv"][j];
      INFO("alpha " << alphas[j] << ", threads " << threads);
      const MatrixXd want = Column(ref["fold_mse"]);
      CHECK(RelativeError(mse.col(static_cast<Index>(j)), want) < kRelTol);
      CHECK(mse.col(static_cast<Index>(j)).mean() ==
            Approx(ref["mean_mse"].get<double>()).epsilon(kRelTol));
    }
  }
}

TEST_CASE("ridge CV in kernel form (training folds narrower than the features) matches scikit-learn", "[ridge]") {
  const nlohmann::json fx = Fixture();
  const MatrixXd x = Matrix(fx["x"]).topRows(12);
  const MatrixXd y = Column(fx["y"]).topRows(12);
  std::vector<double> alphas;
  for (const auto& c : fx["wide_cv"]) alphas.push_back(c["alpha"]);
  const MatrixXd mse = plaudit::stats::RidgeCvMeanSquaredError(x, y, ContiguousFolds(12, 3), Absolute(alphas));
  for (std::size_t j = 0; j < alphas.size(); ++j) {
    INFO("alpha " << alphas[j]);
    CHECK(RelativeError(mse.col(static_cast<Index>(j)), Column(fx["wide_cv"][j]["fold_mse"])) < kRelTol);
  }
}

TEST_CASE("cross-fitted predictions equal a direct fit on the training rows", "[ridge]") {
  // Internal consistency of the Gram-by-subtraction path with random folds and extra rows:
  // each fold's predictions must be those of FitRidge on that fold's training rows alone.
  const nlohmann::json fx = Fixture();
  const MatrixXd x = Matrix(fx["x"]);
  MatrixXd y(x.rows(), 2);
  y.col(0) = Column(fx["y"]);
  y.col(1) = Column(fx["y2_second_column"]);
  const FoldList folds = plaudit::stats::RandomFolds(x.rows(), 4, 7);
  const RidgeStrengths grid{plaudit::stats::LogRidgeGrid(3, 1e-4, 1.0), true};
  plaudit::stats::RidgeCrossFitOptions options;
  options.threads = 2;
  for (const auto& fold : folds) {
    options.extra_rows.push_back({plaudit::stats::ComplementRows(fold, x.rows()).front(), fold.front()});
  }
  int visited = 0;
  std::vector<std::vector<MatrixXd>> held(folds.size()), extra(folds.size());
  std::vector<std::vector<double>> lambdas(folds.size());
  plaudit::stats::RidgeCrossFit(x, y, folds, grid, options, [&](const plaudit::stats::RidgeFoldFit& fit) {
    held[static_cast<std::size_t>(fit.fold)] = fit.held_out;
    extra[static_cast<std::size_t>(fit.fold)] = fit.extra;
    lambdas[static_cast<std::size_t>(fit.fold)] = fit.lambdas;
  });
  for (std::size_t f = 0; f < folds.size(); ++f) {
    const auto train = plaudit::stats::ComplementRows(folds[f], x.rows());
    const auto direct = FitRidge(x(train, Eigen::all), y(train, Eigen::all), grid);
    for (std::size_t j = 0; j < direct.size(); ++j) {
      ++visited;
      CHECK(lambdas[f][j] == Approx(direct[j].lambda).epsilon(1e-10));
      const MatrixXd want_held = (x(folds[f], Eigen::all) * direct[j].weights).rowwise() + direct[j].intercept;
      const MatrixXd want_extra = (x(options.extra_rows[f], Eigen::all) * direct[j].weights).rowwise() + direct[j].intercept;
      CHECK(RelativeError(held[f][j], want_held) < 1e-9);
      CHECK(RelativeError(extra[f][j], want_extra) < 1e-9);
    }
  }
  CHECK(visited == 12);
}

TEST_CASE("single-precision prediction products stay within float rounding of double", "[ridge]") {
  const nlohmann::json fx = Fixture();
  const MatrixXd x = Matrix(fx["x"]);
  const MatrixXd y = Column(fx["y"]);
  const FoldList folds = plaudit::stats::RandomFolds(x.rows(), 5, 3);
  const RidgeStrengths grid{plaudit::stats::LogRidgeGrid(4, 1e-4, 1.0), true};
  std::vector<std::vector<MatrixXd>> exact(folds.size()), rounded(folds.size());
  plaudit::stats::RidgeCrossFitOptions options;
  plaudit::stats::RidgeCrossFit(x, y, folds, grid, options, [&](const plaudit::stats::RidgeFoldFit& fit) {
    exact[static_cast<std::size_t>(fit.fold)] = fit.held_out;
  });
  options.single_precision_products = true;
  plaudit::stats::RidgeCrossFit(x, y, folds, grid, options, [&](const plaudit::stats::RidgeFoldFit& fit) {
    rounded[static_cast<std::size_t>(fit.fold)] = fit.held_out;
  });
  for (std::size_t f = 0; f < folds.size(); ++f) {
    for (std::size_t j = 0; j < exact[f].size(); ++j) {
      const double err = RelativeError(rounded[f][j], exact[f][j]);
      CHECK(err < 1e-5);   // float epsilon 1.2e-7 times the conditioning of the product
      CHECK(err > 1e-12);  // the products really ran in float
    }
  }
}

TEST_CASE("log ridge grid spans its end points with a constant ratio", "[ridge]") {
  const auto grid = plaudit::stats::LogRidgeGrid(8, 1e-6, 10.0);
  REQUIRE(grid.size() == 8);
  CHECK(grid.front() == 1e-6);
  CHECK(grid.back() == 10.0);
  for (std::size_t j = 1; j < grid.size(); ++j) CHECK(grid[j] / grid[j - 1] == Approx(std::pow(1e7, 1.0 / 7.0)));
  CHECK(plaudit::stats::LogRidgeGrid(1, 1e-4, 1.0).front() == Approx(1e-2));
  CHECK_THROWS_AS(plaudit::stats::LogRidgeGrid(0), std::invalid_argument);
  CHECK_THROWS_AS(FitRidge(MatrixXd::Ones(3, 2), MatrixXd::Ones(3, 1), Absolute({0.0})), std::invalid_argument);
}

TEST_CASE("contiguous folds follow KFold's sizes; random folds partition the rows", "[ridge]") {
  // KFold: the first n % k folds have n // k + 1 rows (scikit-learn documentation).
  const FoldList folds = ContiguousFolds(442, 5);
  std::vector<std::size_t> sizes;
  for (const auto& f : folds) sizes.push_back(f.size());
  CHECK(sizes == std::vector<std::size_t>{89, 89, 88, 88, 88});
  CHECK(folds[1].front() == 89);
  CHECK(folds[4].back() == 441);

  const FoldList random = plaudit::stats::RandomFolds(442, 5, 11);
  CHECK_NOTHROW(plaudit::stats::ValidatePartition(random, 442));
  CHECK(random == plaudit::stats::RandomFolds(442, 5, 11));
  CHECK(random != plaudit::stats::RandomFolds(442, 5, 12));
  CHECK(random[0].size() == 89);
  CHECK(random != folds);

  FoldList broken = folds;
  broken[0].push_back(100);  // row 100 is also in fold 1
  CHECK_THROWS_AS(plaudit::stats::ValidatePartition(broken, 442), std::invalid_argument);
  CHECK_THROWS_AS(ContiguousFolds(3, 5), std::invalid_argument);
}

TEST_CASE("random permutations are uniform over the positions", "[ridge]") {
  // Each element lands in each of n positions with probability 1/n: over 6000 draws of a
  // 3-permutation every count is 2000 +- a few standard deviations (sd = sqrt(6000 * 2/9) ~ 37).
  std::mt19937_64 rng(5);
  Eigen::Matrix3i counts = Eigen::Matrix3i::Zero();
  for (int draw = 0; draw < 6000; ++draw) {
    const auto p = plaudit::stats::RandomPermutation(3, rng);
    for (Index i = 0; i < 3; ++i) ++counts(i, static_cast<Index>(p[static_cast<std::size_t>(i)]));
  }
  CHECK(counts.minCoeff() > 2000 - 200);
  CHECK(counts.maxCoeff() < 2000 + 200);
}

TEST_CASE("fold loop runs every fold and rethrows the first failure", "[ridge]") {
  std::vector<int> hits(5, 0);
  plaudit::stats::ForEachFold(5, 2, [&](int f) { hits[static_cast<std::size_t>(f)] += 1; });
  CHECK(hits == std::vector<int>(5, 1));
  CHECK_THROWS_WITH(plaudit::stats::ForEachFold(5, 2, [&](int f) {
                      if (f >= 2) throw std::runtime_error("fold " + std::to_string(f));
                    }),
                    "fold 2");
}
