// Mann-Kendall trend test: published worked examples, closed forms and NumPy brute force
// (tests/reference/make_mann_kendall_reference.py -> tests/fixtures/mann_kendall.json).
#include <catch2/catch.hpp>

#include <cmath>
#include <cstdint>
#include <fstream>
#include <random>
#include <stdexcept>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "plaudit/stats/mann_kendall.h"

namespace {

using plaudit::stats::MannKendall;
using plaudit::stats::MannKendallResult;

nlohmann::json LoadFixture() {
  std::ifstream in(std::string(PLAUDIT_FIXTURES) + "/mann_kendall.json");
  REQUIRE(in.good());
  return nlohmann::json::parse(in);
}

// S by the definition, pair by pair.
std::int64_t BruteForceS(const std::vector<double>& x) {
  std::int64_t s = 0;
  for (std::size_t i = 0; i < x.size(); ++i) {
    for (std::size_t j = i + 1; j < x.size(); ++j) s += (x[j] > x[i]) - (x[j] < x[i]);
  }
  return s;
}

double MonotoneZ(double n) {  // closed form: S = n(n-1)/2, no ties
  return (n * (n - 1.0) / 2.0 - 1.0) / std::sqrt(n * (n - 1.0) * (2.0 * n + 5.0) / 18.0);
}

}  // namespace

TEST_CASE("Mann-Kendall reproduces Gilbert (1987) Example 16.1", "[mann-kendall]") {
  const MannKendallResult r = MannKendall({10, 15, 14, 20});
  CHECK(r.n == 4);
  CHECK(r.S == 4);  // Gilbert (1987), Example 16.1: S = 4 (from memory)
  // Closed form with no ties: n(n-1)(2n+5)/18 = 4*3*13/18.
  CHECK(r.var_s == Approx(4.0 * 3.0 * 13.0 / 18.0).epsilon(1e-15));
  CHECK(r.z == Approx(3.0 / std::sqrt(156.0 / 18.0)).epsilon(1e-14));
  CHECK(r.tau == Approx(4.0 / 6.0).epsilon(1e-15));  // tau-a = S / (n(n-1)/2)
  // Gilbert reads the exact null from his Table A18 for n <= 10: P(S >= 4 | n = 4) = 0.167
  // (from memory). The committed script enumerates all 24 orderings to confirm it; the normal
  // approximation here gives 0.154, so the library is not asked to match the table.
  const nlohmann::json f = LoadFixture()["mann_kendall"]["gilbert_16_1"];
  CHECK(f["exact_p_increasing"].get<double>() == Approx(0.167).margin(5e-4));
  CHECK(r.p_increasing == Approx(f["p_increasing"].get<double>()).epsilon(1e-12));
}

TEST_CASE("Mann-Kendall reproduces the Holy Cross worked example with one tie", "[mann-kendall]") {
  // "A Mann-Kendall Example (By Hand)", College of the Holy Cross (mathcs.holycross.edu):
  // S = 54, V = (14)(13)(33)/18 - (2)(1)(9)/18, Z = 2.9058, one-sided p = .0018.
  const MannKendallResult r = MannKendall({12.9, 14.8, 13.2, 15.7, 13.8, 15.6, 12.9, 11.0, 17.3,
                                           15.9, 19.0, 18.3, 20.1, 21.7});
  CHECK(r.S == 54);
  CHECK(r.var_s == Approx((14.0 * 13.0 * 33.0 - 2.0 * 1.0 * 9.0) / 18.0).epsilon(1e-14));
  CHECK(r.z == Approx(2.9058).margin(5e-5));
  CHECK(r.p_increasing == Approx(0.0018).margin(5e-5));
  CHECK(r.p_two_sided == Approx(2.0 * r.p_increasing).epsilon(1e-12));
}

TEST_CASE("Mann-Kendall matches the NumPy brute-force fixture", "[mann-kendall]") {
  const nlohmann::json cases = LoadFixture()["mann_kendall"];
  for (const auto& item : cases.items()) {
    SECTION(item.key()) {
      const nlohmann::json& c = item.value();
      const MannKendallResult r = MannKendall(c["x"].get<std::vector<double>>());
      // tests/reference/make_mann_kendall_reference.py (NumPy + math.erfc, all pairs)
      CHECK(r.n == c["n"].get<std::int64_t>());
      CHECK(r.S == c["S"].get<std::int64_t>());
      CHECK(r.var_s == Approx(c["var_s"].get<double>()).epsilon(1e-13));
      CHECK(r.z == Approx(c["z"].get<double>()).epsilon(1e-12).margin(1e-300));
      CHECK(r.p_two_sided == Approx(c["p_two_sided"].get<double>()).epsilon(1e-10));
      CHECK(r.p_decreasing == Approx(c["p_decreasing"].get<double>()).epsilon(1e-10));
      CHECK(r.p_increasing == Approx(c["p_increasing"].get<double>()).epsilon(1e-10));
      if (c["tau"].is_null()) {
        CHECK(std::isnan(r.tau));
      } else {
        CHECK(r.tau == Approx(c["tau"].get<double>()).epsilon(1e-13));
      }
    }
  }
}

TEST_CASE("Mann-Kendall z on a monotone series equals the closed form", "[mann-kendall]") {
  for (int n : {3, 5, 10, 37, 200}) {
    std::vector<double> up(static_cast<std::size_t>(n));
    for (int i = 0; i < n; ++i) up[static_cast<std::size_t>(i)] = std::exp(0.1 * i);
    std::vector<double> down(up.rbegin(), up.rend());
    const double nn = static_cast<double>(n);
    const MannKendallResult a = MannKendall(up);
    const MannKendallResult b = MannKendall(down);
    // Closed form (no ties): S = +-n(n-1)/2, z = (n(n-1)/2 - 1)/sqrt(n(n-1)(2n+5)/18), tau = +-1.
    CHECK(a.S == static_cast<std::int64_t>(n) * (n - 1) / 2);
    CHECK(a.z == Approx(MonotoneZ(nn)).epsilon(1e-13));
    CHECK(b.z == Approx(-MonotoneZ(nn)).epsilon(1e-13));
    CHECK(a.tau == Approx(1.0).epsilon(1e-15));
    CHECK(b.tau == Approx(-1.0).epsilon(1e-15));
    // Normal tail by definition: P(Z >= z) = erfc(z / sqrt 2) / 2.
    CHECK(a.p_increasing == Approx(0.5 * std::erfc(MonotoneZ(nn) / std::sqrt(2.0))).epsilon(1e-12));
    CHECK(b.p_decreasing == Approx(a.p_increasing).epsilon(1e-12));
  }
}

TEST_CASE("Mann-Kendall rank counting agrees with the pairwise definition", "[mann-kendall]") {
  std::mt19937_64 rng(7);
  std::uniform_int_distribution<int> level(0, 9);  // few levels: many ties
  for (int trial = 0; trial < 20; ++trial) {
    std::vector<double> x(static_cast<std::size_t>(50 + trial * 7));
    for (double& v : x) v = 0.5 * level(rng) - 0.1 * trial;
    CHECK(MannKendall(x).S == BruteForceS(x));  // definition of S, all pairs
  }
}

TEST_CASE("Mann-Kendall degenerate inputs", "[mann-kendall]") {
  const MannKendallResult empty = MannKendall({});
  CHECK(empty.S == 0);
  CHECK(empty.var_s == 0.0);
  CHECK(empty.p_two_sided == 1.0);
  const MannKendallResult one = MannKendall({3.0});
  CHECK(one.var_s == 0.0);
  CHECK(std::isnan(one.tau));
  CHECK_THROWS_AS(MannKendall({1.0, std::nan(""), 2.0}), std::invalid_argument);
  CHECK_THROWS_AS(MannKendall({1.0, HUGE_VAL}), std::invalid_argument);
}
