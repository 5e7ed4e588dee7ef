#pragma once
// Covering radius of a set of directions on the sphere S^{k-1}: the angular radius of the largest
// cap that contains none of them,
//     theta = max over unit u of min_j angle(u, v_j)      (radians, in [0, pi]).
// Estimated by many uniform random probes, scored a block of probes at a time by matrix products
// (probes x k) * (k x n) -> largest cosine per probe (a probe stops being scored once it cannot
// rank among the best, which keeps spread-out sets cheap), then the best few mutually distinct
// probes are refined to a local maximum with NLopt's SLSQP on the epigraph form
//     min s  s.t.  u.v_j <= s for the directions near the probe,  |u|^2 = 1   (theta = acos s).
// The refined maximum is a vertex of the spherical Voronoi diagram, exact up to the optimiser's
// tolerance whenever a probe lands in its basin; the estimate is otherwise a lower bound.
#include <cstdint>
#include <random>
#include <vector>

#include <Eigen/Core>

namespace plaudit::stats {

struct CoveringRadiusOptions {
  int probes = 20000;      // uniform random probes; must be >= 1
  int refine = 8;          // best (mutually distinct) probes refined with SLSQP; 0 = none
  int block = 256;         // probes per block of matrix products (block x 64 cosines each)
  int max_evaluations = 300;  // SLSQP evaluations per refined probe
};

struct CoveringRadius {
  double theta = 0.0;        // radians
  Eigen::VectorXd centre;    // unit k-vector u attaining theta: the centre of the empty cap
  int probes = 0;            // probes scored
  int refined = 0;           // probes handed to the local optimiser
  double probe_theta = 0.0;  // best value among the raw probes, before refinement
};

// `directions` is n x k (n >= 1, k >= 2); each row is normalised here, a zero row is an error
// (std::invalid_argument). Deterministic for a given engine state.
CoveringRadius EstimateCoveringRadius(const Eigen::MatrixXd& directions,
                                      const CoveringRadiusOptions& options, std::mt19937_64& rng);

// n x k matrix of i.i.d. directions uniform on S^{k-1} (normalised Gaussian rows).
Eigen::MatrixXd UniformDirections(Eigen::Index n, Eigen::Index k, std::mt19937_64& rng);

struct CoveringRadiusNull {
  double median = 0.0;          // median of `replicas` (mean of the middle two when even)
  std::vector<double> replicas; // theta of each replica, radians, in replica order
};

// The same estimate for n i.i.d. uniform directions on S^{k-1}, `replicas` times. Replica r
// draws from its own engine seeded by (seed, r), so results do not depend on the replica count.
CoveringRadiusNull UniformCoveringRadiusNull(Eigen::Index n, Eigen::Index k, int replicas,
                                             const CoveringRadiusOptions& options,
                                             std::uint64_t seed);

}  // namespace plaudit::stats
