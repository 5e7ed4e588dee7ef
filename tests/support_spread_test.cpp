// Check `support-spread` on networks built in memory.
#include <cmath>
#include <random>
#include <string>

#include <Eigen/Core>
#include <catch2/catch.hpp>

#include "plaudit/checks/support_spread.h"
#include "plaudit/core/error.h"
#include "plaudit/stats/covering_radius.h"
#include "plaudit/stats/pca.h"

namespace {

using plaudit::checks::RunSupportSpread;
using plaudit::checks::Status;
using plaudit::checks::SupportSpreadOptions;
using plaudit::model::Dataset;
using plaudit::model::Network;

// Gaussian inputs with column means `shift` and spreads `spread`, so standardisation matters.
Dataset GaussianData(Eigen::Index rows, const Eigen::RowVectorXd& shift,
                     const Eigen::RowVectorXd& spread, std::uint64_t seed) {
  std::mt19937_64 rng(seed);
  std::normal_distribution<double> normal;
  Dataset data;
  data.x.resize(rows, shift.size());
  for (Eigen::Index i = 0; i < data.x.size(); ++i) data.x(i) = normal(rng);
  data.x = (data.x.array().rowwise() * spread.array()).rowwise() + shift.array();
  data.y = Eigen::MatrixXd::Zero(rows, 1);
  return data;
}

// A two-layer network whose first-layer neurons are the rows of `v` (n x (d+1)) in the
// standardised augmented coordinates of `data` (population sd, as the check defines them):
// w = v_x ./ sd, b = v_1 - w . mu.
Network NetworkWithNeurons(const Eigen::MatrixXd& v, const Dataset& data) {
  const Eigen::Index d = data.dim();
  const Eigen::RowVectorXd mu = data.x.colwise().mean();
  const Eigen::RowVectorXd sd =
      ((data.x.rowwise() - mu).colwise().squaredNorm() / static_cast<double>(data.rows())).cwiseSqrt();
  Network net;
  net.layers.resize(2);
  auto& first = net.layers[0];
  first.weight = v.leftCols(d).array().rowwise() / sd.array();
  first.bias = v.col(d) - first.weight * mu.transpose();
  first.has_bias = true;
  first.activation = plaudit::model::Activation::kRelu;
  auto& head = net.layers[1];
  head.weight = Eigen::MatrixXd::Constant(1, v.rows(), 0.5);
  head.bias = Eigen::VectorXd::Zero(1);
  head.multiplier = 1.0 / static_cast<double>(v.rows());
  return net;
}

Eigen::MatrixXd UniformNeurons(Eigen::Index n, Eigen::Index dims, std::uint64_t seed) {
  std::mt19937_64 rng(seed);
  return plaudit::stats::UniformDirections(n, dims, rng);
}

Dataset ThreeColumnData(std::uint64_t seed = 7) {
  return GaussianData(2000, Eigen::RowVector3d(1.0, -2.0, 0.5), Eigen::RowVector3d(2.0, 0.5, 1.0),
                      seed);
}

}  // namespace

TEST_CASE("support-spread passes for neurons spread uniformly", "[support-spread]") {
  const Dataset data = ThreeColumnData();
  const Network net = NetworkWithNeurons(UniformNeurons(200, 4, 1), data);
  const auto r = RunSupportSpread(net, nullptr, data, SupportSpreadOptions{});
  INFO(r.message);
  CHECK(r.name == "support-spread");
  CHECK(r.status == Status::kPass);
  // The null is the same law as the neurons (uniform on S^3, k = d + 1 = 4), so the ratio is
  // near 1; 1.5 leaves room for the spread of a covering radius over replicas.
  CHECK(r.statistic < 1.5);
  CHECK(r.statistic > 0.7);
  CHECK(r.threshold == 2.0);
  const auto& d = r.detail;
  CHECK(d["dims"] == 4);
  CHECK(d["neurons"] == 200);
  CHECK(d["kept"] == 200);
  CHECK(d["dropped"] == 0);
  CHECK(d["null_replicas"].size() == 20);
  CHECK(d["probes"] == 20000);
  CHECK(d["points_2d"].size() == 200);
  CHECK(d["outgoing_norm"].size() == 200);
  CHECK(d["outgoing_norm"][0].get<double>() == Approx(0.5));
  CHECK(d["effective_directions"].get<double>() > 150.0);
  // The augmented second moment has trace d + 1 and the four directions span all of it.
  CHECK(d["moment_fraction"].get<double>() == Approx(1.0).margin(1e-9));
  Eigen::VectorXd u(4);
  for (int i = 0; i < 4; ++i) u(i) = d["empty_cap_direction"][i].get<double>();
  CHECK(u.norm() == Approx(1.0).epsilon(1e-12));
  const auto& q = d["norm_quantiles"];
  CHECK(q["min"].get<double>() == Approx(1.0).epsilon(1e-9));  // unit neurons by construction
  CHECK(q["max"].get<double>() == Approx(1.0).epsilon(1e-9));
}

TEST_CASE("support-spread fails for collapsed neurons", "[support-spread]") {
  const Dataset data = ThreeColumnData();
  SECTION("all neurons identical") {
    const Eigen::MatrixXd v = Eigen::RowVector4d(1.0, 0.5, -0.2, 0.3).replicate(200, 1);
    const auto r = RunSupportSpread(NetworkWithNeurons(v, data), nullptr, data, {});
    INFO(r.message);
    CHECK(r.status == Status::kFail);
    // One direction on S^3 leaves the cap around its antipode: theta = pi.
    CHECK(r.detail["theta"].get<double>() == Approx(std::acos(-1.0)).margin(1e-6));
    CHECK(r.statistic > 3.0);
    CHECK(r.detail["clusters"] == 1);
    CHECK(r.detail["effective_directions"].get<double>() == Approx(1.0));
  }
  SECTION("two tight clusters") {
    std::mt19937_64 rng(4);
    std::normal_distribution<double> noise(0.0, 0.002);  // about 0.1 degree
    Eigen::MatrixXd v(200, 4);
    for (int i = 0; i < 200; ++i) {
      v.row(i) = i % 2 == 0 ? Eigen::RowVector4d(1, 0, 0, 0.2) : Eigen::RowVector4d(0, -1, 0.5, 0);
      for (int j = 0; j < 4; ++j) v(i, j) += noise(rng);
    }
    const auto r = RunSupportSpread(NetworkWithNeurons(v, data), nullptr, data, {});
    INFO(r.message);
    CHECK(r.status == Status::kFail);
    CHECK(r.statistic > 2.5);
    CHECK(r.detail["clusters"] == 2);
    CHECK(r.detail["largest_cluster"] == 100);
    CHECK(r.detail["effective_directions"].get<double>() <= 2.0 + 1e-12);
  }
}

TEST_CASE("support-spread compares with the first network", "[support-spread]") {
  const Dataset data = ThreeColumnData();
  const Network init = NetworkWithNeurons(UniformNeurons(200, 4, 2), data);
  const Network last =
      NetworkWithNeurons(Eigen::RowVector4d(0.3, 1.0, 0.0, -0.5).replicate(200, 1), data);
  const auto r = RunSupportSpread(last, &init, data, {});
  CHECK(r.status == Status::kFail);
  const double at_init = r.detail["statistic_init"].get<double>();
  CHECK(at_init < 1.5);
  CHECK(r.detail["init"]["statistic"].get<double>() == at_init);
  CHECK(r.detail["init"]["kept"] == 200);
  CHECK(r.detail["points_2d_init"].size() == 200);
  CHECK(r.statistic > 2.0 * at_init);
}

TEST_CASE("support-spread is deterministic for a seed", "[support-spread]") {
  const Dataset data = ThreeColumnData();
  const Network net = NetworkWithNeurons(UniformNeurons(150, 4, 3), data);
  SupportSpreadOptions options;
  options.seed = 42;
  const auto a = RunSupportSpread(net, &net, data, options);
  const auto b = RunSupportSpread(net, &net, data, options);
  CHECK(a.statistic == b.statistic);
  CHECK(a.detail == b.detail);
  // The same network as its own initialisation is measured with the same probes.
  CHECK(a.detail["statistic_init"].get<double>() == a.statistic);
}

TEST_CASE("support-spread does not depend on the units of the inputs", "[support-spread]") {
  // Rescaling and shifting an input column, with w and b compensating, leaves every
  // pre-activation unchanged; after standardisation the neurons are the same vectors.
  const Dataset data = ThreeColumnData();
  const Network net = NetworkWithNeurons(UniformNeurons(120, 4, 5), data);
  Dataset moved = data;
  moved.x.col(0) *= 1000.0;
  moved.x.col(1).array() += 50.0;
  Network compensated = net;
  auto& layer = compensated.layers[0];
  layer.weight.col(0) /= 1000.0;
  layer.bias -= 50.0 * layer.weight.col(1);
  const auto a = RunSupportSpread(net, nullptr, data, {});
  const auto b = RunSupportSpread(compensated, nullptr, moved, {});
  CHECK(b.statistic == Approx(a.statistic).epsilon(1e-9));
  CHECK(b.detail["null_median"] == a.detail["null_median"]);
}

TEST_CASE("support-spread includes the first layer's multiplier", "[support-spread]") {
  // z = m W x + b: halving W and setting m = 2 is the same layer.
  const Dataset data = ThreeColumnData();
  const Network net = NetworkWithNeurons(UniformNeurons(100, 4, 6), data);
  Network scaled = net;
  scaled.layers[0].weight *= 0.5;
  scaled.layers[0].multiplier = 2.0;
  const auto a = RunSupportSpread(net, nullptr, data, {});
  const auto b = RunSupportSpread(scaled, nullptr, data, {});
  CHECK(b.statistic == Approx(a.statistic).epsilon(1e-12));
}

TEST_CASE("support-spread reads a bias-free first layer in R^d", "[support-spread]") {
  // Without a bias, w . x = (w .* sd) . (x ./ sd): neurons uniform in w .* sd are uniform on S^2
  // in the bias-free frame (k = d = 3 spans it all), the same law as the null.
  const Dataset data = ThreeColumnData();
  const Eigen::RowVectorXd mu = data.x.colwise().mean();
  const Eigen::RowVectorXd sd =
      ((data.x.rowwise() - mu).colwise().squaredNorm() / static_cast<double>(data.rows())).cwiseSqrt();
  Network net = NetworkWithNeurons(Eigen::MatrixXd::Zero(200, 4), data);
  net.layers[0].weight = UniformNeurons(200, 3, 12).array().rowwise() / sd.array();
  net.layers[0].bias.setZero();
  net.layers[0].has_bias = false;
  const auto r = RunSupportSpread(net, nullptr, data, {});
  INFO(r.message);
  CHECK(r.detail["frame"] == "bias-free");
  CHECK(r.detail["dims"] == 3);
  CHECK(r.detail["empty_cap_direction"].size() == 3);
  CHECK(r.status == Status::kPass);
  CHECK(r.statistic < 1.5);
  // The same neurons with a zero bias are read in the augmented frame, where all of them lie
  // near the hyperplane orthogonal to the constant direction (x' is centred, so b + w . mu = 0):
  // the cap around the constant direction is empty up to 90 degrees.
  Network zero_bias = net;
  zero_bias.layers[0].has_bias = true;
  zero_bias.layers[0].bias = -(zero_bias.layers[0].weight * mu.transpose());
  const auto z = RunSupportSpread(zero_bias, nullptr, data, {});
  CHECK(z.detail["frame"] == "augmented");
  CHECK(z.detail["theta_degrees"].get<double>() >= 90.0 - 1e-6);
}

TEST_CASE("support-spread drops neurons outside the data's directions", "[support-spread]") {
  // Columns 0 and 1 are equal, so the standardised data never vary along (1, -1, 0): the
  // augmented second moment has rank 3 and a neuron along that direction has no projection.
  Dataset data = ThreeColumnData();
  data.x.col(1) = data.x.col(0);
  Eigen::MatrixXd v = UniformNeurons(60, 4, 8);
  for (int i = 0; i < 5; ++i) v.row(i) << 1.0, -1.0, 0.0, 0.0;
  const auto r = RunSupportSpread(NetworkWithNeurons(v, data), nullptr, data, {});
  CHECK(r.ran());
  CHECK(r.detail["dims_requested"] == 4);
  CHECK(r.detail["dims"] == 3);
  CHECK(r.detail["dropped"] == 5);
  CHECK(r.detail["kept"] == 55);
  CHECK(r.detail["dropped_index"] == nlohmann::json({0, 1, 2, 3, 4}));
  CHECK(r.detail["points_2d"].size() == 55);
}

TEST_CASE("support-spread skips thin inputs", "[support-spread]") {
  const Dataset data = ThreeColumnData();
  SECTION("one neuron") {
    const auto r = RunSupportSpread(NetworkWithNeurons(UniformNeurons(1, 4, 1), data), nullptr,
                                    data, {});
    CHECK(r.status == Status::kSkip);
    CHECK(r.detail.contains("reason"));
  }
  SECTION("one data row") {
    const Network net = NetworkWithNeurons(UniformNeurons(10, 4, 1), data);
    Dataset one = data;
    one.x = data.x.topRows(1);
    one.y = data.y.topRows(1);
    CHECK(RunSupportSpread(net, nullptr, one, {}).status == Status::kSkip);
  }
  SECTION("constant inputs") {
    const Network net = NetworkWithNeurons(UniformNeurons(10, 4, 1), data);
    Dataset flat = data;
    flat.x.rowwise() = Eigen::RowVector3d(1.0, 2.0, 3.0);
    CHECK(RunSupportSpread(net, nullptr, flat, {}).status == Status::kSkip);
  }
  SECTION("zero first layer") {
    Network net = NetworkWithNeurons(UniformNeurons(10, 4, 1), data);
    net.layers[0].weight.setZero();
    net.layers[0].bias.setZero();
    CHECK(RunSupportSpread(net, nullptr, data, {}).status == Status::kSkip);
  }
  SECTION("mismatched data") {
    const Network net = NetworkWithNeurons(UniformNeurons(10, 4, 1), data);
    Dataset wide = data;
    wide.x = Eigen::MatrixXd::Ones(data.rows(), 5);
    CHECK_THROWS_AS(RunSupportSpread(net, nullptr, wide, {}), plaudit::Error);
  }
}

TEST_CASE("support-spread options are validated", "[support-spread]") {
  std::string why;
  CHECK(SupportSpreadOptions{}.IsValid(&why));
  auto rejects = [](SupportSpreadOptions o, const std::string& field, const std::string& value) {
    std::string message;
    const bool ok = o.IsValid(&message);
    INFO(message);
    CHECK_FALSE(ok);
    CHECK(message.find(field) != std::string::npos);
    CHECK(message.find(value) != std::string::npos);
  };
  SupportSpreadOptions o;
  o.dims = 1;
  rejects(o, "dims", "1");
  o = {};
  o.dims = 9;
  rejects(o, "dims", "9");
  o = {};
  o.probes = 0;
  rejects(o, "probes", "0");
  o = {};
  o.refine = -1;
  rejects(o, "refine", "-1");
  o = {};
  o.null_replicas = 0;
  rejects(o, "null_replicas", "0");
  o = {};
  o.threshold = -2.0;
  rejects(o, "threshold", "-2");
  o = {};
  o.threshold = std::nan("");
  rejects(o, "threshold", "nan");
  o = {};
  o.cluster_degrees = 180.0;
  rejects(o, "cluster_degrees", "180");
  o = {};
  o.max_rows = 1;
  rejects(o, "max_rows", "1");
  o = {};
  o.dims = 8;
  CHECK(o.IsValid(nullptr));
  o.dims = 0;
  o.probes = 0;
  const Dataset data = ThreeColumnData();
  CHECK_THROWS_AS(
      RunSupportSpread(NetworkWithNeurons(UniformNeurons(10, 4, 1), data), nullptr, data, o),
      plaudit::Error);
}

TEST_CASE("principal directions recover a known spectrum", "[support-spread][pca]") {
  // A matrix built as H diag(lambda) H^T with H orthogonal has eigenvalues lambda and
  // eigenvectors the columns of H (spectral theorem). H is a product of three Householder
  // reflections I - 2 w w^T, each orthogonal. lambda_i = 0.9^i gives the subspace iteration a
  // ratio of 0.9^10 per sweep.
  for (Eigen::Index d : {40, 600}) {  // dense solver, then subspace iteration
    std::mt19937_64 rng(static_cast<std::uint64_t>(d));
    Eigen::MatrixXd h = Eigen::MatrixXd::Identity(d, d);
    for (int r = 0; r < 3; ++r) {
      const Eigen::VectorXd w = plaudit::stats::UniformDirections(1, d, rng).transpose();
      h -= 2.0 * (h * w) * w.transpose();
    }
    Eigen::VectorXd lambda(d);
    for (Eigen::Index i = 0; i < d; ++i) lambda(i) = std::pow(0.9, static_cast<double>(i));
    const Eigen::MatrixXd m = h * lambda.asDiagonal() * h.transpose();
    const auto axes = plaudit::stats::TopEigenpairs(m, 5, 3);
    INFO("d = " << d);
    CHECK(axes.total == Approx(lambda.sum()).epsilon(1e-10));
    for (Eigen::Index c = 0; c < 5; ++c) {
      CHECK(axes.moments(c) == Approx(lambda(c)).epsilon(1e-9));
      CHECK(std::abs(axes.directions.col(c).dot(h.col(c))) == Approx(1.0).epsilon(1e-8));
    }
  }
  // SecondMoment is (1/N) X^T X, centred on request.
  const Dataset data = ThreeColumnData();
  const Eigen::MatrixXd raw = data.x.transpose() * data.x / static_cast<double>(data.rows());
  CHECK(plaudit::stats::SecondMoment(data.x, false).isApprox(raw, 1e-12));
  const Eigen::MatrixXd centred = data.x.rowwise() - data.x.colwise().mean();
  CHECK(plaudit::stats::SecondMoment(data.x, true)
            .isApprox(centred.transpose() * centred / static_cast<double>(data.rows()), 1e-12));
}
