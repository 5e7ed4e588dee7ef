// Check `gradient-decay` and the least-squares slope it rests on. Trajectories are built in
// memory; reference slopes come from tests/reference/make_mann_kendall_reference.py
// (numpy.polyfit with cov=True, cross-checked there against closed-form OLS).
#include <catch2/catch.hpp>

#include <cmath>
#include <cstdint>
#include <fstream>
#include <limits>
#include <stdexcept>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "plaudit/checks/gradient_decay.h"
#include "plaudit/core/error.h"
#include "plaudit/stats/regression.h"

namespace {

using plaudit::audit::Trajectory;
using plaudit::checks::DefaultGradientLayer;
using plaudit::checks::GradientDecayOptions;
using plaudit::checks::RunGradientDecay;
using plaudit::checks::Status;

nlohmann::json LoadFixture() {
  std::ifstream in(std::string(PLAUDIT_FIXTURES) + "/mann_kendall.json");
  REQUIRE(in.good());
  return nlohmann::json::parse(in);
}

// A 3-layer trajectory whose layer `layer0` has sup S(step) and mean S(step) / 2.
template <typename F>
Trajectory Build(const std::vector<std::int64_t>& steps, int layer0, F sup) {
  Trajectory t;
  t.frozen.assign(3, false);
  for (std::int64_t step : steps) {
    plaudit::audit::SnapshotPoint p;
    p.step = step;
    p.grad.resize(3);
    const double s = sup(static_cast<double>(step));
    p.grad[static_cast<std::size_t>(layer0)].sup = s;
    p.grad[static_cast<std::size_t>(layer0)].mean = 0.5 * s;
    p.grad[static_cast<std::size_t>(layer0)].p99 = 0.9 * s;
    t.points.push_back(p);
  }
  return t;
}

std::vector<std::int64_t> Steps(std::int64_t last, std::int64_t stride) {
  std::vector<std::int64_t> v;
  for (std::int64_t s = 0; s <= last; s += stride) v.push_back(s);
  return v;
}

}  // namespace

TEST_CASE("gradient-decay passes an exponentially decaying gradient", "[gradient-decay]") {
  const Trajectory t = Build(Steps(1000, 100), 1, [](double s) { return 0.8 * std::exp(-s / 200.0); });
  const auto r = RunGradientDecay(t, 1, GradientDecayOptions{});
  CHECK(r.name == "gradient-decay");
  CHECK(r.status == Status::kPass);
  CHECK(r.statistic == Approx(std::exp(-1000.0 / 200.0)).epsilon(1e-13));  // closed form: e^-5
  CHECK(r.threshold == 1e-2);
  CHECK(r.detail["layer"] == 2);
  CHECK(r.detail["max_sup_step"] == 0);
  CHECK(r.detail["max_sup"].get<double>() == 0.8);
  CHECK(r.detail["slope"].get<double>() == Approx(-1.0 / 200.0).epsilon(1e-10));  // d log S / dt
  CHECK(r.detail["slope_t"].get<double>() < -1e6);  // residuals are rounding only
  CHECK(r.detail["tail_points"] == 4);  // max(3, ceil(11 / 3))
  CHECK(r.detail["tail_start_step"] == 700);
  CHECK(r.detail["uniformity_last"].get<double>() == Approx(2.0));
  CHECK(r.detail["uniformity_ratio"].get<double>() == Approx(1.0));
  CHECK(r.detail["few_neurons_moving"] == false);
  CHECK(r.detail["sup"].size() == 11);
  CHECK(r.detail["p99"][0].get<double>() == Approx(0.72));
  // Against a stricter ratio than e^-5 the same curve has not decayed enough.
  GradientDecayOptions strict;
  strict.decay_ratio = 1e-3;
  CHECK(RunGradientDecay(t, 1, strict).status == Status::kFail);
}

TEST_CASE("gradient-decay fails a flat gradient", "[gradient-decay]") {
  const Trajectory t = Build(Steps(1000, 100), 2, [](double) { return 0.5; });
  const auto r = RunGradientDecay(t, 2, GradientDecayOptions{});
  CHECK(r.status == Status::kFail);
  CHECK(r.statistic == 1.0);
  CHECK(r.detail["decayed"] == false);
  CHECK(r.detail["growing"] == false);
  CHECK(r.detail["slope"].get<double>() == 0.0);
  CHECK(r.detail["slope_t"].get<double>() == 0.0);  // zero residuals and zero slope
}

TEST_CASE("gradient-decay fails a gradient rising over the last third", "[gradient-decay]") {
  const nlohmann::json g = LoadFixture()["gradient_rebound"];
  const auto steps_d = g["steps"].get<std::vector<double>>();
  const auto log_sup = g["log_sup"].get<std::vector<double>>();
  std::vector<std::int64_t> steps(steps_d.begin(), steps_d.end());
  std::size_t i = 0;
  const Trajectory t = Build(steps, 1, [&](double) { return std::exp(log_sup[i++]); });
  const auto r = RunGradientDecay(t, 1, GradientDecayOptions{});
  const nlohmann::json& tail = g["tail"];
  // numpy.polyfit(steps[-4:], log_sup[-4:], 1, cov=True) in the reference script.
  CHECK(r.status == Status::kFail);
  CHECK(r.detail["decayed"] == true);
  CHECK(r.detail["growing"] == true);
  CHECK(r.statistic == Approx(g["rho"].get<double>()).epsilon(1e-12));
  CHECK(r.detail["slope"].get<double>() == Approx(tail["slope"].get<double>()).epsilon(1e-9));
  CHECK(r.detail["slope_se"].get<double>() == Approx(tail["slope_se"].get<double>()).epsilon(1e-9));
  CHECK(r.detail["slope_t"].get<double>() == Approx(tail["slope_t"].get<double>()).epsilon(1e-9));
  CHECK(r.detail["slope_t"].get<double>() > 2.0);
}

TEST_CASE("gradient-decay flags a few neurons still moving", "[gradient-decay]") {
  Trajectory t = Build(Steps(1000, 100), 1, [](double s) { return std::exp(-s / 100.0); });
  t.points.back().grad[1].mean = t.points.back().grad[1].sup / 10.0;  // U(last) = 10, others 2
  const auto r = RunGradientDecay(t, 1, GradientDecayOptions{});
  CHECK(r.detail["uniformity_median"].get<double>() == Approx(2.0));
  CHECK(r.detail["uniformity_ratio"].get<double>() == Approx(5.0));
  CHECK(r.detail["few_neurons_moving"] == true);  // 10 > 4 * 2 (common practice factor)
  CHECK(r.status == Status::kPass);  // recorded, not judged
}

TEST_CASE("gradient-decay skips what it cannot judge", "[gradient-decay]") {
  const GradientDecayOptions o;
  SECTION("a frozen layer") {
    Trajectory t = Build(Steps(1000, 100), 1, [](double s) { return std::exp(-s / 100.0); });
    t.frozen[1] = true;
    const auto r = RunGradientDecay(t, 1, o);
    CHECK(r.status == Status::kSkip);
    CHECK(r.detail["reason"].get<std::string>().find("held fixed") != std::string::npos);
    CHECK(r.detail["layer"] == 2);
  }
  SECTION("too few snapshots") {
    const auto r = RunGradientDecay(Build(Steps(100, 100), 1, [](double) { return 1.0; }), 1, o);
    CHECK(r.status == Status::kSkip);
    CHECK(r.detail["reason"].get<std::string>().find("2 snapshots") != std::string::npos);
  }
  SECTION("a layer below the lowest one with gradients") {
    Trajectory t = Build(Steps(1000, 100), 0, [](double) { return 1.0; });
    t.lowest_grad_layer = 1;
    CHECK(RunGradientDecay(t, 0, o).status == Status::kSkip);
  }
  SECTION("a non-finite gradient") {
    Trajectory t = Build(Steps(1000, 100), 1, [](double) { return 1.0; });
    t.points[4].grad[1].sup = std::numeric_limits<double>::infinity();
    const auto r = RunGradientDecay(t, 1, o);
    CHECK(r.status == Status::kSkip);
    CHECK(r.detail["reason"].get<std::string>().find("step 400") != std::string::npos);
  }
  SECTION("a layer the trajectory does not hold is a usage error") {
    const Trajectory t = Build(Steps(1000, 100), 1, [](double) { return 1.0; });
    CHECK_THROWS_AS(RunGradientDecay(t, 5, o), plaudit::Error);
  }
}

TEST_CASE("gradient-decay default layer rule", "[gradient-decay]") {
  const std::vector<bool> none;
  // Rule table (1-based): 1 -> 1, 2 -> 2, 3 -> 2, 4+ -> last; results are 0-based.
  CHECK(DefaultGradientLayer(1, none) == 0);
  CHECK(DefaultGradientLayer(2, none) == 1);
  CHECK(DefaultGradientLayer(3, none) == 1);
  CHECK(DefaultGradientLayer(4, none) == 3);
  CHECK(DefaultGradientLayer(7, {false, false, false, false, false, false, false}) == 6);
  // Frozen choices fall back to the nearest trained layer, the higher one on a tie.
  CHECK(DefaultGradientLayer(2, {false, true}) == 0);
  CHECK(DefaultGradientLayer(3, {false, true, false}) == 2);
  CHECK(DefaultGradientLayer(3, {false, true, true}) == 0);
  CHECK(DefaultGradientLayer(4, {false, false, false, true}) == 2);
  CHECK(DefaultGradientLayer(5, {false, true, true, true, true}) == 0);
  CHECK(DefaultGradientLayer(3, {true, true, true}) == 1);  // nothing trained: keep the rule
  CHECK(DefaultGradientLayer(3, {false}) == 1);             // short mask: the rest trained
  CHECK_THROWS_AS(DefaultGradientLayer(0, none), plaudit::Error);

  GradientDecayOptions o;
  CHECK(plaudit::checks::ResolveGradientLayer(o, 4, none) == 3);
  o.layer = 1;
  CHECK(plaudit::checks::ResolveGradientLayer(o, 4, none) == 0);
  o.layer = 5;
  CHECK_THROWS_AS(plaudit::checks::ResolveGradientLayer(o, 4, none), plaudit::Error);
}

TEST_CASE("gradient-decay options are validated", "[gradient-decay]") {
  GradientDecayOptions o;
  std::string why;
  CHECK(o.IsValid(&why));
  o.min_snapshots = 2;
  CHECK_FALSE(o.IsValid(&why));
  CHECK(why.find("min_snapshots") != std::string::npos);
  o = GradientDecayOptions{};
  o.decay_ratio = 0.0;
  CHECK_FALSE(o.IsValid(nullptr));
  const Trajectory t = Build(Steps(1000, 100), 1, [](double) { return 1.0; });
  try {
    RunGradientDecay(t, 1, o);
    FAIL("expected plaudit::Error");
  } catch (const plaudit::Error& e) {
    CHECK(e.code() == plaudit::ExitCode::kUsage);
  }
}

TEST_CASE("least-squares slope and standard error match numpy.polyfit", "[gradient-decay][regression]") {
  const nlohmann::json cases = LoadFixture()["line_fit"];
  for (const auto& item : cases.items()) {
    SECTION(item.key()) {
      const nlohmann::json& c = item.value();
      const auto fit = plaudit::stats::FitLine(c["x"].get<std::vector<double>>(),
                                               c["y"].get<std::vector<double>>());
      CHECK(fit.slope == Approx(c["slope"].get<double>()).epsilon(1e-10));
      CHECK(fit.intercept == Approx(c["intercept"].get<double>()).epsilon(1e-9));
      CHECK(fit.slope_se == Approx(c["slope_se"].get<double>()).epsilon(1e-9));
      CHECK(fit.slope_t == Approx(c["slope_t"].get<double>()).epsilon(1e-9));
      CHECK(fit.residual_variance == Approx(c["residual_variance"].get<double>()).epsilon(1e-9));
    }
  }
}

TEST_CASE("least-squares slope on exact lines and bad input", "[gradient-decay][regression]") {
  using plaudit::stats::FitLine;
  // y = 3 - 2x through integer points: exact in binary, so residuals are exactly zero.
  const auto down = FitLine({0, 1, 2, 3}, {3, 1, -1, -3});
  CHECK(down.slope == -2.0);
  CHECK(down.intercept == 3.0);
  CHECK(down.slope_se == 0.0);
  CHECK(down.slope_t == -std::numeric_limits<double>::infinity());
  CHECK(FitLine({0, 1, 2}, {1, 3, 5}).slope_t == std::numeric_limits<double>::infinity());
  // Closed form for x = 0, 1, 2 and y = 0, 1, 0: slope 0, residuals (-1/3, 2/3, -1/3),
  // s^2 = (2/3) / 1, Sxx = 2, se = sqrt(1/3).
  const auto bump = FitLine({0, 1, 2}, {0, 1, 0});
  CHECK(bump.slope == Approx(0.0).margin(1e-15));
  CHECK(bump.slope_se == Approx(std::sqrt(1.0 / 3.0)).epsilon(1e-14));
  CHECK_THROWS_AS(FitLine({0, 1}, {0, 1}), std::invalid_argument);
  CHECK_THROWS_AS(FitLine({1, 1, 1}, {0, 1, 2}), std::invalid_argument);
  CHECK_THROWS_AS(FitLine({0, 1, 2}, {0, 1}), std::invalid_argument);
  CHECK_THROWS_AS(FitLine({0, 1, 2}, {0, std::nan(""), 2}), std::invalid_argument);
}

// Constant-step SGD: the full-batch gradient falls from its peak and then hovers at a noise
// floor (the stationary distribution of SGD has a non-zero gradient; e.g. Mandt, Hoffman & Blei,
// "Stochastic Gradient Descent as Approximate Bayesian Inference", JMLR 2017). The check warns.
TEST_CASE("gradient-decay warns at a flat noise floor below floor_ratio", "[gradient-decay]") {
  // Decays e-fold every 100 steps to a floor of 0.03 of the peak, with a +-10% alternating wobble.
  const Trajectory t = Build(Steps(3000, 100), 1, [](double s) {
    const double wobble = (static_cast<long>(s / 100.0) % 2 == 0) ? 1.1 : 0.9;
    return 0.03 * wobble + std::exp(-s / 100.0);
  });
  const auto r = RunGradientDecay(t, 1, GradientDecayOptions{});
  CHECK(r.status == Status::kWarn);
  CHECK(r.detail["settled"] == true);
  CHECK(r.statistic == Approx(0.033 / (1.0 + 0.033)).epsilon(1e-3));  // last point is a 1.1 wobble, peak at step 0
  CHECK(std::abs(r.detail["slope_t"].get<double>()) <= 2.0);
  // The exception is off when floor_ratio equals decay_ratio: then the same curve fails.
  GradientDecayOptions off;
  off.floor_ratio = off.decay_ratio;
  CHECK(RunGradientDecay(t, 1, off).status == Status::kFail);
}

TEST_CASE("gradient-decay still fails a floor above floor_ratio or a tail still falling", "[gradient-decay]") {
  // Hovering at 0.3 of the peak: not a floor far enough below it.
  const Trajectory high = Build(Steps(3000, 100), 1, [](double s) { return 0.3 + std::exp(-s / 100.0); });
  CHECK(RunGradientDecay(high, 1, GradientDecayOptions{}).status == Status::kFail);
  // Still falling steadily at 0.05 of the peak: not settled, keep waiting.
  const Trajectory falling = Build(Steps(3000, 100), 1, [](double s) { return 0.05 * std::exp(-(s - 3000.0) / 5000.0) * (s == 0 ? 20.0 : 1.0); });
  const auto r = RunGradientDecay(falling, 1, GradientDecayOptions{});
  CHECK(r.status == Status::kFail);
  CHECK(r.detail["settled"] == false);
  GradientDecayOptions bad;
  bad.floor_ratio = 1e-3;  // below decay_ratio
  std::string why;
  CHECK_FALSE(bad.IsValid(&why));
  CHECK(why.find("floor_ratio") != std::string::npos);
}
