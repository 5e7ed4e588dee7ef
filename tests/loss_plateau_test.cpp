// Check `loss-plateau`: synthetic loss curves whose window medians have closed forms.
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <string>
#include <vector>

#include "plaudit/checks/loss_plateau.h"
#include "plaudit/core/error.h"

namespace {

using plaudit::checks::LossPlateauOptions;
using plaudit::checks::LossSeries;
using plaudit::checks::RunLossPlateau;
using plaudit::checks::Status;

// Steps first, first+stride, ..., last with loss f(step).
template <typename F>
LossSeries Curve(std::int64_t first, std::int64_t last, std::int64_t stride, F f) {
  LossSeries s;
  s.source = "scalars";
  for (std::int64_t t = first; t <= last; t += stride) {
    s.steps.push_back(t);
    s.loss.push_back(f(static_cast<double>(t)));
  }
  return s;
}

double Exp400(double t) { return std::exp(-t / 400.0); }

}  // namespace

TEST_CASE("loss-plateau passes on a flat noisy loss", "[loss-plateau]") {
  // Deterministic wobble of amplitude 5e-4 on a level of 0.3: at most 2 * 5e-4 / 0.3 = 0.33%
  // between any two medians, below the 1% threshold.
  const LossSeries s = Curve(0, 1000, 10, [](double t) { return 0.3 + 5e-4 * std::sin(0.73 * t); });
  const auto r = RunLossPlateau(s, 1.0, LossPlateauOptions{});
  CHECK(r.name == "loss-plateau");
  CHECK(r.status == Status::kPass);
  CHECK(std::fabs(r.statistic) <= 2.0 * 5e-4 / (0.3 - 5e-4));
  CHECK(r.threshold == 1e-2);
  CHECK(r.detail["window_start_step"] == 800);
  CHECK(r.detail["window_end_step"] == 1000);
  CHECK(r.detail["window_points"] == 21);
  CHECK(r.detail["source"] == "scalars");
  CHECK(r.detail["points"] == 101);
}

TEST_CASE("loss-plateau fails while an exponential decay is still going", "[loss-plateau]") {
  const LossSeries s = Curve(0, 1000, 10, Exp400);
  const auto r = RunLossPlateau(s, 1.0, LossPlateauOptions{});
  CHECK(r.status == Status::kFail);
  // Window = steps 800..1000 (21 points), fifths of round(21/5) = 4 points: the medians are the
  // means of the middle two of a monotone run (closed form).
  const double m_first = 0.5 * (Exp400(810) + Exp400(820));
  const double m_last = 0.5 * (Exp400(980) + Exp400(990));
  CHECK(r.detail["fifth_points"] == 4);
  CHECK(r.detail["m_first"].get<double>() == Approx(m_first).epsilon(1e-14));
  CHECK(r.detail["m_last"].get<double>() == Approx(m_last).epsilon(1e-14));
  CHECK(r.statistic == Approx((m_first - m_last) / m_last).epsilon(1e-12));
  CHECK(r.detail["delta_abs"].get<double>() == Approx(m_first - m_last).epsilon(1e-12));
  CHECK(r.detail["rising"] == false);
  // Strictly falling window: S = -n(n-1)/2, z = -(n(n-1)/2 - 1)/sqrt(n(n-1)(2n+5)/18), tau = -1
  // (closed form, n = 21).
  const auto& mk = r.detail["mann_kendall"];
  CHECK(mk["S"] == -210);
  CHECK(mk["z"].get<double>() == Approx(-209.0 / std::sqrt(21.0 * 20.0 * 47.0 / 18.0)).epsilon(1e-13));
  CHECK(mk["tau"].get<double>() == Approx(-1.0).epsilon(1e-15));
  CHECK(mk["p_decreasing"].get<double>() < 1e-6);
}

TEST_CASE("loss-plateau passes a loss still halving but at 1e-5 of the baseline", "[loss-plateau]") {
  // Halves every 50 steps. The fifth medians are means of (810, 820) and (980, 990), each pair
  // 170 steps apart, so m_first / m_last = 2^(170/50) exactly (closed form); the absolute drop
  // is below 1e-5 * L0 < abs_threshold = 1e-4.
  const LossSeries s = Curve(0, 1000, 10, [](double t) { return 1e-5 * std::exp2(-t / 50.0); });
  const auto r = RunLossPlateau(s, 1.0, LossPlateauOptions{});
  CHECK(r.status == Status::kPass);
  CHECK(r.statistic == Approx(std::exp2(170.0 / 50.0) - 1.0).epsilon(1e-12));
  CHECK(r.detail["delta_abs"].get<double>() < 1e-5);
  CHECK(r.detail["delta_abs"].get<double>() > 0.0);
  // Same curve with the absolute test switched off: fails on the relative drop.
  LossPlateauOptions strict;
  strict.abs_threshold = 0.0;
  CHECK(RunLossPlateau(s, 1.0, strict).status == Status::kFail);
}

TEST_CASE("loss-plateau window follows the step range for uneven steps", "[loss-plateau]") {
  SECTION("sparse tail: too few points in the last 20%, so the last 8 are taken") {
    LossSeries s = Curve(0, 99, 1, Exp400);
    for (std::int64_t t : {200, 400, 600, 800, 1000}) {
      s.steps.push_back(t);
      s.loss.push_back(Exp400(static_cast<double>(t)));
    }
    const auto r = RunLossPlateau(s, 1.0, LossPlateauOptions{});
    CHECK(r.detail["window_points"] == 8);
    CHECK(r.detail["window_start_step"] == 97);
  }
  SECTION("dense tail: every point in [800, 1000]") {
    LossSeries s = Curve(800, 1000, 5, Exp400);
    s.steps.insert(s.steps.begin(), {0, 500});
    s.loss.insert(s.loss.begin(), {1.0, Exp400(500)});
    const auto r = RunLossPlateau(s, 1.0, LossPlateauOptions{});
    CHECK(r.detail["window_points"] == 41);
    CHECK(r.detail["window_start_step"] == 800);
  }
  SECTION("unsorted input is read in step order") {
    LossSeries s = Curve(0, 1000, 10, Exp400);
    std::reverse(s.steps.begin(), s.steps.end());
    std::reverse(s.loss.begin(), s.loss.end());
    const auto r = RunLossPlateau(s, 1.0, LossPlateauOptions{});
    CHECK(r.status == Status::kFail);
    CHECK(r.detail["window_start_step"] == 800);
    CHECK(r.detail["mann_kendall"]["S"] == -210);
  }
  SECTION("a wider tail fraction") {
    LossPlateauOptions o;
    o.tail_fraction = 0.5;
    const auto r = RunLossPlateau(Curve(0, 1000, 10, Exp400), 1.0, o);
    CHECK(r.detail["window_start_step"] == 500);
    CHECK(r.detail["window_points"] == 51);
  }
}

TEST_CASE("loss-plateau flags a rising loss as a plateau", "[loss-plateau]") {
  const LossSeries s = Curve(0, 1000, 10, [](double t) { return 0.2 + 1e-4 * t; });
  const auto r = RunLossPlateau(s, 1.0, LossPlateauOptions{});
  CHECK(r.status == Status::kPass);
  CHECK(r.statistic < 0.0);
  CHECK(r.detail["rising"] == true);
  CHECK(r.detail["mann_kendall"]["p_increasing"].get<double>() < 1e-6);
}

TEST_CASE("loss-plateau finds where the plateau starts", "[loss-plateau]") {
  // 0.2 + 0.8 (1 - t/500)^2 before step 500, exactly 0.2 after. Tolerance
  // max(1e-2 * 0.2, 1e-4 * 1) = 2e-3: within it from 0.8 (1 - t/500)^2 <= 2e-3, i.e. t >= 475,
  // so on a grid of 10 the first such step is 480 (at 470 the excess is 2.88e-3).
  const LossSeries s = Curve(0, 1000, 10, [](double t) {
    return t < 500 ? 0.2 + 0.8 * (1 - t / 500) * (1 - t / 500) : 0.2;
  });
  const auto r = RunLossPlateau(s, 1.0, LossPlateauOptions{});
  CHECK(r.status == Status::kPass);
  CHECK(r.detail["plateau_start_step"] == 480);
  CHECK(r.detail["plateau_level"].get<double>() == 0.2);
  CHECK(r.detail["plateau_level_rel"].get<double>() == Approx(0.2 / 1.0));
  CHECK(r.detail["plateau_tolerance"].get<double>() == Approx(2e-3).epsilon(1e-12));
  // With L0 = 4 the relative level is a quarter of that.
  CHECK(RunLossPlateau(s, 4.0, LossPlateauOptions{}).detail["plateau_level_rel"].get<double>() ==
        Approx(0.05));
}

TEST_CASE("loss-plateau skips thin or non-finite input", "[loss-plateau]") {
  const LossPlateauOptions o;
  SECTION("fewer than min_points points") {
    const auto r = RunLossPlateau(Curve(0, 60, 10, Exp400), 1.0, o);
    CHECK(r.status == Status::kSkip);
    CHECK(r.detail["reason"].get<std::string>().find("7 loss points") != std::string::npos);
  }
  SECTION("a NaN loss") {
    LossSeries s = Curve(0, 1000, 10, Exp400);
    s.loss[42] = std::nan("");
    const auto r = RunLossPlateau(s, 1.0, o);
    CHECK(r.status == Status::kSkip);
    CHECK(r.detail["reason"].get<std::string>().find("step 420") != std::string::npos);
  }
  SECTION("a baseline that is not positive") {
    CHECK(RunLossPlateau(Curve(0, 1000, 10, Exp400), 0.0, o).status == Status::kSkip);
    CHECK(RunLossPlateau(Curve(0, 1000, 10, Exp400), std::nan(""), o).status == Status::kSkip);
  }
}

TEST_CASE("loss-plateau rejects bad options and mismatched input", "[loss-plateau]") {
  LossPlateauOptions o;
  std::string why;
  CHECK(o.IsValid(&why));
  o.min_points = 4;
  CHECK_FALSE(o.IsValid(&why));
  CHECK(why.find("min_points") != std::string::npos);
  o = LossPlateauOptions{};
  o.tail_fraction = 0.0;
  CHECK_FALSE(o.IsValid(nullptr));
  o = LossPlateauOptions{};
  o.rel_threshold = -1.0;
  CHECK_FALSE(o.IsValid(nullptr));
  try {
    RunLossPlateau(Curve(0, 1000, 10, Exp400), 1.0, o);
    FAIL("expected plaudit::Error");
  } catch (const plaudit::Error& e) {
    CHECK(e.code() == plaudit::ExitCode::kUsage);
  }
  LossSeries bad = Curve(0, 1000, 10, Exp400);
  bad.loss.pop_back();
  try {
    RunLossPlateau(bad, 1.0, LossPlateauOptions{});
    FAIL("expected plaudit::Error");
  } catch (const plaudit::Error& e) {
    CHECK(e.code() == plaudit::ExitCode::kBadData);
  }
}
