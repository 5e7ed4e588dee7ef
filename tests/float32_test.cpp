// The float32 gradient pass (model::Precision::kFloat32, `audit --precision float32`).
// Outside facts used:
//  - IEEE 754 binary32 has unit roundoff u = 2^-24 ~ 5.96e-8 (the standard's 24-bit significand).
//  - A dot product of length n computed in floating point has error at most gamma_n |x|.|y|,
//    gamma_n = n u / (1 - n u) (Higham, Accuracy and Stability of Numerical Algorithms, 2nd ed.,
//    2002, eq. 3.5); typical errors grow like sqrt(n) u (ibid., section 3.6, from memory).
//  - At the least-squares solution the normal equations hold: X^T (X w - y) = 0 (a fact of the
//    trade), so the exact gradient there is zero and whatever a pass reports is its rounding.
#include <cmath>
#include <filesystem>
#include <random>

#include <Eigen/Dense>
#include <catch2/catch.hpp>
#include <nlohmann/json.hpp>

#include "plaudit/audit/audit.h"
#include "plaudit/model/evaluate.h"
#include "plaudit/report/json_report.h"
#include "plaudit/train/trainer.h"
#include "support/scenario.h"
#include "support/temp_dir.h"

namespace {

using plaudit::model::Activation;
using plaudit::model::DenseLayer;
using plaudit::model::Network;
using plaudit::model::Precision;

constexpr double kUnitRoundoff32 = 5.9604644775390625e-8;  // 2^-24, IEEE 754 binary32

Eigen::MatrixXd Gaussian(Eigen::Index rows, Eigen::Index cols, std::mt19937_64& rng, double sd = 1.0) {
  std::normal_distribution<double> n(0.0, sd);
  Eigen::MatrixXd m(rows, cols);
  for (Eigen::Index i = 0; i < m.size(); ++i) m.data()[i] = n(rng);
  return m;
}

DenseLayer Layer(Eigen::MatrixXd w, Activation a, double multiplier, std::mt19937_64& rng) {
  DenseLayer l;
  l.bias = Gaussian(w.rows(), 1, rng, 0.3);
  l.has_bias = true;
  l.weight = std::move(w);
  l.activation = a;
  l.multiplier = multiplier;
  return l;
}

double RelativeError(const Eigen::MatrixXd& approx, const Eigen::MatrixXd& exact) {
  return (approx - exact).norm() / exact.norm();
}

}  // namespace

TEST_CASE("the float32 pass agrees with the double pass to within float32 rounding", "[model][float32]") {
  std::mt19937_64 rng(31);
  Network net;
  net.layers.push_back(Layer(Gaussian(64, 16, rng), Activation::kTanh, 1.0, rng));
  net.layers.push_back(Layer(Gaussian(64, 64, rng), Activation::kTanh, 1.0 / 64, rng));
  net.layers.push_back(Layer(Gaussian(1, 64, rng), Activation::kIdentity, 1.0 / 64, rng));
  plaudit::model::Dataset data;
  data.x = Gaussian(3000, 16, rng);  // not a multiple of the block: a short last block
  data.y = Gaussian(3000, 1, rng);

  plaudit::model::EvalOptions o;
  o.block_rows = 512;
  const auto exact = plaudit::model::Evaluate(net, data, o);
  o.precision = Precision::kFloat32;
  const auto single = plaudit::model::Evaluate(net, data, o);

  // Worst-case bound for one block's inner products (n = 512 rows): gamma_512 ~ 3.1e-5; the
  // products and activations before them add a few u each. Typical errors are far smaller.
  const double gamma = 512 * kUnitRoundoff32 / (1 - 512 * kUnitRoundoff32);
  CHECK(std::abs(single.loss - exact.loss) <= 8 * kUnitRoundoff32 * exact.loss);
  for (int l = 0; l < net.depth(); ++l) {
    INFO("layer " << l + 1);
    const double w = RelativeError(single.weight_grad[l], exact.weight_grad[l]);
    const double b = RelativeError(single.bias_grad[l], exact.bias_grad[l]);
    CHECK(w < gamma);
    CHECK(b < gamma);
    // ...and it really ran in single precision: double rounding would be ~1e-16.
    CHECK(w > 1e-2 * kUnitRoundoff32);
  }
}

TEST_CASE("at a least-squares solution float32 reports its own rounding, double sees the zero gradient", "[model][float32]") {
  // Why the audit recomputes decayed points in double: the gradient is a sum of terms that
  // cancel, and float32 cannot resolve a sum far below its terms.
  std::mt19937_64 rng(5);
  plaudit::model::Dataset data;
  data.x = Gaussian(4096, 8, rng);
  data.y = data.x * Gaussian(8, 1, rng) + 0.5 * Gaussian(4096, 1, rng);
  const Eigen::MatrixXd w = data.x.colPivHouseholderQr().solve(data.y);  // normal equations hold
  Network net;
  DenseLayer l;
  l.weight = w.transpose();
  net.layers.push_back(l);

  plaudit::model::EvalOptions o;
  o.lowest_grad_layer = 0;
  const double term_scale = (data.x.transpose().cwiseAbs() * (data.x * w - data.y).cwiseAbs()).maxCoeff() / 4096.0;
  const double g64 = plaudit::model::Evaluate(net, data, o).weight_grad[0].cwiseAbs().maxCoeff();
  o.precision = Precision::kFloat32;
  const double g32 = plaudit::model::Evaluate(net, data, o).weight_grad[0].cwiseAbs().maxCoeff();
  INFO("term scale " << term_scale << ", double " << g64 << ", float32 " << g32);
  CHECK(g64 < 1e-12 * term_scale);
  CHECK(g32 > 1e-9 * term_scale);     // rounding of order sqrt(n) u of the terms...
  CHECK(g32 < 1e-4 * term_scale);     // ...and within the worst-case bound
  CHECK(g32 > 1000 * g64);
}

TEST_CASE("audit in float32: same verdict, decayed points and the last one in double", "[audit][float32]") {
  plaudit::train::TrainOptions o;
  o.widths = {48};
  o.activation = Activation::kTanh;
  o.steps = 1200;
  o.save_every = 40;  // 31 snapshots
  o.seed = 3;
  plaudit::testing::TempDir dir("float32-audit");
  const auto run = dir / "run";
  plaudit::train::Train(plaudit::testing::TeacherRows(plaudit::train::TeacherKind::kReluSum, 6, 4, 1500, 12), o, run);

  plaudit::audit::AuditOptions exact;
  exact.seed = 9;
  const auto ref = plaudit::testing::Audit(run, exact);
  const nlohmann::json ref_json = plaudit::report::AuditReportToJson(ref);
  CHECK_FALSE(ref_json["trajectory"].contains("precision"));  // double reports keep their bytes
  const auto& pts = ref.trajectory.points;
  REQUIRE(pts.size() == 31);

  SECTION("default refine level") {
    auto single = exact;
    single.precision = Precision::kFloat32;
    const auto r = plaudit::testing::Audit(run, single);
    INFO(plaudit::testing::Describe(ref) << "\nfloat32: " << plaudit::testing::Describe(r));
    CHECK(r.verdict == ref.verdict);
    REQUIRE(r.checks.size() == ref.checks.size());
    for (std::size_t i = 0; i < r.checks.size(); ++i) {
      INFO(r.checks[i].name);
      CHECK(r.checks[i].status == ref.checks[i].status);
      if (std::isnan(ref.checks[i].statistic)) CHECK(std::isnan(r.checks[i].statistic));  // skipped
      else CHECK(r.checks[i].statistic == Approx(ref.checks[i].statistic).epsilon(1e-3).margin(1e-12));
    }
    const auto& q = r.trajectory.points;
    REQUIRE(q.size() == pts.size());
    CHECK_FALSE(q.back().float32);  // the point the verdict reads is the double one, bit for bit
    CHECK(q.back().grad[1].sup == pts.back().grad[1].sup);
    CHECK(q.back().loss == pts.back().loss);
    int in_double = 0;
    for (std::size_t i = 0; i < q.size(); ++i) {
      in_double += q[i].float32 ? 0 : 1;
      if (q[i].float32) {
        CHECK(q[i].grad[1].sup == Approx(pts[i].grad[1].sup).epsilon(1e-4));
        CHECK(q[i].loss == Approx(pts[i].loss).epsilon(1e-6));
      } else {
        CHECK(q[i].grad[1].sup == pts[i].grad[1].sup);
      }
    }
    WARN("float32 audit: " << in_double << " of " << q.size() << " points recomputed in double");
    CHECK(in_double == r.trajectory.recomputed_in_double);
    CHECK(in_double < static_cast<int>(q.size()));  // float32 did some of the work
    const nlohmann::json j = plaudit::report::AuditReportToJson(r);
    CHECK(j["trajectory"]["precision"] == "float32");
    CHECK(j["trajectory"]["recomputed_in_double"] == in_double);
    CHECK(j["trajectory"]["points"].back()["precision"] == "double");
  }
  SECTION("a coarser refine level recomputes exactly the points at or below it") {
    auto single = exact;
    single.precision = Precision::kFloat32;
    single.float32_refine_below = 0.05;
    const auto r = plaudit::testing::Audit(run, single);
    const auto& q = r.trajectory.points;
    std::vector<double> peak(q.front().grad.size(), 0.0);
    for (const auto& p : pts) for (std::size_t l = 0; l < peak.size(); ++l) peak[l] = std::max(peak[l], p.grad[l].sup);
    int in_double = 0;
    for (std::size_t i = 0; i < q.size(); ++i) {
      // Decided on the float32 figures, so compare with a margin around the level.
      bool low = false, high = true;
      for (std::size_t l = 0; l < peak.size(); ++l) {
        low = low || pts[i].grad[l].sup < 0.049 * peak[l];
        high = high && pts[i].grad[l].sup > 0.051 * peak[l];
      }
      if (low || i + 1 == q.size()) CHECK_FALSE(q[i].float32);
      if (high && i + 1 < q.size()) CHECK(q[i].float32);
      in_double += q[i].float32 ? 0 : 1;
    }
    WARN("refine level 0.05: " << in_double << " of " << q.size() << " points recomputed in double");
    CHECK(in_double > 1);
    CHECK(in_double < static_cast<int>(q.size()));
  }
  SECTION("refining every point reproduces the double report") {
    auto single = exact;
    single.precision = Precision::kFloat32;
    single.float32_refine_below = 1.0;  // every point's sup is at most its layer's peak
    const auto r = plaudit::testing::Audit(run, single);
    CHECK(r.trajectory.recomputed_in_double == 31);
    nlohmann::json a = plaudit::report::AuditReportToJson(r);
    CHECK(a["trajectory"]["precision"] == "float32");
    a["trajectory"].erase("precision");
    a["trajectory"].erase("recomputed_in_double");
    for (auto& p : a["trajectory"]["points"]) {
      CHECK(p["precision"] == "double");
      p.erase("precision");
    }
    CHECK(a == ref_json);
  }
}
