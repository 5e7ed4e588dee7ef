#include "plaudit/stats/covering_radius.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <numeric>
#include <queue>
#include <stdexcept>
#include <string>

#include <nlopt.hpp>

namespace plaudit::stats {
namespace {

using RowMajorMatrix = Eigen::Matrix<double, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor>;

double AngleOfCosine(double c) { return std::acos(std::clamp(c, -1.0, 1.0)); }

Eigen::MatrixXd NormalisedRows(const Eigen::MatrixXd& directions) {
  if (directions.rows() < 1 || directions.cols() < 2) {
    throw std::invalid_argument("covering radius needs n >= 1 directions in k >= 2 dimensions, got " +
                                std::to_string(directions.rows()) + " x " +
                                std::to_string(directions.cols()));
  }
  const Eigen::VectorXd norms = directions.rowwise().norm();
  if (!(norms.array() > 0.0).all() || !norms.allFinite()) {
    throw std::invalid_argument("covering radius: every direction must be finite and non-zero");
  }
  return norms.cwiseInverse().asDiagonal() * directions;
}

// Largest cosine to any direction, per probe, wherever it can matter: exact for every probe that
// can rank among the best `pool` (smallest largest-cosine), +infinity for the rest. Probes are
// scored a block at a time against chunks of directions, each step one matrix product; a probe
// leaves its block as soon as its running maximum reaches the pool-th best exact value found so
// far, since its true value can only be larger. This bound makes the selection exact and skips
// most of the work when the directions are spread out.
Eigen::VectorXd MaxCosinePerProbe(const Eigen::MatrixXd& probes, const Eigen::MatrixXd& unit,
                                  int block, int pool) {
  constexpr Eigen::Index kChunk = 64;  // directions per product
  const Eigen::Index count = probes.rows();
  const Eigen::Index n = unit.rows();
  const Eigen::Index step = std::max(1, block);
  const double inf = std::numeric_limits<double>::infinity();
  const Eigen::MatrixXd unit_t = unit.transpose();
  Eigen::VectorXd best = Eigen::VectorXd::Constant(count, inf);
  std::priority_queue<double> kept;  // the `pool` smallest exact values; top = bound
  std::vector<Eigen::Index> alive;
  Eigen::VectorXd running;
  Eigen::MatrixXd cosines;
  for (Eigen::Index start = 0; start < count; start += step) {
    const Eigen::Index rows = std::min(step, count - start);
    alive.resize(static_cast<std::size_t>(rows));
    std::iota(alive.begin(), alive.end(), start);
    running = Eigen::VectorXd::Constant(rows, -inf);
    const double bound = static_cast<int>(kept.size()) < pool ? inf : kept.top();
    for (Eigen::Index first = 0; first < n && !alive.empty(); first += kChunk) {
      const Eigen::Index cols = std::min(kChunk, n - first);
      cosines.noalias() = probes(alive, Eigen::all) * unit_t.middleCols(first, cols);
      const Eigen::VectorXd chunk_max = cosines.rowwise().maxCoeff();
      std::size_t still = 0;
      for (std::size_t a = 0; a < alive.size(); ++a) {
        const Eigen::Index local = alive[a] - start;
        running(local) = std::max(running(local), chunk_max(static_cast<Eigen::Index>(a)));
        if (running(local) < bound) alive[still++] = alive[a];
      }
      alive.resize(still);
    }
    for (Eigen::Index probe : alive) {
      const double value = running(probe - start);
      best(probe) = value;
      kept.push(value);
      if (static_cast<int>(kept.size()) > pool) kept.pop();
    }
  }
  return best;
}

// Candidates scanned for distinct refinement starts.
int StartPool(int refine) { return std::max(1, 16 * refine); }

// Indices of up to `wanted` good probes that sit in different empty caps: a candidate is taken
// when it is farther than half its own empty-cap radius from every probe already taken, so the
// optimiser is not started eight times in the same basin. Shortfalls are filled best-first.
std::vector<Eigen::Index> DistinctStarts(const Eigen::MatrixXd& probes,
                                         const Eigen::VectorXd& max_cos, int wanted) {
  const Eigen::Index count = probes.rows();
  const Eigen::Index pool = std::min<Eigen::Index>(count, StartPool(wanted));
  std::vector<Eigen::Index> order(count);
  std::iota(order.begin(), order.end(), Eigen::Index{0});
  std::partial_sort(order.begin(), order.begin() + pool, order.end(),
                    [&](Eigen::Index a, Eigen::Index b) {
                      return max_cos(a) < max_cos(b) || (max_cos(a) == max_cos(b) && a < b);
                    });
  std::vector<Eigen::Index> chosen;
  std::vector<bool> taken(pool, false);
  for (Eigen::Index i = 0; i < pool && static_cast<int>(chosen.size()) < wanted; ++i) {
    const double separation = std::cos(0.5 * AngleOfCosine(max_cos(order[i])));
    bool distinct = true;
    for (Eigen::Index c : chosen) {
      if (probes.row(order[i]).dot(probes.row(c)) >= separation) {
        distinct = false;
        break;
      }
    }
    if (distinct) {
      chosen.push_back(order[i]);
      taken[i] = true;
    }
  }
  for (Eigen::Index i = 0; i < pool && static_cast<int>(chosen.size()) < wanted; ++i) {
    if (!taken[i]) chosen.push_back(order[i]);
  }
  return chosen;
}

struct EpigraphData {
  const Eigen::MatrixXd* unit;  // n x k
};

// c_j(u, s) = u.v_j - s <= 0 for every direction j; x = (u, s).
void CapConstraints(unsigned m, double* result, unsigned n, const double* x, double* grad,
                    void* raw) {
  const auto& unit = *static_cast<EpigraphData*>(raw)->unit;
  const Eigen::Index k = unit.cols();
  const Eigen::Map<const Eigen::VectorXd> u(x, k);
  Eigen::Map<Eigen::VectorXd>(result, m) = (unit * u).array() - x[k];
  if (grad != nullptr) {
    Eigen::Map<RowMajorMatrix> g(grad, m, n);
    g.leftCols(k) = unit;
    g.col(k).setConstant(-1.0);
  }
}

double UnitNorm(unsigned n, const double* x, double* grad, void*) {
  const Eigen::Index k = static_cast<Eigen::Index>(n) - 1;
  const Eigen::Map<const Eigen::VectorXd> u(x, k);
  if (grad != nullptr) {
    Eigen::Map<Eigen::VectorXd>(grad, k) = 2.0 * u;
    grad[k] = 0.0;
  }
  return u.squaredNorm() - 1.0;
}

double EpigraphObjective(unsigned n, const double* x, double* grad, void*) {
  if (grad != nullptr) {
    std::fill(grad, grad + n, 0.0);
    grad[n - 1] = 1.0;
  }
  return x[n - 1];
}

// SLSQP on the epigraph form over the directions in `unit`, from a feasible (u0, s0).
Eigen::VectorXd SolveEpigraph(const Eigen::MatrixXd& unit, const Eigen::VectorXd& u0, double s0,
                              int max_evaluations) {
  const Eigen::Index k = unit.cols();
  EpigraphData data{&unit};
  nlopt::opt opt(nlopt::LD_SLSQP, static_cast<unsigned>(k + 1));
  opt.set_min_objective(EpigraphObjective, nullptr);
  opt.add_inequality_mconstraint(CapConstraints, &data,
                                 std::vector<double>(static_cast<std::size_t>(unit.rows()), 1e-13));
  opt.add_equality_constraint(UnitNorm, nullptr, 1e-13);
  opt.set_xtol_abs(1e-13);
  opt.set_ftol_abs(1e-15);
  opt.set_maxeval(max_evaluations);
  std::vector<double> x(u0.data(), u0.data() + k);
  x.push_back(s0);
  double value = 0.0;
  try {
    opt.optimize(x, value);
  } catch (const std::exception&) {
    // Round-off and iteration limits leave the last point in x; the caller checks it.
  }
  Eigen::VectorXd u = Eigen::Map<const Eigen::VectorXd>(x.data(), k);
  const double norm = u.norm();
  if (!std::isfinite(norm) || norm == 0.0) return u0;
  return u / norm;
}

// Local maximum of the min-angle from a probe u0 with largest cosine s0. Only directions within
// twice the probe's cap radius can bind near it, so SLSQP sees just those (the cost grows with
// the constraint count); if an excluded direction turns out closer than the included ones at the
// answer, the radius is widened and the solve repeated. The caller recomputes the true value.
Eigen::VectorXd RefineProbe(const Eigen::MatrixXd& unit, const Eigen::VectorXd& u0, double s0,
                            int max_evaluations) {
  const double pi = std::acos(-1.0);
  const Eigen::VectorXd cos0 = unit * u0;
  double radius = std::min(pi, 2.0 * AngleOfCosine(s0) + 0.05);
  std::vector<Eigen::Index> near;
  while (true) {
    near.clear();
    const double limit = radius >= pi ? -2.0 : std::cos(radius);
    for (Eigen::Index j = 0; j < unit.rows(); ++j) {
      if (cos0(j) >= limit) near.push_back(j);
    }
    const Eigen::MatrixXd local = unit(near, Eigen::all);
    const Eigen::VectorXd u = SolveEpigraph(local, u0, s0, max_evaluations);
    const bool complete = static_cast<Eigen::Index>(near.size()) == unit.rows();
    if (complete || (unit * u).maxCoeff() <= (local * u).maxCoeff() + 1e-12) return u;
    radius = std::min(pi, 2.0 * radius);
  }
}

double Median(std::vector<double> values) {
  if (values.empty()) return std::numeric_limits<double>::quiet_NaN();
  const std::size_t mid = values.size() / 2;
  std::nth_element(values.begin(), values.begin() + mid, values.end());
  const double upper = values[mid];
  if (values.size() % 2 == 1) return upper;
  const double lower = *std::max_element(values.begin(), values.begin() + mid);
  return 0.5 * (lower + upper);
}

}  // namespace

Eigen::MatrixXd UniformDirections(Eigen::Index n, Eigen::Index k, std::mt19937_64& rng) {
  std::normal_distribution<double> normal(0.0, 1.0);
  Eigen::MatrixXd out(n, k);
  for (Eigen::Index i = 0; i < n; ++i) {
    double norm = 0.0;
    while (norm == 0.0) {  // a zero Gaussian vector has probability zero; redraw if it happens
      for (Eigen::Index j = 0; j < k; ++j) out(i, j) = normal(rng);
      norm = out.row(i).norm();
    }
    out.row(i) /= norm;
  }
  return out;
}

namespace {

// The estimate for normalised directions against a given probe set.
CoveringRadius EstimateWithProbes(const Eigen::MatrixXd& unit, const Eigen::MatrixXd& probes,
                                  const CoveringRadiusOptions& options) {
  const Eigen::VectorXd max_cos =
      MaxCosinePerProbe(probes, unit, options.block, StartPool(options.refine));
  CoveringRadius out;
  out.probes = static_cast<int>(probes.rows());
  Eigen::Index best_probe = 0;
  double best_cos = max_cos.minCoeff(&best_probe);
  out.centre = probes.row(best_probe).transpose();
  out.probe_theta = AngleOfCosine(best_cos);

  const std::vector<Eigen::Index> starts = DistinctStarts(probes, max_cos, options.refine);
  out.refined = static_cast<int>(starts.size());
  for (Eigen::Index start : starts) {
    const Eigen::VectorXd u0 = probes.row(start).transpose();
    const Eigen::VectorXd u = RefineProbe(unit, u0, max_cos(start), options.max_evaluations);
    const double c = (unit * u).maxCoeff();
    if (c < best_cos) {
      best_cos = c;
      out.centre = u;
    }
  }
  out.theta = AngleOfCosine(best_cos);
  return out;
}

void CheckOptions(const CoveringRadiusOptions& options) {
  if (options.probes < 1 || options.refine < 0 || options.max_evaluations < 1) {
    throw std::invalid_argument(
        "covering radius: probes and max_evaluations must be >= 1 and refine >= 0");
  }
}

std::mt19937_64 SeededEngine(std::uint64_t seed, std::uint32_t stream) {
  std::seed_seq seq{static_cast<std::uint32_t>(seed), static_cast<std::uint32_t>(seed >> 32),
                    stream};
  return std::mt19937_64(seq);
}

}  // namespace

CoveringRadius EstimateCoveringRadius(const Eigen::MatrixXd& directions,
                                      const CoveringRadiusOptions& options, std::mt19937_64& rng) {
  CheckOptions(options);
  const Eigen::MatrixXd unit = NormalisedRows(directions);
  const Eigen::MatrixXd probes = UniformDirections(options.probes, unit.cols(), rng);
  return EstimateWithProbes(unit, probes, options);
}

CoveringRadiusNull UniformCoveringRadiusNull(Eigen::Index n, Eigen::Index k, int replicas,
                                             const CoveringRadiusOptions& options,
                                             std::uint64_t seed) {
  if (n < 1 || k < 2 || replicas < 1) {
    throw std::invalid_argument("covering radius null needs n >= 1, k >= 2 and replicas >= 1");
  }
  CheckOptions(options);
  // One probe set serves every replica: the probes are only a quadrature of the sphere, and
  // sharing them saves drawing them again for each replica.
  std::mt19937_64 probe_rng = SeededEngine(seed, 0xffffffffu);
  const Eigen::MatrixXd probes = UniformDirections(options.probes, k, probe_rng);
  CoveringRadiusNull out;
  out.replicas.reserve(static_cast<std::size_t>(replicas));
  for (int r = 0; r < replicas; ++r) {
    std::mt19937_64 rng = SeededEngine(seed, static_cast<std::uint32_t>(r));
    const Eigen::MatrixXd dirs = UniformDirections(n, k, rng);
    out.replicas.push_back(EstimateWithProbes(dirs, probes, options).theta);
  }
  out.median = Median(out.replicas);
  return out;
}

}  // namespace plaudit::stats
