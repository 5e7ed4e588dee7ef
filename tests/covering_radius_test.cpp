// Covering radius (largest empty cap) against classical closed forms.
#include <cmath>
#include <random>
#include <vector>

#include <Eigen/Core>
#include <Eigen/Geometry>
#include <catch2/catch.hpp>

#include "plaudit/stats/covering_radius.h"

namespace {

using plaudit::stats::CoveringRadiusOptions;
using plaudit::stats::EstimateCoveringRadius;

const double kPi = std::acos(-1.0);

double Degrees(double radians) { return radians * 180.0 / kPi; }

double Theta(const Eigen::MatrixXd& points, std::uint64_t seed = 1) {
  std::mt19937_64 rng(seed);
  return EstimateCoveringRadius(points, CoveringRadiusOptions{}, rng).theta;
}

// Regular tetrahedron: alternate vertices of the cube (+-1, +-1, +-1); v_i . v_j = -1/3.
Eigen::MatrixXd Tetrahedron() {
  Eigen::MatrixXd v(4, 3);
  v << 1, 1, 1, 1, -1, -1, -1, 1, -1, -1, -1, 1;
  return v;
}

Eigen::MatrixXd Octahedron() {
  Eigen::MatrixXd v(6, 3);
  v << 1, 0, 0, -1, 0, 0, 0, 1, 0, 0, -1, 0, 0, 0, 1, 0, 0, -1;
  return v;
}

// Regular icosahedron: cyclic permutations of (0, +-1, +-phi), edge length 2.
Eigen::MatrixXd Icosahedron() {
  const double phi = (1.0 + std::sqrt(5.0)) / 2.0;
  Eigen::MatrixXd v(12, 3);
  int row = 0;
  for (double a : {-1.0, 1.0}) {
    for (double b : {-phi, phi}) {
      v.row(row++) << 0, a, b;
      v.row(row++) << a, b, 0;
      v.row(row++) << b, 0, a;
    }
  }
  return v;
}

// A rotation about a random axis by a random angle (Rodrigues' formula, via AngleAxis).
Eigen::MatrixXd RandomRotation(std::uint64_t seed) {
  std::mt19937_64 rng(seed);
  std::normal_distribution<double> normal;
  std::uniform_real_distribution<double> angle(0.0, 2.0 * kPi);
  const Eigen::Vector3d axis(normal(rng), normal(rng), normal(rng));
  return Eigen::AngleAxisd(angle(rng), axis.normalized()).toRotationMatrix();
}

}  // namespace

TEST_CASE("covering radius of the Platonic vertex sets on S^2", "[covering-radius]") {
  // Classical geometry: the largest empty cap of a vertex set of a regular polyhedron is centred
  // on a face centre; its radius is the angle from the face centre to the face's vertices.
  // Tetrahedron: the face centre opposite v_4 is -v_4, so cos theta = -v_1 . v_4 = 1/3.
  CHECK(Theta(Tetrahedron()) == Approx(std::acos(1.0 / 3.0)).margin(1e-7));
  CHECK(Degrees(std::acos(1.0 / 3.0)) == Approx(70.5288).margin(1e-4));
  // Octahedron: face centre (1,1,1)/sqrt 3 against vertex e_1: cos theta = 1/sqrt 3.
  CHECK(Theta(Octahedron()) == Approx(std::acos(1.0 / std::sqrt(3.0))).margin(1e-7));
  CHECK(Degrees(std::acos(1.0 / std::sqrt(3.0))) == Approx(54.7356).margin(1e-4));
  // Icosahedron, edge a = 2, circumradius R = sqrt(1 + phi^2): the face's circumradius is
  // a / sqrt 3, so sin theta = (2 / sqrt 3) / R.
  const double phi = (1.0 + std::sqrt(5.0)) / 2.0;
  const double icosahedron = std::asin(2.0 / std::sqrt(3.0 * (1.0 + phi * phi)));
  CHECK(Theta(Icosahedron()) == Approx(icosahedron).margin(1e-7));
  CHECK(Degrees(icosahedron) == Approx(37.3774).margin(1e-4));
}

TEST_CASE("covering radius is rotation invariant", "[covering-radius]") {
  // A rotation maps empty caps to empty caps of the same radius.
  for (std::uint64_t seed : {11u, 12u, 13u}) {
    const Eigen::MatrixXd rotated = Icosahedron() * RandomRotation(seed).transpose();
    CHECK(Theta(rotated, seed) == Approx(Theta(Icosahedron())).margin(1e-7));
  }
}

TEST_CASE("covering radius on the circle and of a single point", "[covering-radius]") {
  // n equally spaced points on S^1: the largest gap is 2 pi / n, its midpoint is pi / n away.
  for (int n : {2, 3, 5, 12, 40}) {
    Eigen::MatrixXd points(n, 2);
    for (int i = 0; i < n; ++i) {
      const double a = 0.7 + 2.0 * kPi * i / n;
      points.row(i) << std::cos(a), std::sin(a);
    }
    INFO("n = " << n);
    CHECK(Theta(points) == Approx(kPi / n).margin(1e-7));
  }
  // One point: its antipode is pi away, in any dimension.
  Eigen::MatrixXd one(1, 5);
  one << 0.3, -0.1, 0.8, 0.2, -0.4;
  std::mt19937_64 rng(3);
  const auto r = EstimateCoveringRadius(one, CoveringRadiusOptions{}, rng);
  CHECK(r.theta == Approx(kPi).margin(1e-6));
  CHECK(r.centre.dot(one.row(0).normalized()) == Approx(-1.0).margin(1e-10));
  CHECK(r.centre.norm() == Approx(1.0).epsilon(1e-12));
}

TEST_CASE("covering radius refinement beats the raw probes and is deterministic",
          "[covering-radius]") {
  std::mt19937_64 draw(5);
  const Eigen::MatrixXd points = plaudit::stats::UniformDirections(300, 5, draw);
  std::mt19937_64 a(9), b(9);
  const auto ra = EstimateCoveringRadius(points, CoveringRadiusOptions{}, a);
  const auto rb = EstimateCoveringRadius(points, CoveringRadiusOptions{}, b);
  CHECK(ra.theta == rb.theta);
  CHECK(ra.probes == 20000);
  CHECK(ra.refined == 8);
  CHECK(ra.theta >= ra.probe_theta);
  // The returned centre attains theta: its nearest direction is theta away.
  const double nearest = std::acos((points.rowwise().normalized() * ra.centre).maxCoeff());
  CHECK(nearest == Approx(ra.theta).margin(1e-12));
  CoveringRadiusOptions no_refine;
  no_refine.refine = 0;
  std::mt19937_64 c(9);
  CHECK(EstimateCoveringRadius(points, no_refine, c).theta == Approx(ra.probe_theta).margin(1e-12));
}

TEST_CASE("covering radius null on the circle matches the expected largest spacing",
          "[covering-radius]") {
  // Classical spacings result (Whitworth 1897; Fisher 1929): for n i.i.d. uniform points on a
  // circle of unit circumference, E[largest gap] = H_n / n, H_n the n-th harmonic number. The
  // covering radius is half the largest gap in radians: E[theta] = pi H_n / n.
  const int n = 10;
  double harmonic = 0.0;
  for (int i = 1; i <= n; ++i) harmonic += 1.0 / i;
  CoveringRadiusOptions options;
  options.probes = 2000;
  const auto null = plaudit::stats::UniformCoveringRadiusNull(n, 2, 400, options, 21);
  REQUIRE(null.replicas.size() == 400);
  double mean = 0.0, sq = 0.0;
  for (double t : null.replicas) mean += t;
  mean /= 400.0;
  for (double t : null.replicas) sq += (t - mean) * (t - mean);
  const double se = std::sqrt(sq / 399.0 / 400.0);
  CHECK(std::abs(mean - kPi * harmonic / n) < 4.0 * se);
  // The null is reproducible for a given seed.
  const auto again = plaudit::stats::UniformCoveringRadiusNull(n, 2, 400, options, 21);
  CHECK(again.replicas == null.replicas);
  CHECK(again.median == null.median);
}

TEST_CASE("covering radius rejects empty and zero input", "[covering-radius]") {
  std::mt19937_64 rng(1);
  CHECK_THROWS_AS(EstimateCoveringRadius(Eigen::MatrixXd(0, 3), {}, rng), std::invalid_argument);
  CHECK_THROWS_AS(EstimateCoveringRadius(Eigen::MatrixXd::Zero(2, 3), {}, rng),
                  std::invalid_argument);
  CHECK_THROWS_AS(EstimateCoveringRadius(Eigen::MatrixXd::Ones(2, 1), {}, rng),
                  std::invalid_argument);
}
