// The network, losses and gradients against PyTorch autograd in float64: each case under
// tests/fixtures/torch/ is a contract run directory written by
// tests/reference/make_torch_reference.py, with the expected loss, baseline loss and every
// gradient in expected.npz.
#include <cmath>
#include <fstream>
#include <string>
#include <vector>

#include <catch2/catch.hpp>

#include "plaudit/io/npz.h"
#include "plaudit/io/run_dir.h"
#include "plaudit/model/dataset.h"
#include "plaudit/model/evaluate.h"
#include "plaudit/model/network.h"

namespace {

using plaudit::io::ArrayMap;

const std::string kTorchDir = std::string(PLAUDIT_FIXTURES) + "/torch/";

// Agreement with autograd: |ours - torch| <= kRelTol * |torch| + kAbsTol. Both sides compute
// in float64 with different summation orders, so they agree to a few ulps of the largest
// terms; kAbsTol covers components that cancel to ~1e-17.
constexpr double kRelTol = 1e-10;
constexpr double kAbsTol = 1e-13;

bool Close(double ours, double torch) { return std::abs(ours - torch) <= kRelTol * std::abs(torch) + kAbsTol; }

std::vector<std::string> Cases() {
  std::ifstream in(kTorchDir + "cases.txt");
  std::vector<std::string> cases;
  for (std::string line; std::getline(in, line);) {
    if (!line.empty()) cases.push_back(line);
  }
  return cases;
}

double Scalar(const ArrayMap& arrays, const std::string& name) {
  REQUIRE(arrays.count(name) == 1);
  REQUIRE(arrays.at(name).values.size() == 1);
  return arrays.at(name).values[0];
}

// The expected gradient of a weight, as out x in whatever layout the array is stored in.
Eigen::MatrixXd ExpectedWeightGrad(const ArrayMap& expected, const std::string& name, plaudit::io::WeightLayout layout) {
  const std::string key = "grad/" + name;
  REQUIRE(expected.count(key) == 1);
  Eigen::MatrixXd g = expected.at(key).AsMatrix(key);
  if (layout == plaudit::io::WeightLayout::kInOut) g.transposeInPlace();
  return g;
}

void CheckMatrix(const Eigen::MatrixXd& ours, const Eigen::MatrixXd& torch, const std::string& name) {
  INFO(name);
  REQUIRE(ours.rows() == torch.rows());
  REQUIRE(ours.cols() == torch.cols());
  for (Eigen::Index i = 0; i < ours.size(); ++i) {
    if (!Close(ours.data()[i], torch.data()[i])) {
      FAIL_CHECK("component " << i << ": ours " << ours.data()[i] << ", torch " << torch.data()[i]);
    }
  }
}

struct LoadedCase {
  plaudit::io::Manifest manifest;
  plaudit::model::Network net;
  plaudit::model::Dataset data;
  ArrayMap expected;
};

LoadedCase Load(const std::string& name) {
  const plaudit::io::RunDir run(kTorchDir + name);
  const auto snaps = run.Snapshots();
  REQUIRE(snaps.size() == 1);
  REQUIRE(snaps[0].step == 0);
  LoadedCase c;
  c.manifest = run.manifest();
  c.net = plaudit::model::NetworkFromArrays(c.manifest, run.ReadSnapshot(snaps[0]), snaps[0].path.string());
  c.data = plaudit::model::ReadDataset(run.data_path(), c.manifest.loss, c.net.output_dim());
  c.expected = plaudit::io::ReadNpz(run.root() / "expected.npz");
  return c;
}

}  // namespace

TEST_CASE("loss and every raw gradient agree with PyTorch autograd", "[network][torch]") {
  const auto cases = Cases();
  // 7 activations x 3 losses x 2 parameterizations, plus in_out, multiplier and no-bias cases.
  REQUIRE(cases.size() == 46);
  for (const auto& name : cases) {
    INFO("case " << name);
    const LoadedCase c = Load(name);
    const auto ev = plaudit::model::Evaluate(c.net, c.data);
    CHECK(Close(ev.loss, Scalar(c.expected, "loss")));
    for (std::size_t l = 0; l < c.manifest.layers.size(); ++l) {
      const auto& spec = c.manifest.layers[l];
      CheckMatrix(ev.weight_grad[l], ExpectedWeightGrad(c.expected, spec.weight, c.manifest.weight_layout), spec.weight);
      if (spec.bias) {
        const std::string key = "grad/" + *spec.bias;
        REQUIRE(c.expected.count(key) == 1);
        CheckMatrix(ev.bias_grad[l], c.expected.at(key).AsMatrix(key), *spec.bias);
      }
    }
  }
}

TEST_CASE("the reference cases exercise mean-field multipliers, overrides and layouts", "[network][torch]") {
  // Mean-field: m_1 = 1, m_l = 1/n_{l-1} (contract section 4); widths 3 -> 5 -> 4 -> k.
  const LoadedCase mf = Load("mf-squared-tanh");
  CHECK(mf.net.layers[0].multiplier == 1.0);
  CHECK(mf.net.layers[1].multiplier == 1.0 / 5.0);
  CHECK(mf.net.layers[2].multiplier == 1.0 / 4.0);
  const LoadedCase over = Load("mf-squared-softplus-multiplier");
  CHECK(over.net.layers[1].multiplier == 0.35);  // run.json overrides 1/5
  CHECK(over.net.layers[2].multiplier == 1.0 / 4.0);
  const LoadedCase std_case = Load("std-logistic-sigmoid-multiplier-nobias");
  CHECK(std_case.net.layers[2].multiplier == 2.5);
  CHECK_FALSE(std_case.net.layers[1].has_bias);
  const LoadedCase in_out = Load("std-squared-tanh-in_out");
  CHECK(in_out.manifest.weight_layout == plaudit::io::WeightLayout::kInOut);
  CHECK(in_out.net.layers[0].weight.rows() == 5);
  CHECK(in_out.net.layers[0].weight.cols() == 3);
}

TEST_CASE("ConstantBaselineLoss matches NumPy's closed forms", "[network][torch][dataset]") {
  // squared: 0.5 * sum over columns of np.var(y); cross-entropy: entropy of the class
  // frequencies; logistic: binary entropy of the positive rate (make_torch_reference.py).
  int checked = 0;
  for (const auto& name : Cases()) {
    INFO("case " << name);
    const LoadedCase c = Load(name);
    const double baseline = plaudit::model::ConstantBaselineLoss(c.data, c.manifest.loss, c.net.output_dim());
    CHECK(Close(baseline, Scalar(c.expected, "baseline_loss")));
    ++checked;
  }
  CHECK(checked == 46);
}
