// Calibration of `residual-fit` over many seeds: on pure-noise residuals the permutation
// p-value is uniform, so P(p_a <= alpha) = alpha exactly (Fisher's permutation argument: the
// observed statistic is exchangeable with the B permuted ones); on a planted teacher the check
// must detect. Binomial bounds: a rate over n seeds has standard error sqrt(r (1 - r) / n).
#include <cmath>
#include <cstdio>
#include <random>

#include <Eigen/Core>
#include <catch2/catch.hpp>

#include "plaudit/checks/residual_fit.h"
#include "plaudit/model/dataset.h"
#include "plaudit/model/network.h"

namespace {

using Eigen::Index;
using Eigen::MatrixXd;
using Eigen::VectorXd;
using plaudit::checks::ResidualFitOptions;
using plaudit::checks::Status;
using plaudit::model::Activation;
using plaudit::model::DenseLayer;
using plaudit::model::Loss;
using plaudit::model::Network;

MatrixXd GaussianMatrix(Index rows, Index cols, std::mt19937_64& rng) {
  std::normal_distribution<double> normal;
  MatrixXd m(rows, cols);
  for (Index i = 0; i < m.size(); ++i) m(i) = normal(rng);
  return m;
}

// Output identically 0 (zero head), so the residual is -y.
Network ZeroOutput(Index d, std::mt19937_64& rng) {
  Network net;
  net.loss = Loss::kSquared;
  DenseLayer hidden;
  hidden.weight = GaussianMatrix(5, d, rng);
  hidden.bias = VectorXd::Zero(5);
  hidden.has_bias = true;
  hidden.activation = Activation::kTanh;
  DenseLayer head;
  head.weight = MatrixXd::Zero(1, 5);
  head.bias = VectorXd::Zero(1);
  head.has_bias = true;
  net.layers = {hidden, head};
  return net;
}

struct Rates {
  int runs = 0, fails = 0, a_rejects = 0, b_rejects = 0;
  double p_a_sum = 0.0;
  double rate(int count) const { return static_cast<double>(count) / runs; }
};

// Scenario seed s: x ~ N(0, I_d); y = signal * tanh(2 w.x) + noise with w = e_0.
Rates Run(int seeds, Index n, Index d, double signal, const ResidualFitOptions& base) {
  Rates r;
  for (int s = 0; s < seeds; ++s) {
    std::mt19937_64 rng(1000 + static_cast<std::uint64_t>(s));
    plaudit::model::Dataset data;
    data.x = GaussianMatrix(n, d, rng);
    data.y = signal * (2.0 * data.x.col(0)).array().tanh().matrix() + GaussianMatrix(n, 1, rng);
    ResidualFitOptions o = base;
    o.seed = static_cast<std::uint64_t>(s);
    const auto result = plaudit::checks::RunResidualFit(ZeroOutput(d, rng), data, 0.5, o);
    ++r.runs;
    r.fails += result.status == Status::kFail;
    const double p_a = result.detail["p_a"].get<double>();
    r.a_rejects += p_a <= o.alpha;
    r.b_rejects += result.detail["p_b"].is_number() && result.detail["p_b"].get<double>() <= o.alpha;
    r.p_a_sum += p_a;
  }
  return r;
}

void Print(const char* what, const Rates& r) {
  std::printf("residual-fit %s: %d runs, fail rate %.4f, P(p_a <= alpha) %.4f, P(p_b <= alpha) %.4f, mean p_a %.3f\n",
              what, r.runs, r.rate(r.fails), r.rate(r.a_rejects), r.rate(r.b_rejects), r.p_a_sum / r.runs);
}

ResidualFitOptions Small() {
  ResidualFitOptions o;
  o.features = 64;
  o.permutations = 99;
  o.new_neurons = 1;
  o.neuron_starts = 3;
  o.threads = 2;
  return o;
}

}  // namespace

TEST_CASE("residual-fit calibration, quick: noise is rarely flagged, a planted teacher always is", "[residual-fit]") {
  const Rates noise = Run(40, 400, 4, 0.0, Small());
  Print("noise (40 seeds)", noise);
  // Fails need p <= 0.01 from either statistic: at most ~2% of runs, so 4+ of 40 has
  // probability < 1% (binomial, n = 40, p = 0.02).
  CHECK(noise.fails <= 3);
  CHECK(noise.a_rejects <= 3);
  // Mean of 40 uniform p-values: 0.5 +- 0.046 (sd 1/sqrt(12 * 40)); 0.35..0.65 is > 3 sd.
  CHECK(noise.p_a_sum / noise.runs > 0.35);
  CHECK(noise.p_a_sum / noise.runs < 0.65);

  // Signal variance ~0.3 against noise variance 1: eta ~ 0.2, far above the thresholds at n = 400.
  const Rates planted = Run(40, 400, 4, 0.8, Small());
  Print("planted (40 seeds)", planted);
  CHECK(planted.fails >= 38);
}

TEST_CASE("residual-fit calibration sweep over 200 seeds", "[residual-fit][sweep]") {
  ResidualFitOptions o = Small();
  o.features = 256;
  o.new_neurons = 2;
  const int seeds = 200;
  const double se = std::sqrt(o.alpha * (1.0 - o.alpha) / seeds);
  const Rates noise = Run(seeds, 800, 6, 0.0, o);
  Print("noise sweep", noise);
  CHECK(noise.rate(noise.fails) <= o.alpha + 3.0 * se);
  CHECK(noise.rate(noise.a_rejects) <= o.alpha + 3.0 * se);
  CHECK(noise.rate(noise.b_rejects) <= o.alpha + 3.0 * se);
  // A weak teacher: signal variance ~0.12 against noise variance 1 (eta ~ 0.1).
  const Rates planted = Run(seeds, 800, 6, 0.5, o);
  Print("planted sweep", planted);
  CHECK(planted.rate(planted.fails) >= 0.95);
}
