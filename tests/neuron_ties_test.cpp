// Tied (copied) hidden neurons: found, kept by gradient descent, and honoured by the curvature
// check. Outside facts used: a network's function is invariant under permuting the neurons of a
// hidden layer, so neurons with equal incoming, bias and outgoing parameters receive equal
// gradients and gradient descent keeps them equal (the symmetry of Fukumizu & Amari, "Local
// minima and plateaus in hierarchical structures of multilayer perceptrons", Neural Networks
// 13, 2000); and the critical points such a reduced network reaches are saddles of the full
// parameter space whose escape directions pull the copies apart (same paper).
#include <random>

#include <catch2/catch.hpp>

#include "plaudit/checks/curvature.h"
#include "plaudit/model/evaluate.h"
#include "plaudit/model/hessian.h"
#include "plaudit/model/neuron_ties.h"
#include "plaudit/train/teacher.h"
#include "plaudit/train/trainer.h"

namespace model = plaudit::model;
namespace train = plaudit::train;
using plaudit::checks::CurvatureOptions;
using plaudit::checks::RunCurvature;
using plaudit::checks::Status;

namespace {

train::TrainOptions Collapsed(Eigen::Index width, int clusters) {
  train::TrainOptions o;
  o.widths = {width};
  o.activation = model::Activation::kTanh;
  o.parameterization = plaudit::io::Parameterization::kMeanField;
  o.init.scheme = train::InitScheme::kCollapsed;
  o.init.clusters = clusters;
  o.lr = 0.5;
  return o;
}

model::Dataset Teacher() {
  train::TeacherOptions t;
  t.kind = train::TeacherKind::kTwoLayer;
  t.activation = model::Activation::kTanh;
  t.dim = 4;
  t.width = 3;
  t.rows = 400;
  t.noise = 0.0;
  t.seed = 3;
  return train::MakeTeacherData(t).data;
}

bool AllTied(const model::Network& net, Eigen::Index expected_groups) {
  const auto ties = model::FindNeuronTies(net, 1e-12);
  return ties.size() == 1 && static_cast<Eigen::Index>(ties[0].groups.size()) == expected_groups &&
         model::TiedNeuronCount(ties) == net.layers[0].fan_out();
}

}  // namespace

TEST_CASE("collapsed neurons are found as tied groups; i.i.d. ones are not", "[ties]") {
  std::mt19937_64 rng(4);
  const model::Network collapsed = train::InitialNetwork(Collapsed(12, 3), 4, 1, rng);
  const auto ties = model::FindNeuronTies(collapsed, 0.0);
  REQUIRE(ties.size() == 1);
  CHECK(ties[0].layer == 0);
  REQUIRE(ties[0].groups.size() == 3);
  for (const auto& g : ties[0].groups) CHECK(g.size() == 4);
  CHECK(model::TiedNeuronCount(ties) == 12);

  train::TrainOptions iid = Collapsed(12, 1);
  iid.init.scheme = train::InitScheme::kGaussian;
  CHECK(model::FindNeuronTies(train::InitialNetwork(iid, 4, 1, rng), 1e-12).empty());

  // A copy perturbed above the tolerance is no longer tied to the others.
  model::Network nudged = collapsed;
  nudged.layers[0].weight(0, 0) += 1e-6;
  CHECK(model::TiedNeuronCount(model::FindNeuronTies(nudged, 1e-12)) == 11);
  CHECK(model::TiedNeuronCount(model::FindNeuronTies(nudged, 1e-3)) == 12);
}

TEST_CASE("the tie projection is an orthogonal projection that gradients already satisfy", "[ties]") {
  std::mt19937_64 rng(5);
  const model::Dataset data = Teacher();
  const model::Network net = train::InitialNetwork(Collapsed(10, 2), 4, 1, rng);
  const auto ties = model::FindNeuronTies(net, 0.0);
  const model::ParameterLayout layout = model::MakeParameterLayout(net, {0, 1});
  std::normal_distribution<double> n01;
  Eigen::VectorXd v(layout.size), w(layout.size);
  for (Eigen::Index i = 0; i < layout.size; ++i) {
    v(i) = n01(rng);
    w(i) = n01(rng);
  }
  Eigen::VectorXd pv = v, pw = w;
  model::ProjectOntoTies(layout, ties, pv);
  model::ProjectOntoTies(layout, ties, pw);
  Eigen::VectorXd ppv = pv;
  model::ProjectOntoTies(layout, ties, ppv);
  CHECK((ppv - pv).norm() <= 1e-14 * pv.norm());               // idempotent
  CHECK(std::abs((v - pv).dot(pw)) <= 1e-12 * v.norm() * w.norm());  // orthogonal
  CHECK((v - pv).norm() > 0.5 * v.norm());  // most random directions pull copies apart

  // The permutation symmetry: the full-batch gradient of a tied network keeps the ties.
  model::EvalOptions eo;
  eo.lowest_grad_layer = 0;
  const model::Evaluation ev = model::Evaluate(net, data, eo);
  const Eigen::VectorXd g = model::GatherGradient(ev, layout);
  Eigen::VectorXd pg = g;
  model::ProjectOntoTies(layout, ties, pg);
  CHECK((pg - g).norm() <= 1e-12 * g.norm());
}

TEST_CASE("curvature looks only along directions gradient descent can take when neurons are copies", "[ties][curvature]") {
  // A width-8 student whose neurons are all one copy converges to the best single-neuron fit of
  // a three-neuron teacher: a saddle of the full parameter space (the unrestricted Hessian has
  // negative curvature that pulls copies apart), which gradient descent never leaves.
  const model::Dataset data = Teacher();
  std::mt19937_64 rng(6);
  const train::TrainOptions o = Collapsed(8, 1);
  model::Network net = train::InitialNetwork(o, 4, 1, rng);
  train::Descent descent(data, o, 1);
  for (int step = 0; step < 3000; ++step) descent.Apply(net, descent.NextGradient(net));
  REQUIRE(AllTied(net, 1));
  const double baseline = model::ConstantBaselineLoss(data, model::Loss::kSquared, 1);

  CurvatureOptions free;
  free.respect_ties = false;
  const auto unrestricted = RunCurvature(net, data, baseline, free);
  INFO(unrestricted.message);
  CHECK(unrestricted.status == Status::kFail);  // the copy-splitting saddle exists
  CHECK_FALSE(unrestricted.detail["restricted_to_ties"].get<bool>());

  const auto restricted = RunCurvature(net, data, baseline, {});
  INFO(restricted.message);
  CHECK(restricted.status == Status::kPass);
  CHECK(restricted.detail["restricted_to_ties"].get<bool>());
  CHECK(restricted.detail["tied_neurons"].get<int>() == 8);
  CHECK(restricted.message.find("exact copies") != std::string::npos);

  // Ground truth: 3000 more steps keep every copy tied and the loss where it was.
  const double before = descent.FullBatch(net, false).loss;
  for (int step = 0; step < 3000; ++step) descent.Apply(net, descent.NextGradient(net));
  CHECK(AllTied(net, 1));
  CHECK(descent.FullBatch(net, false).loss >= before - 1e-4 * baseline);
}
