// Check `residual-fit` on networks built in memory, with planted and absent signals.
// Expected outcomes follow from the construction of each scenario (a teacher the network lacks
// or pure noise); the Student t tail is checked against closed forms.
#include <cmath>
#include <random>
#include <string>

#include <Eigen/Core>
#include <catch2/catch.hpp>

#include "plaudit/checks/residual_fit.h"
#include "plaudit/model/dataset.h"
#include "plaudit/model/network.h"
#include "support/error_matcher.h"

namespace {

using Eigen::Index;
using Eigen::MatrixXd;
using Eigen::VectorXd;
using plaudit::checks::ResidualFitOptions;
using plaudit::checks::RunResidualFit;
using plaudit::checks::Status;
using plaudit::model::Activation;
using plaudit::model::DenseLayer;
using plaudit::model::Loss;
using plaudit::model::Network;

const double kPi = std::acos(-1.0);

MatrixXd GaussianMatrix(Index rows, Index cols, std::mt19937_64& rng) {
  std::normal_distribution<double> normal;
  MatrixXd m(rows, cols);
  for (Index i = 0; i < m.size(); ++i) m(i) = normal(rng);
  return m;
}

DenseLayer Layer(MatrixXd weight, Activation a) {
  DenseLayer l;
  l.bias = VectorXd::Zero(weight.rows());
  l.has_bias = true;
  l.weight = std::move(weight);
  l.activation = a;
  return l;
}

// Hidden tanh layer with the given neuron directions (rows), output layer weights `head`.
Network TwoLayer(MatrixXd hidden, MatrixXd head, Loss loss, Activation a = Activation::kTanh) {
  Network net;
  net.loss = loss;
  net.layers.push_back(Layer(std::move(hidden), a));
  net.layers.push_back(Layer(std::move(head), Activation::kIdentity));
  return net;
}

// A network whose output is identically 0: random first layer, zero head.
Network ZeroOutput(Index d, Index k, Loss loss, std::mt19937_64& rng) {
  return TwoLayer(GaussianMatrix(6, d, rng) / std::sqrt(static_cast<double>(d)), MatrixXd::Zero(k, 6), loss);
}

// Small but statistically sound settings: B = 99 reaches alpha = 0.01 exactly.
ResidualFitOptions Fast() {
  ResidualFitOptions o;
  o.features = 128;
  o.permutations = 99;
  o.new_neurons = 2;
  o.neuron_starts = 4;
  o.threads = 2;
  o.seed = 3;
  return o;
}

VectorXd Teacher(const MatrixXd& x, const VectorXd& v, double scale) {
  return (scale * (x * v)).array().tanh().matrix();
}

VectorXd Unit(Index d, std::initializer_list<Index> axes) {
  VectorXd v = VectorXd::Zero(d);
  for (Index a : axes) v(a) = 1.0;
  return v.normalized();
}

double AngleDeg(const VectorXd& a, const VectorXd& b) {
  return std::acos(std::clamp(a.dot(b) / (a.norm() * b.norm()), -1.0, 1.0)) * 180.0 / kPi;
}

}  // namespace

TEST_CASE("residual-fit passes when the residual is pure noise", "[residual-fit]") {
  std::mt19937_64 rng(21);
  plaudit::model::Dataset data;
  data.x = GaussianMatrix(1000, 6, rng);
  data.y = GaussianMatrix(1000, 1, rng);  // independent of x: nothing to explain
  const Network net = ZeroOutput(6, 1, Loss::kSquared, rng);
  const auto r = RunResidualFit(net, data, 0.5, Fast());
  INFO(plaudit::checks::CheckResultToJson(r).dump());
  CHECK(r.name == "residual-fit");
  CHECK(r.status == Status::kPass);
  REQUIRE(r.p_value.has_value());
  CHECK(*r.p_value > 0.01);
  CHECK(r.statistic < 0.01);
  CHECK(r.detail["null_eta_a"].size() == 99);
  CHECK(r.detail["ridge_grid"].size() == 8);
}

TEST_CASE("residual-fit fails on a planted teacher the network does not fit", "[residual-fit]") {
  std::mt19937_64 rng(22);
  plaudit::model::Dataset data;
  data.x = GaussianMatrix(1000, 6, rng);
  const VectorXd w = Unit(6, {0, 1, 2});
  data.y = Teacher(data.x, w, 2.0) + 0.1 * GaussianMatrix(1000, 1, rng);
  const Network net = ZeroOutput(6, 1, Loss::kSquared, rng);
  const auto r = RunResidualFit(net, data, 0.5, Fast());
  INFO(plaudit::checks::CheckResultToJson(r).dump());
  CHECK(r.status == Status::kFail);
  CHECK(*r.p_value <= 0.01);
  // Noise variance 0.01 against a signal variance of about 0.6: nearly all of it is removable.
  CHECK(r.statistic > 0.8);
  CHECK(r.detail["eta_a"].get<double>() > 0.8);
  CHECK(r.detail["p_a"].get<double>() == Approx(0.01));  // 1 / (B + 1): no permutation comes close
  CHECK(r.detail["removable"].get<double>() == Approx(r.statistic * r.detail["current_loss"].get<double>()));
}

TEST_CASE("residual-fit finds the missing neuron of a one-direction residual", "[residual-fit]") {
  std::mt19937_64 rng(23);
  const Index d = 8;
  plaudit::model::Dataset data;
  data.x = GaussianMatrix(1500, d, rng);
  // The student has neurons along e0, e1, e2; the teacher adds one along v = (e4 + e5)/sqrt(2).
  MatrixXd hidden = MatrixXd::Zero(3, d);
  hidden(0, 0) = hidden(1, 1) = hidden(2, 2) = 1.5;
  MatrixXd head(1, 3);
  head << 1.0, -0.5, 0.8;
  const Network net = TwoLayer(hidden, head, Loss::kSquared);
  const VectorXd v = Unit(d, {4, 5});
  const MatrixXd student = (data.x * hidden.transpose()).array().tanh().matrix() * head.transpose();
  data.y = student + Teacher(data.x, v, 3.0) + 0.05 * GaussianMatrix(1500, 1, rng);
  const auto r = RunResidualFit(net, data, 0.5, Fast());
  INFO(plaudit::checks::CheckResultToJson(r).dump());
  CHECK(r.status == Status::kFail);
  CHECK(r.detail["eta_b"].get<double>() > 0.8);
  CHECK(r.detail["p_b"].get<double>() < 1e-6);
  const auto& best = r.detail["best_neuron"];
  VectorXd dir(d + 1);
  for (Index i = 0; i <= d; ++i) dir(i) = best["direction"][static_cast<std::size_t>(i)];
  CHECK(dir.norm() == Approx(1.0));
  // Standardised inputs are ~ the raw ones here (x ~ N(0, I)), so the teacher direction in
  // augmented coordinates is (v, 0) up to sampling error in mu and sd.
  VectorXd teacher(d + 1);
  teacher << v, 0.0;
  const double angle = std::min(AngleDeg(dir, teacher), AngleDeg(-dir, teacher));
  CHECK(angle < 10.0);
  CHECK(std::fabs(best["correlation"][0].get<double>()) > 0.9);
  // The existing neurons are orthogonal to v.
  CHECK(r.detail["best_neuron_angle_sign_free_deg"].get<double>() > 75.0);
  CHECK(r.detail["best_neuron_angle_deg"].get<double>() >= r.detail["best_neuron_angle_sign_free_deg"].get<double>());
}

TEST_CASE("residual-fit detects a planted signal under logistic loss", "[residual-fit]") {
  std::mt19937_64 rng(24);
  const Index n = 1200;
  plaudit::model::Dataset data;
  data.x = GaussianMatrix(n, 5, rng);
  const VectorXd logit = 3.0 * Teacher(data.x, Unit(5, {0, 3}), 2.0);
  std::uniform_real_distribution<double> u(0.0, 1.0);
  data.y.resize(n, 1);
  for (Index i = 0; i < n; ++i) data.y(i, 0) = u(rng) < 1.0 / (1.0 + std::exp(-logit(i))) ? 1.0 : 0.0;
  const Network net = ZeroOutput(5, 1, Loss::kLogistic, rng);
  const auto r = RunResidualFit(net, data, std::log(2.0), Fast());
  INFO(plaudit::checks::CheckResultToJson(r).dump());
  CHECK(r.status == Status::kFail);
  CHECK(*r.p_value <= 0.01);
  CHECK(r.detail["eta_a"].get<double>() > 0.2);
  CHECK(r.detail["p_a"].get<double>() <= 0.01);
}

TEST_CASE("residual-fit detects a planted signal under cross-entropy", "[residual-fit]") {
  std::mt19937_64 rng(25);
  const Index n = 1200;
  plaudit::model::Dataset data;
  data.x = GaussianMatrix(n, 5, rng);
  MatrixXd logits(n, 3);
  logits.col(0) = 3.0 * Teacher(data.x, Unit(5, {0}), 2.0);
  logits.col(1) = 3.0 * Teacher(data.x, Unit(5, {1, 2}), 2.0);
  logits.col(2).setZero();
  std::uniform_real_distribution<double> u(0.0, 1.0);
  data.y.resize(n, 1);
  for (Index i = 0; i < n; ++i) {
    const Eigen::RowVector3d p = logits.row(i).array().exp().matrix() / logits.row(i).array().exp().sum();
    const double draw = u(rng);
    data.y(i, 0) = draw < p(0) ? 0.0 : (draw < p(0) + p(1) ? 1.0 : 2.0);
  }
  const Network net = ZeroOutput(5, 3, Loss::kCrossEntropy, rng);
  const auto r = RunResidualFit(net, data, std::log(3.0), Fast());
  INFO(plaudit::checks::CheckResultToJson(r).dump());
  CHECK(r.status == Status::kFail);
  CHECK(*r.p_value <= 0.01);
  CHECK(r.detail["eta_a"].get<double>() > 0.2);
  CHECK(r.detail["step"].get<std::string>().find("line search") != std::string::npos);
}

TEST_CASE("residual-fit is deterministic for a seed and independent of the thread count", "[residual-fit]") {
  std::mt19937_64 rng(26);
  plaudit::model::Dataset data;
  data.x = GaussianMatrix(600, 4, rng);
  data.y = Teacher(data.x, Unit(4, {1}), 1.0) + 0.5 * GaussianMatrix(600, 1, rng);
  const Network net = ZeroOutput(4, 1, Loss::kSquared, rng);
  ResidualFitOptions o = Fast();
  o.threads = 1;
  const std::string one = plaudit::checks::CheckResultToJson(RunResidualFit(net, data, 0.5, o)).dump();
  o.threads = 2;
  const std::string two = plaudit::checks::CheckResultToJson(RunResidualFit(net, data, 0.5, o)).dump();
  const std::string again = plaudit::checks::CheckResultToJson(RunResidualFit(net, data, 0.5, o)).dump();
  CHECK(one == two);
  CHECK(two == again);
  o.seed = 4;
  CHECK(plaudit::checks::CheckResultToJson(RunResidualFit(net, data, 0.5, o)).dump() != two);
}

TEST_CASE("residual-fit skips when the inputs are too thin to judge", "[residual-fit]") {
  std::mt19937_64 rng(27);
  plaudit::model::Dataset data;
  data.x = GaussianMatrix(24, 3, rng);  // 5 folds need 25 rows
  data.y = GaussianMatrix(24, 1, rng);
  const Network net = ZeroOutput(3, 1, Loss::kSquared, rng);
  auto r = RunResidualFit(net, data, 0.5, Fast());
  CHECK(r.status == Status::kSkip);
  CHECK(r.detail["reason"].get<std::string>().find("24 rows") != std::string::npos);

  ResidualFitOptions few = Fast();
  few.permutations = 50;  // smallest p-value 1/51 > 0.01
  data.x = GaussianMatrix(200, 3, rng);
  data.y = GaussianMatrix(200, 1, rng);
  r = RunResidualFit(net, data, 0.5, few);
  CHECK(r.status == Status::kSkip);
  CHECK(r.message.find("cannot reach alpha") != std::string::npos);

  data.y.setZero();  // the zero-output network fits y = 0 exactly
  r = RunResidualFit(net, data, 0.5, Fast());
  CHECK(r.status == Status::kSkip);
  CHECK(r.message.find("current loss is 0") != std::string::npos);
}

TEST_CASE("residual-fit rejects bad options and mismatched data", "[residual-fit]") {
  std::mt19937_64 rng(28);
  plaudit::model::Dataset data;
  data.x = GaussianMatrix(100, 3, rng);
  data.y = GaussianMatrix(100, 1, rng);
  const Network net = ZeroOutput(3, 1, Loss::kSquared, rng);
  ResidualFitOptions o = Fast();
  std::string why;
  CHECK(o.IsValid(&why));
  o.folds = 1;
  CHECK_FALSE(o.IsValid(&why));
  CHECK(why == "folds = 1 must be >= 2");
  REQUIRE_THROWS_MATCHES(RunResidualFit(net, data, 0.5, o), plaudit::Error,
                         plaudit::testing::IsError(plaudit::ExitCode::kUsage, {"residual-fit", "folds"}));
  o = Fast();
  o.scale_max = 0.01;
  CHECK_FALSE(o.IsValid(&why));
  CHECK(why.find("scale_max") != std::string::npos);
  data.x = GaussianMatrix(100, 4, rng);
  REQUIRE_THROWS_MATCHES(RunResidualFit(net, data, 0.5, Fast()), plaudit::Error,
                         plaudit::testing::IsError(plaudit::ExitCode::kBadData, {"3 inputs"}));
}

TEST_CASE("residual-fit uses tanh units when the first layer is the identity", "[residual-fit]") {
  std::mt19937_64 rng(29);
  plaudit::model::Dataset data;
  data.x = GaussianMatrix(300, 3, rng);
  data.y = GaussianMatrix(300, 1, rng);
  const Network net = TwoLayer(GaussianMatrix(4, 3, rng), MatrixXd::Zero(1, 4), Loss::kSquared, Activation::kIdentity);
  const auto r = RunResidualFit(net, data, 0.5, Fast());
  CHECK(r.detail["activation"] == "tanh");
  CHECK(r.detail.contains("activation_note"));
}

TEST_CASE("Student t upper tail matches its closed forms", "[residual-fit]") {
  using plaudit::checks::StudentTUpperTail;
  for (double t : {-2.0, 0.0, 0.5, 1.0, 3.0, 12.0}) {
    // dof = 1 is the Cauchy law: P(T > t) = 1/2 - atan(t)/pi.
    CHECK(StudentTUpperTail(t, 1.0) == Approx(0.5 - std::atan(t) / kPi).margin(1e-12));
    // dof = 2: P(T > t) = 1/2 - t / (2 sqrt(2 + t^2)).
    CHECK(StudentTUpperTail(t, 2.0) == Approx(0.5 - t / (2.0 * std::sqrt(2.0 + t * t))).margin(1e-12));
    // dof -> infinity: the normal tail erfc(t / sqrt 2) / 2.
    CHECK(StudentTUpperTail(t, 1e7) == Approx(0.5 * std::erfc(t / std::sqrt(2.0))).margin(1e-6));
  }
}
