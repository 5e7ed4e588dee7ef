// Width scaling of the built-in trainer (train/trainer.h) under the mean-field parameterization:
// multiplier 1/n_{l-1} on every layer above the first, O(1) i.i.d. initial weights (train/init.h)
// and per-layer step sizes lr * model::WeightGradScale. Full-batch gradient descent on a fixed
// data set then has a width-independent limit, in which the neurons' parameters follow a
// deterministic evolution of their distribution, and a width-n network stays within O(1/sqrt(n))
// of it: the law of large numbers / propagation of chaos of Mei, Montanari & Nguyen, "A mean
// field view of the landscape of two-layer neural networks" (PNAS 2018), and for deeper
// networks Nguyen & Pham, "A rigorous framework for the mean field limit of multilayer neural
// networks" (2020). On runs written by train::Train (losses read back from scalars.jsonl,
// weights from the snapshots), this checks that
//   1. the loss curves of the first 200 steps approach the widest network's, with a deviation
//      that falls like n^(-1/2);
//   2. they do fall: mean-field training moves in O(1) time whatever the width;
//   3. every layer's weights move by the same O(1) amount at every width, the property the
//      per-layer step sizes exist for (trainer.h).
// Checks 2 and 3 catch broken scalings that 1 alone misses: a layer whose step is a factor n too
// small freezes, and the network still has a width limit (the random-features one).
// Whether the logged losses equal those recomputed from the snapshots is cli_test.cpp's
// "train then inspect" case.
#include <algorithm>
#include <cmath>
#include <cstdint>
#include <filesystem>
#include <string>
#include <vector>

#include <catch2/catch.hpp>

#include "plaudit/io/run_dir.h"
#include "plaudit/model/network.h"
#include "plaudit/train/teacher.h"
#include "plaudit/train/trainer.h"
#include "support/scenario.h"
#include "support/temp_dir.h"

namespace {

namespace fs = std::filesystem;
using Eigen::Index;
using plaudit::testing::TempDir;

constexpr std::int64_t kSteps = 200;
constexpr double kLr = 0.5;  // the trainer's default step size: O(1) time per step under mean-field

// Tolerances, from the values measured on these seeds and on three other sets of seeds
// (1-8, 101-108, 201-208, 301-308 for the two-layer network; 1-6 .. 301-306 for the three-layer):
// - consecutive widths differ by 4x, so n^(-1/2) predicts a deviation ratio of 2; measured
//   1.7-2.9 (two-layer) and 2.1-2.5 (three-layer). Required: at least kMinRatio, and at most
//   kMaxRatio where only two widths give one ratio.
constexpr double kMinRatio = 1.3;
constexpr double kMaxRatio = 3.2;
// - least-squares exponent of deviation ~ n^-a over 64, 256, 1024: measured a = 0.55-0.67 (the
//   64-wide network sits a little above the asymptotic rate). With the step sizes off by a
//   factor sqrt(n) or n the narrow networks outrun the wide ones: a = 1.02 and 1.23.
constexpr double kMinExponent = 0.35;
constexpr double kMaxExponent = 0.85;
// - the reference curve falls from 0.28 to 3e-4 (two-layer) or 6e-4 (three-layer) in 200 steps;
//   with every step size unscaled it stays above 0.26.
constexpr double kMaxFinalFraction = 0.01;
// - per-layer RMS weight change at 64 and 256 within 5% (two-layer) and 7% (three-layer) of the
//   widest network's; a layer whose step is a factor n off moves a factor ~n less or more.
constexpr double kMoveTol = 0.15;
constexpr double kMinMove = 0.1;  // measured 0.21-1.31: every layer moves by O(1)

// Planted smooth teacher (train/teacher.h): y = sum_i a_i tanh(w_i . x + b_i), d = 4, 2 neurons,
// 32 rows, no noise. Few rows keep 1024-wide runs cheap; the limit holds for any fixed data set.
plaudit::model::Dataset TeacherData() {
  return plaudit::testing::TeacherRows(plaudit::train::TeacherKind::kSmooth, 4, 2, 32, 7);
}

struct Trajectory {
  std::vector<double> loss;   // logged full-batch loss at steps 0 .. kSteps
  std::vector<double> moved;  // per layer: RMS over entries of W_l(kSteps) - W_l(0)
};

// Train one tanh network with the trainer's seed policy and read the run back from disk.
Trajectory TrainAndRead(const plaudit::model::Dataset& data, const std::vector<Index>& widths, std::uint64_t seed,
                        const TempDir& dir) {
  plaudit::train::TrainOptions o;
  o.widths = widths;
  o.activation = plaudit::model::Activation::kTanh;
  o.parameterization = plaudit::io::Parameterization::kMeanField;
  o.lr = kLr;
  o.steps = kSteps;
  o.save_every = 0;  // steps 0 and kSteps
  o.log_every = 1;
  o.seed = seed;
  const fs::path out = dir / ("w" + std::to_string(widths.front()) + "-d" + std::to_string(widths.size()) + "-s" +
                              std::to_string(seed));
  plaudit::train::Train(data, o, out);

  const plaudit::io::RunDir run(out);
  Trajectory t;
  const auto log = run.Scalars();
  std::vector<std::int64_t> steps, expected_steps;
  for (const auto& r : log.records) {
    steps.push_back(r.step);
    t.loss.push_back(r.loss);
  }
  for (std::int64_t i = 0; i <= kSteps; ++i) expected_steps.push_back(i);
  REQUIRE(steps == expected_steps);
  const auto snaps = run.Snapshots();
  REQUIRE(snaps.size() == 2);
  const auto first = plaudit::model::NetworkFromArrays(run.manifest(), run.ReadSnapshot(snaps.front()),
                                                       snaps.front().path.string());
  const auto last = plaudit::model::NetworkFromArrays(run.manifest(), run.ReadSnapshot(snaps.back()),
                                                      snaps.back().path.string());
  for (int l = 0; l < first.depth(); ++l) {
    const Eigen::MatrixXd dw = last.layers[static_cast<std::size_t>(l)].weight - first.layers[static_cast<std::size_t>(l)].weight;
    t.moved.push_back(dw.norm() / std::sqrt(static_cast<double>(dw.size())));
  }
  return t;
}

std::vector<double> MeanCurve(const std::vector<Trajectory>& runs, std::size_t skip) {
  std::vector<double> mean(runs.front().loss.size(), 0.0);
  double count = 0.0;
  for (std::size_t s = 0; s < runs.size(); ++s) {
    if (s == skip) continue;
    for (std::size_t i = 0; i < mean.size(); ++i) mean[i] += runs[s].loss[i];
    count += 1.0;
  }
  for (double& v : mean) v /= count;
  return mean;
}

double MaxDeviation(const std::vector<double>& curve, const std::vector<double>& ref) {
  double worst = 0.0;
  for (std::size_t i = 0; i < curve.size(); ++i) worst = std::max(worst, std::abs(curve[i] - ref[i]));
  return worst / ref.front();
}

struct WidthStudy {
  std::vector<Index> widths;      // ascending; the last is the reference
  std::vector<double> reference;  // mean loss curve of the widest network over the seeds
  // Per width: mean over seeds of max_t |L_s(t) - reference(t)| / reference(0).
  std::vector<double> deviation;
  std::vector<std::vector<double>> moved;  // per width, per layer: mean over seeds
};

// `depth` hidden layers of each width, seeds 1 .. seeds.
WidthStudy Study(const std::vector<Index>& widths, int depth, int seeds) {
  const auto data = TeacherData();
  const TempDir dir("mean-field-width");
  WidthStudy study;
  study.widths = widths;
  std::vector<std::vector<Trajectory>> runs(widths.size());
  for (std::size_t w = 0; w < widths.size(); ++w) {
    for (int s = 1; s <= seeds; ++s) {
      runs[w].push_back(TrainAndRead(data, std::vector<Index>(static_cast<std::size_t>(depth), widths[w]),
                                     static_cast<std::uint64_t>(s), dir));
    }
  }
  const std::size_t widest = widths.size() - 1;
  const std::size_t none = runs[widest].size();
  study.reference = MeanCurve(runs[widest], none);
  const double s_count = static_cast<double>(seeds);
  for (std::size_t w = 0; w < widths.size(); ++w) {
    double dev = 0.0;
    std::vector<double> moved(runs[w].front().moved.size(), 0.0);
    for (std::size_t s = 0; s < runs[w].size(); ++s) {
      if (w == widest) {
        // Against the mean of the other seeds (leave one out), whose own noise inflates the
        // deviation's variance by S / (S - 1): scaled back so every width is measured alike.
        dev += MaxDeviation(runs[w][s].loss, MeanCurve(runs[w], s)) * std::sqrt((s_count - 1.0) / s_count);
      } else {
        dev += MaxDeviation(runs[w][s].loss, study.reference);
      }
      for (std::size_t l = 0; l < moved.size(); ++l) moved[l] += runs[w][s].moved[l] / s_count;
    }
    study.deviation.push_back(dev / s_count);
    study.moved.push_back(moved);
  }
  return study;
}

// a in deviation ~ n^-a, by least squares on log-log axes.
double FittedExponent(const WidthStudy& st) {
  double mx = 0.0, my = 0.0;
  const double k = static_cast<double>(st.widths.size());
  for (std::size_t w = 0; w < st.widths.size(); ++w) {
    mx += std::log(static_cast<double>(st.widths[w])) / k;
    my += std::log(st.deviation[w]) / k;
  }
  double sxy = 0.0, sxx = 0.0;
  for (std::size_t w = 0; w < st.widths.size(); ++w) {
    const double dx = std::log(static_cast<double>(st.widths[w])) - mx;
    sxy += dx * (std::log(st.deviation[w]) - my);
    sxx += dx * dx;
  }
  return -sxy / sxx;
}

void CheckCommon(const WidthStudy& st) {
  const auto& ref = st.reference;
  INFO("reference loss: step 0 " << ref.front() << ", step " << kSteps << " " << ref.back());
  for (std::size_t w = 0; w < st.widths.size(); ++w) {
    INFO("width " << st.widths[w] << ": deviation " << st.deviation[w] << ", sqrt(n) * deviation "
                  << st.deviation[w] * std::sqrt(static_cast<double>(st.widths[w])));
    CHECK(std::isfinite(st.deviation[w]));
  }
  REQUIRE(std::isfinite(ref.back()));
  CHECK(ref.back() <= kMaxFinalFraction * ref.front());
  for (std::size_t w = 0; w + 1 < st.widths.size(); ++w) {
    INFO("width " << st.widths[w] << " vs " << st.widths[w + 1] << ": deviation ratio "
                  << st.deviation[w] / st.deviation[w + 1]);
    CHECK(st.deviation[w] >= kMinRatio * st.deviation[w + 1]);
  }
  const auto& widest = st.moved.back();
  for (std::size_t l = 0; l < widest.size(); ++l) {
    INFO("layer " << l << ": RMS weight change " << widest[l] << " at width " << st.widths.back());
    CHECK(widest[l] >= kMinMove);
    for (std::size_t w = 0; w + 1 < st.widths.size(); ++w) {
      INFO("width " << st.widths[w] << ": " << st.moved[w][l]);
      CHECK(std::abs(st.moved[w][l] / widest[l] - 1.0) <= kMoveTol);
    }
  }
}

}  // namespace

TEST_CASE("mean-field two-layer networks: loss curves converge in width at the n^-1/2 rate", "[train][mean-field-width]") {
  // d -> n -> 1, n = 64, 256, 1024, eight seeds each.
  const WidthStudy st = Study({64, 256, 1024}, 1, 8);
  CheckCommon(st);
  const double a = FittedExponent(st);
  INFO("deviation ~ n^-a with a = " << a << " (mean-field law of large numbers: 1/2)");
  CHECK(a >= kMinExponent);
  CHECK(a <= kMaxExponent);
}

TEST_CASE("mean-field three-layer networks: loss curves converge in width, every layer moves O(1)", "[train][mean-field-width]") {
  // d -> n -> n -> 1, n = 64, 256, six seeds each: the middle layer's step is scaled by n^2.
  const WidthStudy st = Study({64, 256}, 2, 6);
  CheckCommon(st);
  INFO("deviation ratio 64 vs 256: " << st.deviation[0] / st.deviation[1] << " (n^-1/2: 2)");
  CHECK(st.deviation[0] <= kMaxRatio * st.deviation[1]);
}
