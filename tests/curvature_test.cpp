// Lanczos extreme eigenvalues, Hessian-vector products of the full-batch loss, and check
// `curvature`. Outside references:
//   - Eigen's dense SelfAdjointEigenSolver on explicit symmetric matrices and on Hessians
//     assembled column by column from central differences of exact gradients (model::Evaluate,
//     itself checked against PyTorch autograd in network_torch_test.cpp);
//   - PyTorch's torch.autograd.functional.hessian and torch.linalg.eigvalsh (float64) on fixed
//     small networks: tests/fixtures/hessian/*.json from tests/reference/make_hessian_reference.py;
//   - a closed form: at the origin of a two-layer mean-field tanh network without output bias
//     the Hessian's spectrum is +-||E[y (x, 1)]|| / n and zeros (derived in that script, and
//     asserted there against torch);
//   - training itself: a small-initialisation run cut in its first plateau is at a saddle
//     because continuing the same gradient descent lowers the loss by far more than the
//     check's minimum decrease.
#include <algorithm>
#include <cmath>
#include <fstream>
#include <random>
#include <stdexcept>
#include <string>
#include <vector>

#include <Eigen/Eigenvalues>
#include <catch2/catch.hpp>
#include <nlohmann/json.hpp>

#include "plaudit/checks/curvature.h"
#include "plaudit/core/error.h"
#include "plaudit/model/dataset.h"
#include "plaudit/model/evaluate.h"
#include "plaudit/model/hessian.h"
#include "plaudit/model/network.h"
#include "plaudit/stats/lanczos.h"
#include "plaudit/train/teacher.h"
#include "plaudit/train/trainer.h"
#include "support/error_matcher.h"

namespace {

using plaudit::ExitCode;
using plaudit::checks::CurvatureOptions;
using plaudit::checks::RunCurvature;
using plaudit::checks::Status;
using plaudit::model::Activation;
using plaudit::model::Dataset;
using plaudit::model::HessianMethod;
using plaudit::model::HessianOptions;
using plaudit::model::Loss;
using plaudit::model::LossHessian;
using plaudit::model::Network;
using plaudit::stats::LanczosExtremes;
using plaudit::stats::LanczosOptions;
using plaudit::testing::IsError;

Eigen::MatrixXd RandomOrthogonal(Eigen::Index n, std::mt19937_64& rng) {
  std::normal_distribution<double> normal;
  Eigen::MatrixXd g(n, n);
  for (Eigen::Index i = 0; i < g.size(); ++i) g.data()[i] = normal(rng);
  return Eigen::HouseholderQR<Eigen::MatrixXd>(g).householderQ();
}

// Q diag(values) Q^T with a seeded random orthogonal Q.
Eigen::MatrixXd WithSpectrum(const Eigen::VectorXd& values, std::uint64_t seed) {
  std::mt19937_64 rng(seed);
  const Eigen::MatrixXd q = RandomOrthogonal(values.size(), rng);
  return q * values.asDiagonal() * q.transpose();
}

plaudit::stats::SymmetricOperator MatrixOperator(const Eigen::MatrixXd& a) {
  return [&a](const Eigen::VectorXd& in, Eigen::VectorXd& out) { out.noalias() = a * in; };
}

// The operator's matrix, column j = H e_j.
Eigen::MatrixXd OperatorMatrix(LossHessian& h) {
  const Eigen::Index p = h.size();
  Eigen::MatrixXd m(p, p);
  Eigen::VectorXd e = Eigen::VectorXd::Zero(p), col;
  for (Eigen::Index j = 0; j < p; ++j) {
    e(j) = 1.0;
    h.Apply(e, col);
    m.col(j) = col;
    e(j) = 0.0;
  }
  return m;
}

// The Hessian assembled from central differences of exact full-batch gradients, one parameter
// at a time, then symmetrised: column j = (g(theta + h e_j) - g(theta - h e_j)) / (2h).
Eigen::MatrixXd DifferenceHessian(const Network& net, const Dataset& data, const std::vector<int>& layers0,
                                  double h = 1e-5) {
  const auto layout = plaudit::model::MakeParameterLayout(net, layers0);
  plaudit::model::EvalOptions eo;
  eo.lowest_grad_layer = layout.lowest_layer();
  Eigen::MatrixXd m(layout.size, layout.size);
  Eigen::VectorXd e = Eigen::VectorXd::Zero(layout.size);
  for (Eigen::Index j = 0; j < layout.size; ++j) {
    e(j) = 1.0;
    Network plus = net, minus = net;
    plaudit::model::AddToParameters(layout, e, h, plus);
    plaudit::model::AddToParameters(layout, e, -h, minus);
    m.col(j) = (plaudit::model::GatherGradient(plaudit::model::Evaluate(plus, data, eo), layout) -
                plaudit::model::GatherGradient(plaudit::model::Evaluate(minus, data, eo), layout)) /
               (2.0 * h);
    e(j) = 0.0;
  }
  return 0.5 * (m + m.transpose());
}

double MaxAbs(const Eigen::MatrixXd& m) { return m.cwiseAbs().maxCoeff(); }

// A small network in code: widths d -> hidden... -> k, weights N(0, 1.3^2 / fan_in) (standard) or
// N(0, 1.3^2) (mean-field, where the next multiplier averages), biases N(0, 0.25).
Network SmallNetwork(const std::vector<Eigen::Index>& widths, Activation act, Loss loss, bool mean_field,
                     std::uint64_t seed, bool output_bias = false) {
  std::mt19937_64 rng(seed);
  std::normal_distribution<double> normal;
  Network net;
  net.loss = loss;
  for (std::size_t l = 0; l + 1 < widths.size(); ++l) {
    plaudit::model::DenseLayer layer;
    const bool last = l + 2 == widths.size();
    layer.multiplier = mean_field && l > 0 ? 1.0 / static_cast<double>(widths[l]) : 1.0;
    const double sd = 1.3 * (layer.multiplier == 1.0 ? 1.0 / std::sqrt(static_cast<double>(widths[l])) : 1.0);
    layer.weight.resize(widths[l + 1], widths[l]);
    for (Eigen::Index i = 0; i < layer.weight.size(); ++i) layer.weight.data()[i] = sd * normal(rng);
    layer.has_bias = !last || output_bias;
    layer.bias = Eigen::VectorXd::Zero(widths[l + 1]);
    if (layer.has_bias) {
      for (Eigen::Index i = 0; i < layer.bias.size(); ++i) layer.bias(i) = 0.5 * normal(rng);
    }
    layer.activation = last ? Activation::kIdentity : act;
    net.layers.push_back(layer);
  }
  return net;
}

Dataset SmallData(Eigen::Index rows, Eigen::Index dim, Loss loss, Eigen::Index k, std::uint64_t seed) {
  std::mt19937_64 rng(seed);
  std::normal_distribution<double> normal;
  Dataset d;
  d.x.resize(rows, dim);
  for (Eigen::Index i = 0; i < d.x.size(); ++i) d.x.data()[i] = normal(rng);
  if (loss == Loss::kSquared) {
    d.y.resize(rows, k);
    for (Eigen::Index i = 0; i < d.y.size(); ++i) d.y.data()[i] = normal(rng);
    d.y.col(0) += 0.8 * d.x.col(0);
  } else {
    d.y.resize(rows, 1);
    for (Eigen::Index i = 0; i < rows; ++i) {
      d.y(i, 0) = loss == Loss::kCrossEntropy ? static_cast<double>(i % k) : (d.x(i, 0) + normal(rng) > 0 ? 1.0 : 0.0);
    }
  }
  return d;
}

// ---- PyTorch fixtures ----

struct TorchCase {
  std::string name;
  Network net;
  Dataset data;
  std::vector<int> chosen;  // 0-based
  Eigen::MatrixXd hessian;
  Eigen::VectorXd eigenvalues;
  double loss = 0.0;
  nlohmann::json raw;
};

Eigen::MatrixXd Matrix(const nlohmann::json& rows) {
  Eigen::MatrixXd m(static_cast<Eigen::Index>(rows.size()), static_cast<Eigen::Index>(rows.at(0).size()));
  for (Eigen::Index i = 0; i < m.rows(); ++i) {
    for (Eigen::Index j = 0; j < m.cols(); ++j) m(i, j) = rows.at(static_cast<std::size_t>(i)).at(static_cast<std::size_t>(j));
  }
  return m;
}

TorchCase LoadTorchCase(const std::string& name) {
  std::ifstream in(std::string(PLAUDIT_FIXTURES) + "/hessian/" + name + ".json");
  REQUIRE(in.good());
  TorchCase c;
  c.name = name;
  c.raw = nlohmann::json::parse(in);
  c.net.loss = *plaudit::model::LossFromString(c.raw["loss"].get<std::string>());
  int l = 0;
  for (const auto& spec : c.raw["layers"]) {
    plaudit::model::DenseLayer layer;
    layer.weight = Matrix(spec["weight"]);
    layer.has_bias = !spec["bias"].is_null();
    layer.bias = Eigen::VectorXd::Zero(layer.weight.rows());
    if (layer.has_bias) {
      for (Eigen::Index i = 0; i < layer.bias.size(); ++i) layer.bias(i) = spec["bias"][static_cast<std::size_t>(i)];
    }
    layer.activation = *plaudit::model::ActivationFromString(spec["activation"].get<std::string>());
    layer.multiplier = spec["multiplier"];
    if (spec["chosen"].get<bool>()) c.chosen.push_back(l);
    c.net.layers.push_back(layer);
    ++l;
  }
  c.data.x = Matrix(c.raw["x"]);
  c.data.y = Matrix(c.raw["y"]);
  c.hessian = Matrix(c.raw["hessian"]);
  const auto& eig = c.raw["eigenvalues"];
  c.eigenvalues.resize(static_cast<Eigen::Index>(eig.size()));
  for (Eigen::Index i = 0; i < c.eigenvalues.size(); ++i) c.eigenvalues(i) = eig[static_cast<std::size_t>(i)];
  c.loss = c.raw["loss_value"];
  return c;
}

const std::vector<std::string> kTorchCases = {
    "mf-squared-tanh",        "std-squared-softplus",   "mf-squared-softplus",       "std-squared-tanh",
    "std-cross-entropy-tanh", "mf-logistic-gelu-upper", "std-squared-sigmoid-first", "mf-squared-tanh-origin"};

}  // namespace

// ---------------------------------------------------------------- Lanczos

TEST_CASE("Lanczos run to the dimension reproduces Eigen's extreme eigenvalues", "[lanczos]") {
  // A random symmetric (GOE-like) matrix: (G + G^T) / 2 with N(0, 1) entries.
  std::mt19937_64 rng(5);
  std::normal_distribution<double> normal;
  const Eigen::Index n = 60;
  Eigen::MatrixXd g(n, n);
  for (Eigen::Index i = 0; i < g.size(); ++i) g.data()[i] = normal(rng);
  const Eigen::MatrixXd a = 0.5 * (g + g.transpose());
  const Eigen::SelfAdjointEigenSolver<Eigen::MatrixXd> ref(a);
  LanczosOptions o;
  o.max_iterations = 200;  // capped at n
  o.seed = 3;
  const auto r = LanczosExtremes(MatrixOperator(a), n, o);
  const double scale = ref.eigenvalues().cwiseAbs().maxCoeff();
  CHECK(r.converged);
  CHECK(r.iterations <= n);
  CHECK(r.applications == r.iterations);
  CHECK(std::abs(r.min - ref.eigenvalues()(0)) <= 1e-10 * scale);
  CHECK(std::abs(r.max - ref.eigenvalues()(n - 1)) <= 1e-10 * scale);
  // The Ritz vector is the eigenvector of the smallest eigenvalue, up to sign.
  CHECK(std::abs(r.min_vector.dot(ref.eigenvectors().col(0))) == Approx(1.0).margin(1e-8));
  CHECK(r.min_vector.norm() == Approx(1.0).margin(1e-12));
  CHECK((a * r.min_vector - r.min * r.min_vector).norm() <= 1e-8 * scale);
}

TEST_CASE("Lanczos converges on isolated extremes long before the dimension", "[lanczos]") {
  // 400 x 400: an isolated negative eigenvalue -3, a bulk uniform on [0, 1] and a top of 10, the
  // shape of a network Hessian at a saddle. Eigenvalue gaps this large converge in tens of steps.
  Eigen::VectorXd values = Eigen::VectorXd::LinSpaced(400, 0.0, 1.0);
  values(0) = -3.0;
  values(399) = 10.0;
  const Eigen::MatrixXd a = WithSpectrum(values, 9);
  const Eigen::SelfAdjointEigenSolver<Eigen::MatrixXd> ref(a);
  LanczosOptions o;
  o.max_iterations = 60;
  o.tolerance = 1e-8;
  const auto r = LanczosExtremes(MatrixOperator(a), a.rows(), o);
  CHECK(r.converged);
  CHECK_FALSE(r.invariant_subspace);
  CHECK(r.iterations < 60);
  CHECK(r.min == Approx(ref.eigenvalues()(0)).epsilon(1e-8));
  CHECK(r.max == Approx(ref.eigenvalues()(399)).epsilon(1e-8));
  // The reported residual bounds the distance to an eigenvalue (Golub & Van Loan, Thm 8.1.13 / Lanczos).
  CHECK(std::abs(r.min - ref.eigenvalues()(0)) <= r.min_residual + 1e-12);
  CHECK(std::abs(r.min_vector.dot(ref.eigenvectors().col(0))) == Approx(1.0).margin(1e-6));
}

TEST_CASE("Lanczos Ritz values stay inside the spectrum when not converged", "[lanczos]") {
  // Cauchy interlacing: the Ritz values of Q^T A Q lie in [lambda_min(A), lambda_max(A)].
  Eigen::VectorXd values = Eigen::VectorXd::LinSpaced(300, -1.0, 2.0);
  const Eigen::MatrixXd a = WithSpectrum(values, 4);
  const Eigen::SelfAdjointEigenSolver<Eigen::MatrixXd> ref(a);
  for (int iterations : {2, 5, 12}) {
    INFO("iterations " << iterations);
    LanczosOptions o;
    o.max_iterations = iterations;
    o.tolerance = 1e-12;
    const auto r = LanczosExtremes(MatrixOperator(a), a.rows(), o);
    CHECK_FALSE(r.converged);
    CHECK(r.iterations == iterations);
    CHECK(r.min >= ref.eigenvalues()(0) - 1e-12);
    CHECK(r.max <= ref.eigenvalues()(299) + 1e-12);
    // Its Rayleigh quotient is the Ritz value itself.
    CHECK(r.min_vector.dot(a * r.min_vector) == Approx(r.min).margin(1e-12));
  }
}

TEST_CASE("Lanczos stops at an invariant subspace with exact extremes for repeated eigenvalues", "[lanczos]") {
  // Three distinct eigenvalues, each repeated: the Krylov space of a random start has dimension 3.
  Eigen::VectorXd values(30);
  values << Eigen::VectorXd::Constant(5, -1.5), Eigen::VectorXd::Zero(20), Eigen::VectorXd::Constant(5, 2.0);
  const Eigen::MatrixXd a = WithSpectrum(values, 2);
  const auto r = LanczosExtremes(MatrixOperator(a), a.rows(), {});
  CHECK(r.invariant_subspace);
  CHECK(r.converged);
  CHECK(r.iterations == 3);
  CHECK(r.min == Approx(-1.5).epsilon(1e-12));
  CHECK(r.max == Approx(2.0).epsilon(1e-12));
  CHECK((a * r.min_vector + 1.5 * r.min_vector).norm() <= 1e-10);
}

TEST_CASE("Lanczos is deterministic in its seed and rejects bad options", "[lanczos]") {
  const Eigen::MatrixXd a = WithSpectrum(Eigen::VectorXd::LinSpaced(50, -2.0, 3.0), 1);
  LanczosOptions o;
  o.max_iterations = 8;
  o.seed = 17;
  const auto r1 = LanczosExtremes(MatrixOperator(a), 50, o);
  const auto r2 = LanczosExtremes(MatrixOperator(a), 50, o);
  CHECK(r1.min == r2.min);
  CHECK(r1.min_vector == r2.min_vector);
  o.seed = 18;
  CHECK(LanczosExtremes(MatrixOperator(a), 50, o).min != r1.min);
  LanczosOptions bad;
  bad.max_iterations = 0;
  CHECK_THROWS_AS(LanczosExtremes(MatrixOperator(a), 50, bad), std::invalid_argument);
  bad = {};
  bad.tolerance = 0.0;
  CHECK_THROWS_AS(LanczosExtremes(MatrixOperator(a), 50, bad), std::invalid_argument);
  CHECK_THROWS_AS(LanczosExtremes(MatrixOperator(a), 0, {}), std::invalid_argument);
}

// ---------------------------------------------------------------- Hessian-vector products

TEST_CASE("Hessian-vector products match the Hessian assembled from differences of exact gradients",
          "[hessian]") {
  struct Case {
    const char* name;
    std::vector<Eigen::Index> widths;
    Activation act;
    Loss loss;
    bool mean_field;
    std::vector<int> layers0;
    bool output_bias;
  };
  const std::vector<Case> cases = {
      {"mf tanh squared, all", {3, 6, 1}, Activation::kTanh, Loss::kSquared, true, {0, 1}, false},
      {"std softplus squared, 3 layers", {3, 5, 4, 2}, Activation::kSoftplus, Loss::kSquared, false, {0, 1, 2}, true},
      {"mf gelu cross-entropy, upper", {4, 5, 4, 3}, Activation::kGelu, Loss::kCrossEntropy, true, {1, 2}, true},
      {"std sigmoid logistic, middle", {3, 4, 5, 1}, Activation::kSigmoid, Loss::kLogistic, false, {1}, false},
      {"mf tanh squared, first and last", {3, 4, 4, 1}, Activation::kTanh, Loss::kSquared, true, {0, 2}, false},
  };
  std::uint64_t seed = 40;
  for (const Case& c : cases) {
    INFO(c.name);
    const Network net = SmallNetwork(c.widths, c.act, c.loss, c.mean_field, ++seed, c.output_bias);
    const Dataset data = SmallData(37, c.widths.front(), c.loss, c.widths.back(), ++seed);
    const Eigen::MatrixXd fd = DifferenceHessian(net, data, c.layers0);
    HessianOptions ho;
    ho.block_rows = 10;  // several blocks, one partial
    LossHessian exact(net, data, c.layers0, ho);
    const Eigen::MatrixXd ours = OperatorMatrix(exact);
    // Central differences with h = 1e-5 on O(1) parameters: truncation ~ h^2 = 1e-10 relative.
    CHECK(MaxAbs(ours - fd) <= 1e-7 * MaxAbs(fd));
    CHECK(MaxAbs(ours - ours.transpose()) <= 1e-12 * MaxAbs(ours));
    CHECK(exact.products() == exact.size());
    CHECK(exact.gradient_evaluations() == 1);

    ho.method = HessianMethod::kCentralDifference;
    LossHessian diff(net, data, c.layers0, ho);
    const Eigen::MatrixXd diff_m = OperatorMatrix(diff);
    CHECK(MaxAbs(diff_m - fd) <= 1e-6 * MaxAbs(fd));
    CHECK(diff.gradient_evaluations() == 1 + 2 * diff.size());

    const Eigen::SelfAdjointEigenSolver<Eigen::MatrixXd> ref(fd);
    LanczosOptions lo;
    lo.max_iterations = static_cast<int>(exact.size());
    const auto r = LanczosExtremes([&](const Eigen::VectorXd& in, Eigen::VectorXd& out) { exact.Apply(in, out); },
                                   exact.size(), lo);
    const double scale = ref.eigenvalues().cwiseAbs().maxCoeff();
    CHECK(std::abs(r.min - ref.eigenvalues()(0)) <= 1e-7 * scale);
    CHECK(std::abs(r.max - ref.eigenvalues()(ref.eigenvalues().size() - 1)) <= 1e-7 * scale);
  }
}

TEST_CASE("Hessian and its extreme eigenvalues agree with PyTorch autograd", "[hessian][torch]") {
  for (const auto& name : kTorchCases) {
    INFO("case " << name);
    const TorchCase c = LoadTorchCase(name);
    LossHessian h(c.net, c.data, c.chosen);
    REQUIRE(h.size() == c.hessian.rows());
    CHECK(h.loss() == Approx(c.loss).epsilon(1e-12));
    const Eigen::MatrixXd ours = OperatorMatrix(h);
    // Both in float64 with different summation orders: agreement to rounding of the largest terms.
    CHECK(MaxAbs(ours - c.hessian) <= 1e-11 * MaxAbs(c.hessian));
    const double scale = c.eigenvalues.cwiseAbs().maxCoeff();
    LanczosOptions lo;
    lo.max_iterations = static_cast<int>(h.size());
    const auto r = LanczosExtremes([&](const Eigen::VectorXd& in, Eigen::VectorXd& out) { h.Apply(in, out); },
                                   h.size(), lo);
    CHECK(std::abs(r.min - c.raw["lambda_min"].get<double>()) <= 1e-10 * scale);
    CHECK(std::abs(r.max - c.raw["lambda_max"].get<double>()) <= 1e-10 * scale);

    HessianOptions fo;
    fo.method = HessianMethod::kCentralDifference;
    LossHessian fd(c.net, c.data, c.chosen, fo);
    const auto rf = LanczosExtremes([&](const Eigen::VectorXd& in, Eigen::VectorXd& out) { fd.Apply(in, out); },
                                    fd.size(), lo);
    CHECK(std::abs(rf.min - c.raw["lambda_min"].get<double>()) <= 1e-6 * scale);
    CHECK(std::abs(rf.max - c.raw["lambda_max"].get<double>()) <= 1e-6 * scale);
  }
}

TEST_CASE("parameter layout: column-major weights then bias, layer by layer", "[hessian]") {
  const Network net = SmallNetwork({2, 3, 1}, Activation::kTanh, Loss::kSquared, false, 3);
  const auto layout = plaudit::model::MakeParameterLayout(net, {1, 0, 1});
  REQUIRE(layout.blocks.size() == 2);
  CHECK(layout.size == 2 * 3 + 3 + 3);
  CHECK(layout.blocks[0].bias_offset == 6);
  CHECK(layout.blocks[1].weight_offset == 9);
  CHECK(layout.blocks[1].bias_offset == -1);  // the output layer has no bias
  const Eigen::VectorXd theta = plaudit::model::GatherParameters(net, layout);
  CHECK(theta(1) == net.layers[0].weight(1, 0));  // (i, j) at j * n_out + i
  CHECK(theta(3) == net.layers[0].weight(0, 1));
  CHECK(theta(7) == net.layers[0].bias(1));
  CHECK(theta(10) == net.layers[1].weight(0, 1));
  CHECK_THROWS_MATCHES(plaudit::model::MakeParameterLayout(net, {2}), plaudit::Error,
                       IsError(ExitCode::kUsage, {"out of range"}));
  CHECK_THROWS_MATCHES(plaudit::model::MakeParameterLayout(net, {}), plaudit::Error, IsError(ExitCode::kUsage));
}

// ---------------------------------------------------------------- check `curvature`

namespace {

// Two-layer mean-field tanh student of width n with every parameter zero (no output bias), on
// two-layer tanh teacher data: the origin is a stationary point (tanh(0) = 0 kills every
// first-order term) and a strict saddle whenever E[y (x, 1)] != 0.
struct OriginSaddle {
  Network net;
  Dataset data;
  double baseline = 0.0;
  double closed_form = 0.0;  // ||E[y (x, 1)]|| / n
};

OriginSaddle MakeOriginSaddle(Eigen::Index n) {
  plaudit::train::TeacherOptions t;
  t.kind = plaudit::train::TeacherKind::kTwoLayer;
  t.activation = Activation::kTanh;
  t.dim = 5;
  t.width = 3;
  t.rows = 400;
  t.noise = 0.1;
  t.seed = 8;
  OriginSaddle s;
  s.data = plaudit::train::MakeTeacherData(t).data;
  s.net.loss = Loss::kSquared;
  plaudit::model::DenseLayer hidden;
  hidden.weight = Eigen::MatrixXd::Zero(n, t.dim);
  hidden.bias = Eigen::VectorXd::Zero(n);
  hidden.has_bias = true;
  hidden.activation = Activation::kTanh;
  plaudit::model::DenseLayer out;
  out.weight = Eigen::MatrixXd::Zero(1, n);
  out.bias = Eigen::VectorXd::Zero(1);
  out.multiplier = 1.0 / static_cast<double>(n);
  s.net.layers = {hidden, out};
  s.baseline = plaudit::model::ConstantBaselineLoss(s.data, Loss::kSquared, 1);
  Eigen::VectorXd c(t.dim + 1);
  c.head(t.dim) = (s.data.x.array().colwise() * s.data.y.col(0).array()).colwise().mean().transpose();
  c(t.dim) = s.data.y.mean();
  s.closed_form = c.norm() / static_cast<double>(n);
  return s;
}

}  // namespace

TEST_CASE("curvature fails at the origin saddle of a two-layer tanh network", "[curvature]") {
  const OriginSaddle s = MakeOriginSaddle(16);
  for (HessianMethod method : {HessianMethod::kExact, HessianMethod::kCentralDifference}) {
    INFO("method " << plaudit::model::HessianMethodToString(method));
    CurvatureOptions o;
    o.method = method;
    o.seed = 4;
    const auto r = RunCurvature(s.net, s.data, s.baseline, o);
    INFO(r.message);
    REQUIRE(r.status == Status::kFail);
    const auto& d = r.detail;
    // Spectrum {-c, 0, +c}: three distinct values, so Lanczos ends in an invariant subspace.
    CHECK(d["lambda_min"].get<double>() == Approx(-s.closed_form).epsilon(1e-8));
    CHECK(d["lambda_max"].get<double>() == Approx(s.closed_form).epsilon(1e-8));
    CHECK(r.statistic == Approx(-1.0).epsilon(1e-8));
    CHECK(r.threshold == -1e-3);
    CHECK(d["converged"].get<bool>());
    CHECK(d["iterations"].get<int>() <= 4);
    CHECK(d["saddle"].get<bool>());
    const double achieved = d["escape"]["actual_decrease"];
    CHECK(achieved >= 1e-4 * s.baseline);
    // At the first step tried the quadratic model predicts exactly 1e-4 L0; the decrease found
    // comes from a step where the model still holds to within a factor of two.
    const double predicted = d["escape"]["predicted_decrease"];
    CHECK(achieved >= 0.5 * predicted);
    CHECK(achieved <= 2.0 * predicted);
    CHECK(d["escape"]["gradient_along"].get<double>() == Approx(0.0).margin(1e-12));
    // The eigenvector of -c pairs each output weight a_j with its unit's (w_j, b_j): half the
    // mass in each layer.
    const double m1 = d["eigenvector_mass"][0]["weight"].get<double>() + d["eigenvector_mass"][0]["bias"].get<double>();
    const double m2 = d["eigenvector_mass"][1]["weight"].get<double>();
    CHECK(m1 == Approx(0.5).margin(1e-8));
    CHECK(m2 == Approx(0.5).margin(1e-8));
    CHECK(d["hessian_vector_products"].get<int>() == d["iterations"].get<int>());
    CHECK(d.contains("seconds"));
  }
}

TEST_CASE("curvature at the torch origin fixture reproduces autograd's eigenvalues", "[curvature][torch]") {
  const TorchCase c = LoadTorchCase("mf-squared-tanh-origin");
  const double baseline = plaudit::model::ConstantBaselineLoss(c.data, Loss::kSquared, 1);
  const auto r = RunCurvature(c.net, c.data, baseline, {});
  INFO(r.message);
  CHECK(r.status == Status::kFail);
  CHECK(r.detail["lambda_min"].get<double>() == Approx(c.raw["lambda_min"].get<double>()).epsilon(1e-9));
  CHECK(r.detail["lambda_max"].get<double>() == Approx(c.raw["lambda_max"].get<double>()).epsilon(1e-9));
  CHECK(r.detail["lambda_min"].get<double>() ==
        Approx(-c.raw["closed_form_abs_eigenvalue"].get<double>()).epsilon(1e-9));
}

TEST_CASE("curvature finds the saddle of a small-initialisation run cut in its first plateau", "[curvature]") {
  plaudit::train::TeacherOptions t;
  t.kind = plaudit::train::TeacherKind::kTwoLayer;
  t.activation = Activation::kTanh;
  t.dim = 6;
  t.width = 3;
  t.rows = 500;
  t.noise = 0.05;
  t.seed = 31;
  const Dataset data = plaudit::train::MakeTeacherData(t).data;
  const double baseline = plaudit::model::ConstantBaselineLoss(data, Loss::kSquared, 1);
  plaudit::train::TrainOptions o;
  o.widths = {24};
  o.activation = Activation::kTanh;
  o.parameterization = plaudit::io::Parameterization::kMeanField;
  o.init.scale = 1e-6;  // start next to the origin saddle
  o.lr = 0.2;
  std::mt19937_64 rng(12);
  Network net = plaudit::train::InitialNetwork(o, data.dim(), 1, rng);
  plaudit::train::Descent descent(data, o, 1);
  double start_loss = descent.FullBatch(net, false).loss;
  for (int step = 0; step < 40; ++step) descent.Apply(net, descent.NextGradient(net));
  const double cut_loss = descent.FullBatch(net, false).loss;
  INFO("loss at start " << start_loss << ", at the cut " << cut_loss << ", L0 " << baseline);
  REQUIRE(cut_loss >= 0.999 * start_loss);  // still on the plateau

  const auto r = RunCurvature(net, data, baseline, {});
  INFO(r.message);
  CHECK(r.status == Status::kFail);
  CHECK(r.detail["lambda_min"].get<double>() < 0.0);
  CHECK(r.statistic < -0.1);

  // Ground truth: the same descent, continued, leaves the plateau.
  for (int step = 0; step < 600; ++step) descent.Apply(net, descent.NextGradient(net));
  const double later = descent.FullBatch(net, false).loss;
  INFO("loss 600 steps later " << later);
  CHECK(cut_loss - later >= 100.0 * 1e-4 * baseline);
}

TEST_CASE("curvature passes at a converged teacher-student minimum", "[curvature]") {
  // Student = the teacher's architecture (two-layer tanh, standard parameterization, output
  // weights trained), started at the teacher and run to a stationary point of the noisy loss.
  plaudit::train::TeacherOptions t;
  t.kind = plaudit::train::TeacherKind::kTwoLayer;
  t.activation = Activation::kTanh;
  t.dim = 4;
  t.width = 3;
  t.rows = 300;
  t.noise = 0.2;
  t.seed = 5;
  const auto td = plaudit::train::MakeTeacherData(t);
  const double baseline = plaudit::model::ConstantBaselineLoss(td.data, Loss::kSquared, 1);
  plaudit::train::TrainOptions o;
  o.widths = {3};
  o.activation = Activation::kTanh;
  o.parameterization = plaudit::io::Parameterization::kStandard;
  o.hidden_bias = false;
  o.lr = 0.3;
  Network net = td.teacher;
  plaudit::train::Descent descent(td.data, o, 1);
  double grad_norm = 1.0;
  for (int step = 0; step < 20000 && grad_norm > 1e-10; ++step) {
    const auto ev = descent.NextGradient(net);
    grad_norm = descent.ScaledGradNorm(net, ev);
    descent.Apply(net, ev);
  }
  INFO("gradient norm " << grad_norm);
  REQUIRE(grad_norm <= 1e-8);

  const auto r = RunCurvature(net, td.data, baseline, {});
  INFO(r.message);
  CHECK(r.status == Status::kPass);
  CHECK(r.statistic >= -1e-3);
  CHECK(r.detail["converged"].get<bool>());  // 15 parameters: Lanczos spans them all
  // Eigen's solver on the assembled Hessian agrees that this is a minimum.
  const Eigen::MatrixXd fd = DifferenceHessian(net, td.data, {0, 1});
  const Eigen::SelfAdjointEigenSolver<Eigen::MatrixXd> ref(fd);
  CHECK(ref.eigenvalues()(0) > 0.0);
  CHECK(r.detail["lambda_min"].get<double>() == Approx(ref.eigenvalues()(0)).margin(1e-7 * ref.eigenvalues().maxCoeff()));
}

TEST_CASE("curvature: weak or local negative curvature does not fail", "[curvature]") {
  // The origin saddle again, but with the minimum decrease set above what the whole direction
  // can give (the loss cannot fall below 0, so no step lowers it by 2 L0).
  const OriginSaddle s = MakeOriginSaddle(8);
  CurvatureOptions o;
  o.min_decrease_rel = 2.0;
  auto r = RunCurvature(s.net, s.data, s.baseline, o);
  INFO(r.message);
  CHECK(r.status == Status::kPass);
  CHECK(r.detail["negative_curvature"].get<bool>());
  CHECK_FALSE(r.detail["saddle"].get<bool>());
  // And with the ratio threshold above |lambda_min| / lambda_max = 1.
  o = {};
  o.threshold = 1.5;
  r = RunCurvature(s.net, s.data, s.baseline, o);
  CHECK(r.status == Status::kPass);
  CHECK_FALSE(r.detail["negative_curvature"].get<bool>());
}

TEST_CASE("curvature skips and rejects with reasons", "[curvature]") {
  const OriginSaddle s = MakeOriginSaddle(8);
  CurvatureOptions o;
  o.max_parameters = 10;
  auto r = RunCurvature(s.net, s.data, s.baseline, o);
  CHECK(r.status == Status::kSkip);
  CHECK(r.detail["reason"].get<std::string>().find("max_parameters") != std::string::npos);
  CHECK(r.detail["parameters"] == 8 * 5 + 8 + 8);

  o = {};
  o.layers = {2};
  r = RunCurvature(s.net, s.data, s.baseline, o);
  CHECK(r.detail["parameters"] == 8);
  CHECK(r.detail["layers"] == nlohmann::json::array({2}));

  Network frozen = s.net;
  for (auto& l : frozen.layers) l.trainable = false;
  r = RunCurvature(frozen, s.data, s.baseline, {});
  CHECK(r.status == Status::kSkip);
  CHECK(r.message.find("held fixed") != std::string::npos);

  CHECK(RunCurvature(s.net, s.data, 0.0, {}).status == Status::kSkip);

  o = {};
  o.layers = {3};
  CHECK_THROWS_MATCHES(RunCurvature(s.net, s.data, s.baseline, o), plaudit::Error,
                       IsError(ExitCode::kUsage, {"curvature", "layer 3 out of range"}));
  o = {};
  o.max_iterations = 1;
  CHECK_THROWS_MATCHES(RunCurvature(s.net, s.data, s.baseline, o), plaudit::Error,
                       IsError(ExitCode::kUsage, {"max_iterations"}));
  std::string why;
  o = {};
  o.min_decrease_rel = 0.0;
  CHECK_FALSE(o.IsValid(&why));
  CHECK(why.find("min_decrease_rel") != std::string::npos);
  CHECK_THROWS_MATCHES(RunCurvature(s.net, s.data, -1.0, {}), plaudit::Error, IsError(ExitCode::kBadData));
  Dataset wide = s.data;
  wide.x.conservativeResize(Eigen::NoChange, 6);
  CHECK_THROWS_MATCHES(RunCurvature(s.net, wide, s.baseline, {}), plaudit::Error,
                       IsError(ExitCode::kBadData, {"6 columns"}));
}

TEST_CASE("curvature is deterministic apart from its timings", "[curvature]") {
  const OriginSaddle s = MakeOriginSaddle(8);
  CurvatureOptions o;
  o.record_seconds = false;
  const auto a = RunCurvature(s.net, s.data, s.baseline, o);
  const auto b = RunCurvature(s.net, s.data, s.baseline, o);
  CHECK(plaudit::checks::CheckResultToJson(a).dump() == plaudit::checks::CheckResultToJson(b).dump());
  CHECK_FALSE(a.detail.contains("seconds"));
}
