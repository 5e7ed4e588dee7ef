// Checks `layer-degeneracy` and `two-way-diversity`, and the latent (neuronal-embedding)
// initialisation. Reference values: NumPy (tests/reference/make_degeneracy_reference.py:
// numpy.corrcoef, numpy.linalg.eigvalsh, numpy.linalg.lstsq) and the degeneracy of deep
// mean-field networks under i.i.d. initialisation (Nguyen & Pham 2020, "A rigorous framework for
// the mean field limit of multilayer neural networks"; Pham & Nguyen 2020, "A note on the global
// convergence of multilayer neural networks in the mean field regime").
#include <catch2/catch.hpp>

#include <cmath>
#include <fstream>
#include <random>
#include <string>
#include <vector>

#include <Eigen/Core>
#include <nlohmann/json.hpp>

#include "plaudit/checks/layer_degeneracy.h"
#include "plaudit/checks/two_way_diversity.h"
#include "plaudit/core/error.h"
#include "plaudit/stats/covering_radius.h"
#include "plaudit/train/latent_init.h"
#include "plaudit/train/teacher.h"
#include "plaudit/train/trainer.h"

namespace {

using plaudit::checks::ColumnMoments;
using plaudit::checks::LayerDegeneracyOptions;
using plaudit::checks::RunLayerDegeneracy;
using plaudit::checks::RunTwoWayDiversity;
using plaudit::checks::Status;
using plaudit::checks::TwoWayDiversityOptions;
using plaudit::model::Dataset;
using plaudit::model::Network;

nlohmann::json LoadFixture() {
  std::ifstream in(std::string(PLAUDIT_FIXTURES) + "/degeneracy.json");
  REQUIRE(in.good());
  return nlohmann::json::parse(in);
}

Eigen::MatrixXd MatrixOf(const nlohmann::json& rows) {
  Eigen::MatrixXd m(static_cast<Eigen::Index>(rows.size()), static_cast<Eigen::Index>(rows[0].size()));
  for (Eigen::Index i = 0; i < m.rows(); ++i) {
    for (Eigen::Index j = 0; j < m.cols(); ++j) {
      m(i, j) = rows[static_cast<std::size_t>(i)][static_cast<std::size_t>(j)].get<double>();
    }
  }
  return m;
}

// Inputs x ~ N(0, I_8) and the smooth teacher of train/teacher.h: a random O(1) target.
Dataset TeacherRows(Eigen::Index rows, std::uint64_t seed) {
  plaudit::train::TeacherOptions t;
  t.kind = plaudit::train::TeacherKind::kSmooth;
  t.dim = 8;
  t.width = 8;
  t.rows = rows;
  t.seed = seed;
  return plaudit::train::MakeTeacherData(t).data;
}

plaudit::train::TrainOptions MeanField(std::vector<Eigen::Index> widths, bool bias) {
  plaudit::train::TrainOptions o;
  o.widths = std::move(widths);
  o.activation = plaudit::model::Activation::kTanh;
  o.parameterization = plaudit::io::Parameterization::kMeanField;
  o.hidden_bias = bias;
  o.output_bias = false;
  o.lr = 0.5;
  return o;
}

// The mean-field network with i.i.d. N(mean, 1) weights after the first layer (N(0, 1) in the
// first). A non-zero mean keeps the wide-limit dynamics non-trivial: with mean 0 and an odd
// activation the limit network is the zero function forever, and a finite one only escapes it
// through its O(1/sqrt(n)) fluctuations.
Network IidNetwork(const plaudit::train::TrainOptions& o, double mean, std::uint64_t seed) {
  std::mt19937_64 rng(seed);
  Network net = plaudit::train::InitialNetwork(o, 8, 1, rng);
  for (std::size_t l = 1; l < net.layers.size(); ++l) net.layers[l].weight.array() += mean;
  return net;
}

Network Trained(Network net, const Dataset& data, const plaudit::train::TrainOptions& o, int steps) {
  plaudit::train::Descent descent(data, o, 1);
  for (int t = 0; t < steps; ++t) descent.Apply(net, descent.NextGradient(net));
  return net;
}

const nlohmann::json& LayerDetail(const plaudit::checks::CheckResult& r, int layer1) {
  for (const auto& l : r.detail["layers"]) {
    if (l["layer"].get<int>() == layer1) return l;
  }
  FAIL("layer " << layer1 << " missing from the detail");
  return r.detail;
}

// A depth-4 network whose middle layer 2 reads from `incoming` (rows of W_2) and feeds `outgoing`
// (columns of W_3); the other weights are Gaussian.
Network MiddleLayerNetwork(const Eigen::MatrixXd& incoming, const Eigen::MatrixXd& outgoing,
                           std::uint64_t seed) {
  std::mt19937_64 rng(seed);
  std::normal_distribution<double> normal;
  auto gaussian = [&](Eigen::Index r, Eigen::Index c) {
    Eigen::MatrixXd m(r, c);
    for (Eigen::Index i = 0; i < m.size(); ++i) m(i) = normal(rng);
    return m;
  };
  const Eigen::Index n1 = incoming.cols(), n2 = incoming.rows(), n3 = outgoing.rows();
  Network net;
  net.layers.resize(4);
  net.layers[0].weight = gaussian(n1, 5);
  net.layers[1].weight = incoming;
  net.layers[2].weight = outgoing;
  net.layers[3].weight = gaussian(1, n3);
  for (int l = 0; l < 4; ++l) {
    auto& layer = net.layers[static_cast<std::size_t>(l)];
    layer.bias = Eigen::VectorXd::Zero(layer.fan_out());
    layer.activation = l < 3 ? plaudit::model::Activation::kTanh : plaudit::model::Activation::kIdentity;
    layer.multiplier = l == 0 ? 1.0 : 1.0 / static_cast<double>(layer.fan_in());
  }
  REQUIRE(n2 == outgoing.cols());
  return net;
}

}  // namespace

TEST_CASE("layer-degeneracy statistics match NumPy on fixed activations", "[layer-degeneracy]") {
  const nlohmann::json fixture = LoadFixture();
  for (const auto& c : fixture["activations"]) {
    const Eigen::MatrixXd a = MatrixOf(c["a"]);
    // Uneven blocks exercise the pairwise merge of block moments.
    ColumnMoments moments;
    for (Eigen::Index start = 0; start < a.rows(); start += 37) {
      moments.Add(a.middleRows(start, std::min<Eigen::Index>(37, a.rows() - start)));
    }
    const auto s = plaudit::checks::SummariseMoments(moments);
    INFO(c["name"].get<std::string>());
    CHECK(s.width == a.cols());
    CHECK(s.varying == c["varying"].get<Eigen::Index>());
    // numpy.corrcoef over the varying columns; off-diagonal mean of |r| and of r.
    CHECK(s.mean_abs_corr == Approx(c["mean_abs_corr"].get<double>()).epsilon(1e-9));
    CHECK(s.mean_corr == Approx(c["mean_corr"].get<double>()).epsilon(1e-7).margin(1e-12));
    // exp(entropy) of numpy.linalg.eigvalsh(numpy.cov(a, bias=True)).
    CHECK(s.effective_rank == Approx(c["effective_rank"].get<double>()).epsilon(1e-9));
    CHECK(s.top_share == Approx(c["top_share"].get<double>()).epsilon(1e-9));
  }
}

TEST_CASE("weight-change shares match NumPy least squares", "[layer-degeneracy]") {
  const nlohmann::json shares = LoadFixture()["shares"];
  const auto s = plaudit::checks::WeightChangeShares(MatrixOf(shares["delta"]));
  // numpy.linalg.lstsq onto the constant, equal-row and equal-column matrices.
  CHECK(s.translation == Approx(shares["translation"].get<double>()).epsilon(1e-12));
  CHECK(s.common_row == Approx(shares["common_row"].get<double>()).epsilon(1e-12));
  CHECK(s.common_column == Approx(shares["common_column"].get<double>()).epsilon(1e-12));
  CHECK(std::isnan(plaudit::checks::WeightChangeShares(Eigen::MatrixXd::Zero(3, 4)).translation));
}

TEST_CASE("layer-degeneracy options, skips and shape errors", "[layer-degeneracy]") {
  std::string why;
  LayerDegeneracyOptions o;
  CHECK(o.IsValid(&why));
  o.threshold = 0.0;
  CHECK_FALSE(o.IsValid(&why));
  CHECK(why.find("threshold") != std::string::npos);
  o.threshold = 1.5;
  CHECK_FALSE(o.IsValid(&why));
  o = LayerDegeneracyOptions{};
  o.max_rows = 1;
  CHECK_FALSE(o.IsValid(&why));
  CHECK(why.find("max_rows") != std::string::npos);

  const Dataset data = TeacherRows(64, 3);
  std::mt19937_64 rng(5);
  const Network shallow = plaudit::train::InitialNetwork(MeanField({16}, false), 8, 1, rng);
  const auto skipped = RunLayerDegeneracy(shallow, nullptr, data, {});
  CHECK(skipped.status == Status::kSkip);
  CHECK(skipped.detail.contains("reason"));
  const Network deep = plaudit::train::InitialNetwork(MeanField({16, 16}, false), 8, 1, rng);
  const Network other = plaudit::train::InitialNetwork(MeanField({16, 12}, false), 8, 1, rng);
  CHECK_THROWS_AS(RunLayerDegeneracy(deep, &other, data, {}), plaudit::Error);
  Dataset wrong = data;
  wrong.x = Eigen::MatrixXd::Zero(64, 3);
  CHECK_THROWS_AS(RunLayerDegeneracy(deep, nullptr, wrong, {}), plaudit::Error);
}

TEST_CASE("i.i.d. deep mean-field networks degenerate in their middle layers",
          "[layer-degeneracy][mean-field]") {
  // Nguyen & Pham 2020: with i.i.d. initialisation and depth >= 4 the neurons of the middle
  // layers compute one function in the wide limit, and the weights joining two such layers
  // change by a common translation. Widths 256, no biases, 100 full-batch steps.
  const Dataset data = TeacherRows(256, 11);
  SECTION("depth 4") {
    const auto o = MeanField({256, 256, 256}, false);
    const Network first = IidNetwork(o, 0.5, 21);
    const Network last = Trained(first, data, o, 100);
    const auto r = RunLayerDegeneracy(last, &first, data, {});
    INFO(r.message << "\n" << r.detail.dump(1));
    CHECK(r.status == Status::kFail);
    CHECK(r.statistic > 0.95);
    CHECK(!r.detail["degenerate_layers"].empty());
    // Near-perfect correlation leaves one direction of the 256: effective rank near 1.
    const int worst = r.detail["worst_layer"].get<int>();
    CHECK(LayerDetail(r, worst)["effective_rank"].get<double>() < 2.0);
    // Layer 2 is a middle layer: its neurons compute the same function, not merely one
    // function up to sign, so the signed correlation is close to 1 as well.
    CHECK(LayerDetail(r, 2)["mean_corr"].get<double>() > 0.9);
  }
  SECTION("depth 5") {
    const auto o = MeanField({256, 256, 256, 256}, false);
    const Network first = IidNetwork(o, 0.5, 22);
    const Network last = Trained(first, data, o, 100);
    const auto r = RunLayerDegeneracy(last, &first, data, {});
    INFO(r.message << "\n" << r.detail.dump(1));
    CHECK(r.status == Status::kFail);
    CHECK(r.statistic > 0.95);
    // W_3 joins middle layers 2 and 3: its change is one constant in the wide limit.
    CHECK(LayerDetail(r, 3)["translation_share"].get<double>() > 0.9);
    CHECK(LayerDetail(r, 2)["mean_corr"].get<double>() > 0.9);
    CHECK(LayerDetail(r, 3)["mean_corr"].get<double>() > 0.9);
  }
}

TEST_CASE("a three-layer i.i.d. network and a latent-initialised deep one keep distinct neurons",
          "[layer-degeneracy][two-way-diversity][mean-field]") {
  const Dataset data = TeacherRows(256, 11);
  SECTION("depth 3, i.i.d., no biases") {
    // Below depth four the i.i.d. mean-field limit has no degenerate layer (Nguyen & Pham 2020).
    const auto o = MeanField({256, 256}, false);
    const Network first = IidNetwork(o, 0.5, 23);
    const Network last = Trained(first, data, o, 100);
    const auto r = RunLayerDegeneracy(last, &first, data, {});
    INFO(r.message << "\n" << r.detail.dump(1));
    CHECK(r.status == Status::kPass);
  }
  SECTION("depth 4, latent initialisation") {
    // The correlated initialisation of Pham & Nguyen 2020 keeps diversity through the depth.
    const auto o = MeanField({256, 256, 256}, false);
    std::mt19937_64 rng(24);
    Network first = plaudit::train::InitialNetwork(o, 8, 1, rng);
    plaudit::train::InitializeLatent(first, o.parameterization, {}, 24);
    const Network last = Trained(first, data, o, 100);
    const auto r = RunLayerDegeneracy(last, &first, data, {});
    INFO(r.message << "\n" << r.detail.dump(1));
    CHECK(r.status == Status::kPass);
    CHECK(r.statistic < 0.8);
    const auto d = RunTwoWayDiversity(last, &first, {});
    INFO(d.message << "\n" << d.detail.dump(1));
    CHECK(d.status == Status::kPass);
  }
}

TEST_CASE("two-way-diversity fails for equal rows and passes for uniform ones", "[two-way-diversity]") {
  const Eigen::Index n1 = 64, n2 = 48, n3 = 40;
  std::mt19937_64 rng(31);
  const Eigen::MatrixXd uniform_in = plaudit::stats::UniformDirections(n2, n1, rng);
  const Eigen::MatrixXd uniform_out = plaudit::stats::UniformDirections(n2, n3, rng).transpose();
  SECTION("uniform rows and columns pass") {
    const Network net = MiddleLayerNetwork(uniform_in, uniform_out, 32);
    const auto r = RunTwoWayDiversity(net, nullptr, {});
    INFO(r.message << "\n" << r.detail.dump(1));
    CHECK(r.status == Status::kPass);
    // Uniform directions are the null's own law: ratios near 1 (support-spread's 1 to 1.5).
    const auto& layer2 = LayerDetail(r, 2);
    CHECK(layer2["incoming"]["ratio"].get<double>() < 1.5);
    CHECK(layer2["outgoing"]["ratio"].get<double>() < 1.5);
  }
  SECTION("equal incoming rows fail") {
    const Eigen::MatrixXd equal = uniform_in.row(0).replicate(n2, 1);
    const Network net = MiddleLayerNetwork(equal, uniform_out, 33);
    const auto r = RunTwoWayDiversity(net, nullptr, {});
    INFO(r.message << "\n" << r.detail.dump(1));
    CHECK(r.status == Status::kFail);
    CHECK(r.detail["worst_layer"] == 2);
    CHECK(r.detail["worst_direction"] == "incoming");
    // Every row at one point leaves the opposite hemisphere and more: a 180-degree cap.
    CHECK(LayerDetail(r, 2)["incoming"]["theta_degrees"].get<double>() == Approx(180.0).margin(1.0));
  }
  SECTION("equal outgoing columns fail") {
    const Eigen::MatrixXd equal = uniform_out.col(0).replicate(1, n2);
    const Network net = MiddleLayerNetwork(uniform_in, equal, 34);
    const auto r = RunTwoWayDiversity(net, nullptr, {});
    CHECK(r.status == Status::kFail);
    CHECK(r.detail["worst_direction"] == "outgoing");
  }
}

TEST_CASE("two-way-diversity skips and options", "[two-way-diversity]") {
  std::mt19937_64 rng(41);
  const Network shallow = plaudit::train::InitialNetwork(MeanField({8}, false), 4, 1, rng);
  CHECK(RunTwoWayDiversity(shallow, nullptr, {}).status == Status::kSkip);
  TwoWayDiversityOptions o;
  std::string why;
  o.dims = 1;
  CHECK_FALSE(o.IsValid(&why));
  CHECK(why.find("dims") != std::string::npos);
  CHECK_THROWS_AS(RunTwoWayDiversity(shallow, nullptr, o), plaudit::Error);
  // Depth 3: one middle layer whose outgoing vectors (into a 1-wide output) have one coordinate.
  const Network three = plaudit::train::InitialNetwork(MeanField({16, 16}, false), 4, 1, rng);
  const auto r = RunTwoWayDiversity(three, nullptr, {});
  CHECK(r.ran());
  CHECK(LayerDetail(r, 2)["outgoing"].contains("reason"));
}

TEST_CASE("latent initialisation is deterministic and fills every layer", "[latent-init]") {
  const auto o = MeanField({32, 24, 16}, true);
  std::mt19937_64 rng(51);
  Network a = plaudit::train::InitialNetwork(o, 6, 2, rng);
  Network b = a, c = a;
  plaudit::train::InitializeLatent(a, o.parameterization, {}, 7);
  plaudit::train::InitializeLatent(b, o.parameterization, {}, 7);
  plaudit::train::InitializeLatent(c, o.parameterization, {}, 8);
  for (std::size_t l = 0; l < a.layers.size(); ++l) {
    CHECK(a.layers[l].weight == b.layers[l].weight);
    CHECK(a.layers[l].weight != c.layers[l].weight);
    CHECK(a.layers[l].bias.isZero(0.0));
    CHECK(a.layers[l].weight.allFinite());
  }
  plaudit::train::LatentInitOptions bad;
  bad.features = 0;
  std::string why;
  CHECK_FALSE(bad.IsValid(&why));
  CHECK(why.find("features") != std::string::npos);
  CHECK_THROWS_AS(plaudit::train::InitializeLatent(a, o.parameterization, bad, 1), plaudit::Error);
}
