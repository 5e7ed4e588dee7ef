#include "plaudit/checks/residual_fit.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <numeric>
#include <random>
#include <stdexcept>
#include <vector>

#include <Eigen/QR>
#include <fmt/format.h>
#include <nlopt.hpp>

#include "plaudit/core/error.h"
#include "plaudit/core/threads.h"
#include "plaudit/model/evaluate.h"
#include "plaudit/model/loss.h"
#include "plaudit/stats/folds.h"
#include "plaudit/stats/ridge.h"

namespace plaudit::checks {
namespace {

using Eigen::Index;
using Eigen::MatrixXd;
using Eigen::RowVectorXd;
using Eigen::VectorXd;
using model::Activation;
using model::Loss;
using stats::FoldList;
using stats::RowList;

constexpr double kPi = 3.14159265358979323846;
constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
constexpr Index kBlockRows = 1024;  // rows per feature block: a 1024 x 1024 block is 8 MiB

// ---------------------------------------------------------------- seeded randomness

// Independent streams from one seed, so that changing B does not change the features.
enum Stream : std::uint64_t { kUnitStream = 1, kFoldStream, kPermutationStream, kLineRowStream };

std::uint64_t SubSeed(std::uint64_t seed, std::uint64_t stream) {
  std::uint64_t z = seed + 0x9e3779b97f4a7c15ULL * (stream + 1);  // splitmix64 finaliser
  z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ULL;
  z = (z ^ (z >> 27)) * 0x94d049bb133111ebULL;
  return z ^ (z >> 31);
}

// Uniform in (0, 1) from the top 53 bits: portable, unlike std::uniform_real_distribution.
double UniformOpen(std::mt19937_64& rng) {
  return (static_cast<double>(rng() >> 11) + 0.5) * 0x1.0p-53;
}

double Gaussian(std::mt19937_64& rng) {  // Box-Muller
  const double radius = std::sqrt(-2.0 * std::log(UniformOpen(rng)));
  return radius * std::cos(2.0 * kPi * UniformOpen(rng));
}

// ---------------------------------------------------------------- the problem

struct Problem {
  Loss loss = Loss::kSquared;
  Activation activation = Activation::kTanh;
  MatrixXd inputs;    // N x (d+1): standardised x, then a column of ones
  RowVectorXd mean;   // 1 x d, of x
  RowVectorXd sd;     // 1 x d, of x (1 where a column is constant)
  MatrixXd output;    // N x k network output
  MatrixXd target;    // as in the data set
  MatrixXd residual;  // N x k, d loss / d output per row
  VectorXd now;       // per-row loss of the network
  double now_total = 0.0;

  Index rows() const { return inputs.rows(); }
  Index width() const { return output.cols(); }
};

void Standardise(const MatrixXd& x, Problem& p) {
  const Index n = x.rows();
  const Index d = x.cols();
  p.mean = x.colwise().mean();
  MatrixXd centred = x.rowwise() - p.mean;
  p.sd = (centred.colwise().squaredNorm() / static_cast<double>(n)).cwiseSqrt();
  for (Index j = 0; j < d; ++j) {
    if (!(p.sd(j) > 1e-12 * (1.0 + std::fabs(p.mean(j))))) p.sd(j) = 1.0;  // constant column
  }
  p.inputs.resize(n, d + 1);
  p.inputs.leftCols(d) = centred * p.sd.cwiseInverse().asDiagonal();
  p.inputs.col(d).setOnes();
}

Problem MakeProblem(const model::Network& net, const model::Dataset& data) {
  Problem p;
  p.loss = net.loss;
  p.activation = net.layers.front().activation == Activation::kIdentity ? Activation::kTanh
                                                                         : net.layers.front().activation;
  Standardise(data.x, p);
  p.output = model::Predict(net, data.x, kBlockRows);
  p.target = data.y;
  // OutputResidual divides by N; per-row residuals are N times that.
  p.residual = model::OutputResidual(net, data, kBlockRows) * static_cast<double>(data.rows());
  p.now = model::LossPerRow(p.loss, p.output, p.target);
  p.now_total = p.now.sum();
  return p;
}

RowList Compose(const RowList& permutation, const RowList& rows) {
  RowList out(rows.size());
  for (std::size_t i = 0; i < rows.size(); ++i) out[i] = permutation[static_cast<std::size_t>(rows[i])];
  return out;
}

// ---------------------------------------------------------------- random units

// (d+1) x count: directions uniform on the sphere (normalised Gaussians) times log-uniform scales.
MatrixXd DrawUnits(Index dim, int count, double scale_min, double scale_max, std::mt19937_64& rng) {
  MatrixXd units(dim, count);
  const double log_min = std::log(scale_min);
  const double log_span = std::log(scale_max / scale_min);
  for (Index m = 0; m < count; ++m) {
    for (Index i = 0; i < dim; ++i) units(i, m) = Gaussian(rng);
    const double scale = std::exp(log_min + log_span * UniformOpen(rng));
    units.col(m) *= scale / units.col(m).norm();
  }
  return units;
}

// s(inputs * units), N x M, a block of rows at a time.
MatrixXd UnitOutputs(Activation a, const MatrixXd& inputs, const MatrixXd& units) {
  MatrixXd out(inputs.rows(), units.cols());
  MatrixXd z;
  MatrixXd h;
  for (Index start = 0; start < inputs.rows(); start += kBlockRows) {
    const Index rows = std::min(kBlockRows, inputs.rows() - start);
    z.noalias() = inputs.middleRows(start, rows) * units;
    model::Apply(a, z, h);
    out.middleRows(start, rows) = h;
  }
  return out;
}

// ---------------------------------------------------------------- step size along a correction

// Best c >= 0 for the step o -> o - c h on the given rows. Squared loss: 1, because the
// correction is itself a (penalised) least-squares fit of the residual. Cross-entropy and
// logistic: phi(c) = sum_i l(o_i - c h_i) is convex, so the root of phi'(c) is found by
// bracketing and Illinois false position. The bracket starts at the majorise-minimise step
// -phi'(0) / (kappa ||h||^2), where kappa bounds the loss curvature (logistic 1/4; softmax 1/2,
// Boehning 1992), so phi' <= 0 there and the minimiser lies beyond it.
double StepSize(Loss loss, const MatrixXd& output, const MatrixXd& target, const MatrixXd& residual,
                const MatrixXd& h) {
  if (loss == Loss::kSquared) return 1.0;
  const double slope0 = -(h.array() * residual.array()).sum();
  const double hh = h.squaredNorm();
  if (!(slope0 < 0.0) || !(hh > 0.0)) return 0.0;
  MatrixXd grad;
  auto slope = [&](double c) {
    model::LossGradient(loss, output - c * h, target, grad);
    return -(h.array() * grad.array()).sum();
  };
  const double kappa = loss == Loss::kLogistic ? 0.25 : 0.5;
  double lo = 0.0;
  double slope_lo = slope0;
  double hi = -slope0 / (kappa * hh);
  double slope_hi = slope(hi);
  constexpr int kMaxGrowth = 12;  // 4^12 past the first step: the rows are all but separable
  for (int grow = 0; slope_hi < 0.0; ++grow) {
    if (grow == kMaxGrowth) return hi;
    lo = hi;
    slope_lo = slope_hi;
    hi *= 4.0;
    slope_hi = slope(hi);
  }
  int kept = 0;  // -1: lo was replaced last, +1: hi was
  for (int it = 0; it < 40 && hi - lo > 1e-4 * hi; ++it) {
    const double c = lo - slope_lo * (hi - lo) / (slope_hi - slope_lo);
    const double s = slope(c);
    if (s == 0.0) return c;
    if (s < 0.0) {
      lo = c;
      slope_lo = s;
      if (kept == -1) slope_hi *= 0.5;
      kept = -1;
    } else {
      hi = c;
      slope_hi = s;
      if (kept == 1) slope_lo *= 0.5;
      kept = 1;
    }
  }
  return 0.5 * (lo + hi);
}

// ---------------------------------------------------------------- (a) random features

struct RandomFeatureResult {
  double eta = kNaN;
  double p = kNaN;
  std::vector<double> null_eta;         // B values, permutation order
  std::vector<double> eta_by_strength;  // observed, per grid value
  std::vector<double> grid;             // relative strengths
  std::vector<std::vector<double>> lambdas;  // absolute strengths, per fold
  int chosen = 0;                       // grid index of eta
};

// Seeded subsets of each fold's training rows for the line search (ascending).
FoldList LineSearchRows(const FoldList& folds, Index n, int limit, std::uint64_t seed) {
  std::mt19937_64 rng(seed);
  FoldList rows;
  for (const RowList& held : folds) {
    RowList train = stats::ComplementRows(held, n);
    if (static_cast<Index>(train.size()) > limit) {
      const RowList order = stats::RandomPermutation(static_cast<Index>(train.size()), rng);
      RowList pick(static_cast<std::size_t>(limit));
      for (std::size_t i = 0; i < pick.size(); ++i) pick[i] = train[static_cast<std::size_t>(order[i])];
      std::sort(pick.begin(), pick.end());
      train = std::move(pick);
    }
    rows.push_back(std::move(train));
  }
  return rows;
}

// Loss removed on one fold's held-out rows, strengths x (B+1): column b is permutation b
// (b = 0: the data as they are). Permutation b moves (residual, output, target) of row perm[i]
// to position i; the features stay, so each column is the same pipeline on permuted pairs.
MatrixXd RemovedOnFold(const Problem& p, const stats::RidgeFoldFit& fit, const RowList& held,
                       const RowList& extra, const std::vector<RowList>& perms) {
  const Index k = p.width();
  const auto count = static_cast<Index>(perms.size());
  MatrixXd removed(static_cast<Index>(fit.held_out.size()), count);
  for (Index b = 0; b < count; ++b) {
    const RowList rows = Compose(perms[static_cast<std::size_t>(b)], held);
    const MatrixXd out = p.output(rows, Eigen::all);
    const MatrixXd target = p.target(rows, Eigen::all);
    const double now = p.now(rows).sum();
    MatrixXd out_x, target_x, residual_x;
    if (p.loss != Loss::kSquared) {
      const RowList xrows = Compose(perms[static_cast<std::size_t>(b)], extra);
      out_x = p.output(xrows, Eigen::all);
      target_x = p.target(xrows, Eigen::all);
      residual_x = p.residual(xrows, Eigen::all);
    }
    for (std::size_t j = 0; j < fit.held_out.size(); ++j) {
      const auto h = fit.held_out[j].middleCols(b * k, k);
      const double c = p.loss == Loss::kSquared
                           ? 1.0
                           : StepSize(p.loss, out_x, target_x, residual_x, fit.extra[j].middleCols(b * k, k));
      removed(static_cast<Index>(j), b) = now - model::LossPerRow(p.loss, out - c * h, target).sum();
    }
  }
  return removed;
}

RandomFeatureResult RandomFeatureStatistic(const Problem& p, const MatrixXd& features, const FoldList& folds,
                                           const std::vector<RowList>& perms, const ResidualFitOptions& o,
                                           int threads) {
  const Index n = p.rows();
  const Index k = p.width();
  const auto count = static_cast<Index>(perms.size());
  MatrixXd stacked(n, k * count);  // permuted residuals are just more target columns
  for (Index b = 0; b < count; ++b) {
    stacked.middleCols(b * k, k) = p.residual(perms[static_cast<std::size_t>(b)], Eigen::all);
  }
  RandomFeatureResult r;
  r.grid = stats::LogRidgeGrid(o.ridge_grid, o.ridge_min, o.ridge_max);
  stats::RidgeCrossFitOptions ridge;
  ridge.threads = threads;
  ridge.single_precision_products = true;  // a fixed rounding for every column keeps the test exact
  if (p.loss != Loss::kSquared) {
    ridge.extra_rows = LineSearchRows(folds, n, o.line_search_rows, SubSeed(o.seed, kLineRowStream));
  }
  std::vector<MatrixXd> removed(folds.size());
  r.lambdas.resize(folds.size());
  stats::RidgeCrossFit(features, stacked, folds, stats::RidgeStrengths{r.grid, true}, ridge,
                       [&](const stats::RidgeFoldFit& fit) {
                         const auto f = static_cast<std::size_t>(fit.fold);
                         const RowList none;
                         removed[f] = RemovedOnFold(p, fit, folds[f], ridge.extra_rows.empty() ? none : ridge.extra_rows[f], perms);
                         r.lambdas[f] = fit.lambdas;
                       });
  MatrixXd eta = MatrixXd::Zero(static_cast<Index>(r.grid.size()), count);
  for (const MatrixXd& m : removed) eta += m;
  eta /= p.now_total;
  // Each column picks its own best strength: the selection is part of the statistic.
  Index chosen = 0;
  r.eta = eta.col(0).maxCoeff(&chosen);
  r.chosen = static_cast<int>(chosen);
  r.eta_by_strength.assign(eta.col(0).data(), eta.col(0).data() + eta.rows());
  int at_least = 0;
  for (Index b = 1; b < count; ++b) {
    const double null = eta.col(b).maxCoeff();
    r.null_eta.push_back(null);
    if (null >= r.eta) ++at_least;
  }
  r.p = (1.0 + at_least) / static_cast<double>(count);
  return r;
}

// ---------------------------------------------------------------- (b) new neurons

// Explained fraction of a centred target block by one unit h = s(X u):
//     E(u) = ||T^T h_c||^2 / (||h_c||^2 ||T||^2)     (= corr(h, t)^2 for one column)
// with dE/dh = 2 (T a / n2 - ||a||^2 h_c / n2^2) / ||T||^2, a = T^T h_c, n2 = ||h_c||^2, and
// dE/du = X^T (s'(z) .* dE/dh): two matrix-vector products per evaluation.
class UnitObjective {
 public:
  UnitObjective(const MatrixXd& inputs, const MatrixXd& target, Activation a)
      : inputs_(inputs), target_(target), activation_(a), target_norm2_(target.squaredNorm()) {}

  double Value(const double* u, double* grad) {
    const Eigen::Map<const VectorXd> w(u, inputs_.cols());
    z_.noalias() = inputs_ * w;
    model::ApplyWithDerivative(activation_, z_, h_, dh_);
    const double mean = h_.mean();
    hc_ = h_.array() - mean;
    const double n2 = hc_.squaredNorm();
    double value = 0.0;
    if (n2 > 1e-24 * static_cast<double>(hc_.rows()) && target_norm2_ > 0.0) {
      const VectorXd a = target_.transpose() * hc_;
      value = a.squaredNorm() / (n2 * target_norm2_);
      if (grad != nullptr) {
        VectorXd dh = (target_ * a - (a.squaredNorm() / n2) * hc_) * (2.0 / (n2 * target_norm2_));
        dh.array() *= dh_.col(0).array();
        Eigen::Map<VectorXd>(grad, inputs_.cols()).noalias() = inputs_.transpose() * dh;
      }
    } else if (grad != nullptr) {
      Eigen::Map<VectorXd>(grad, inputs_.cols()).setZero();
    }
    if (value > best_value_) {
      best_value_ = value;
      best_ = w;
    }
    return value;
  }

  void ResetBest() { best_value_ = -1.0; }
  double best_value() const { return best_value_; }
  const VectorXd& best() const { return best_; }

 private:
  const MatrixXd& inputs_;
  const MatrixXd& target_;
  Activation activation_;
  double target_norm2_;
  MatrixXd z_, h_, dh_;
  VectorXd hc_;
  double best_value_ = -1.0;
  VectorXd best_;
};

double NegativeExplained(unsigned n, const double* x, double* grad, void* data) {
  auto* objective = static_cast<UnitObjective*>(data);
  const double value = objective->Value(x, grad);
  if (grad != nullptr) for (unsigned i = 0; i < n; ++i) grad[i] = -grad[i];
  return -value;
}

struct FoundUnit {
  VectorXd u;              // scale times direction, in R^(d+1)
  double explained = 0.0;  // E(u) on the rows it was fitted to
};

// Best point reached by LBFGS from `start` (tracked through every evaluation, so an early stop
// for round-off keeps the best value seen).
FoundUnit Descend(UnitObjective& objective, const VectorXd& start, int evaluations) {
  const auto dim = static_cast<unsigned>(start.size());
  nlopt::opt opt(nlopt::LD_LBFGS, dim);
  opt.set_min_objective(NegativeExplained, &objective);
  opt.set_maxeval(evaluations);
  opt.set_ftol_rel(1e-10);
  opt.set_xtol_rel(1e-8);
  std::vector<double> x(start.data(), start.data() + start.size());
  objective.ResetBest();
  double value = 0.0;
  try {
    opt.optimize(x, value);
  } catch (const std::runtime_error&) {
    // roundoff_limited and generic failures: the tracked best point stands.
  }
  if (objective.best_value() < 0.0) return {start, 0.0};
  return {objective.best(), objective.best_value()};
}

// Multi-start: a short run from each start, then a longer polish of the best end point.
FoundUnit SearchUnit(const MatrixXd& inputs, const MatrixXd& target, Activation a, const MatrixXd& starts,
                     int evaluations) {
  UnitObjective objective(inputs, target, a);
  FoundUnit best{starts.col(0), -1.0};
  for (Index s = 0; s < starts.cols(); ++s) {
    FoundUnit found = Descend(objective, starts.col(s), evaluations);
    if (found.explained > best.explained) best = std::move(found);
  }
  FoundUnit polished = Descend(objective, best.u, 5 * evaluations);
  return polished.explained > best.explained ? polished : best;
}

// Column sums and sums of squares of the features, for scoring them on a subset of rows.
struct FeatureSums {
  RowVectorXd sum;
  RowVectorXd sum_sq;
};

FeatureSums SumsOver(const MatrixXd& features, const RowList* rows) {
  if (rows == nullptr) return {features.colwise().sum(), features.colwise().squaredNorm()};
  const MatrixXd part = features(*rows, Eigen::all);
  return {part.colwise().sum(), part.colwise().squaredNorm()};
}

// The `count` random units that explain most of `target` (centred, on rows `train`, or on all
// rows when train is null) as starting points: scored with one product F^T T.
MatrixXd BestStarts(const MatrixXd& features, const MatrixXd& units, const RowList* train, const MatrixXd& target,
                    const FeatureSums& sums, int count) {
  const Index n_train = target.rows();
  MatrixXd spread;
  if (train == nullptr) {
    spread = target;
  } else {
    spread = MatrixXd::Zero(features.rows(), target.cols());
    spread(*train, Eigen::all) = target;
  }
  const MatrixXd cross = features.transpose() * spread;  // M x k
  const RowVectorXd var = sums.sum_sq - sums.sum.cwiseAbs2() / static_cast<double>(n_train);
  std::vector<std::pair<double, Index>> scored;
  scored.reserve(static_cast<std::size_t>(units.cols()));
  for (Index m = 0; m < units.cols(); ++m) {
    const bool usable = var(m) > 1e-12 * sums.sum_sq(m);
    scored.emplace_back(usable ? cross.row(m).squaredNorm() / var(m) : 0.0, m);
  }
  const auto keep = static_cast<std::size_t>(std::min<Index>(count, units.cols()));
  std::partial_sort(scored.begin(), scored.begin() + static_cast<std::ptrdiff_t>(keep), scored.end(),
                    [](const auto& a, const auto& b) { return a.first > b.first || (a.first == b.first && a.second < b.second); });
  MatrixXd starts(units.rows(), static_cast<Index>(keep));
  for (std::size_t s = 0; s < keep; ++s) starts.col(static_cast<Index>(s)) = units.col(scored[s].second);
  return starts;
}

MatrixXd WithOnes(const MatrixXd& h) {
  MatrixXd design(h.rows(), h.cols() + 1);
  design.col(0).setOnes();
  design.rightCols(h.cols()) = h;
  return design;
}

struct FoldNeurons {
  VectorXd gain;        // held-out per-row loss differences l_now - l_after
  int units = 0;        // units fitted
};

// One-sided t-test of mean(gain) > 0 given the sum of gains and the sum of squared deviations
// about each fold's own mean, on `dof` degrees of freedom.
double UpperP(double total, double within_ss, double rows, double dof) {
  const double mean = total / rows;
  const double var = within_ss / dof;
  if (!(var > 0.0)) return mean > 0.0 ? 0.0 : 1.0;
  return StudentTUpperTail(mean / std::sqrt(var / rows), dof);
}

double WithinSquares(const VectorXd& gain) { return (gain.array() - gain.mean()).square().sum(); }

// Greedy units on one fold's training rows, judged on its held-out rows.
FoldNeurons FitFoldNeurons(const Problem& p, const MatrixXd& features, const MatrixXd& units, const RowList& held,
                           const FeatureSums& totals, const ResidualFitOptions& o) {
  const RowList train = stats::ComplementRows(held, p.rows());
  const MatrixXd x_train = p.inputs(train, Eigen::all);
  const MatrixXd r_train = p.residual(train, Eigen::all);
  const FeatureSums held_sums = SumsOver(features, &held);
  const FeatureSums sums{totals.sum - held_sums.sum, totals.sum_sq - held_sums.sum_sq};
  MatrixXd design = MatrixXd::Ones(x_train.rows(), 1);
  MatrixXd beta = r_train.colwise().mean();
  MatrixXd left = r_train.rowwise() - r_train.colwise().mean();
  MatrixXd fitted(units.rows(), 0);
  for (int q = 0; q < o.new_neurons; ++q) {
    if (!(left.squaredNorm() > 1e-24 * r_train.squaredNorm())) break;
    const MatrixXd starts = BestStarts(features, units, &train, left, sums, o.neuron_starts);
    const FoundUnit unit = SearchUnit(x_train, left, p.activation, starts, o.neuron_evaluations);
    if (!(unit.explained > 0.0)) break;
    fitted.conservativeResize(Eigen::NoChange, fitted.cols() + 1);
    fitted.rightCols(1) = unit.u;
    design = WithOnes(UnitOutputs(p.activation, x_train, fitted));
    beta = design.colPivHouseholderQr().solve(r_train);
    left = r_train - design * beta;
  }
  FoldNeurons out;
  out.units = static_cast<int>(fitted.cols());
  const MatrixXd correction_train = design * beta;
  const double c = StepSize(p.loss, p.output(train, Eigen::all), p.target(train, Eigen::all), r_train, correction_train);
  const MatrixXd design_held = WithOnes(UnitOutputs(p.activation, p.inputs(held, Eigen::all), fitted));
  const MatrixXd after_out = p.output(held, Eigen::all) - c * (design_held * beta);
  out.gain = p.now(held) - model::LossPerRow(p.loss, after_out, p.target(held, Eigen::all));
  return out;
}

struct NeuronResult {
  double eta = kNaN;
  double p = kNaN;
  std::vector<double> eta_by_fold, p_by_fold;
  std::vector<int> units_by_fold;
  FoundUnit best;  // first greedy unit on all rows
};

NeuronResult NeuronStatistic(const Problem& p, const MatrixXd& features, const MatrixXd& units, const FoldList& folds,
                             const ResidualFitOptions& o, int threads) {
  const FeatureSums totals = SumsOver(features, nullptr);
  std::vector<FoldNeurons> per_fold(folds.size());
  NeuronResult r;
  // Index folds.size() is the full-data search for the unit that is reported.
  stats::ForEachFold(static_cast<int>(folds.size()) + 1, threads, [&](int f) {
    const auto fi = static_cast<std::size_t>(f);
    if (fi < folds.size()) {
      per_fold[fi] = FitFoldNeurons(p, features, units, folds[fi], totals, o);
      return;
    }
    const MatrixXd centred = p.residual.rowwise() - p.residual.colwise().mean();
    const MatrixXd starts = BestStarts(features, units, nullptr, centred, totals, o.neuron_starts);
    r.best = SearchUnit(p.inputs, centred, p.activation, starts, o.neuron_evaluations);
  });
  double gain = 0.0;
  double within = 0.0;
  for (std::size_t f = 0; f < folds.size(); ++f) {
    gain += per_fold[f].gain.sum();
    within += WithinSquares(per_fold[f].gain);
    r.eta_by_fold.push_back(per_fold[f].gain.sum() / p.now(folds[f]).sum());
    // Serial on purpose: std::lgamma may write the global signgam.
    const auto fold_rows = static_cast<double>(per_fold[f].gain.size());
    r.p_by_fold.push_back(UpperP(per_fold[f].gain.sum(), WithinSquares(per_fold[f].gain), fold_rows, fold_rows - 1.0));
    r.units_by_fold.push_back(per_fold[f].units);
  }
  r.eta = gain / p.now_total;
  const auto rows = static_cast<double>(p.rows());
  r.p = UpperP(gain, within, rows, rows - static_cast<double>(folds.size()));
  return r;
}

// ---------------------------------------------------------------- reporting the best unit

double Degrees(double cosine) { return std::acos(std::clamp(cosine, -1.0, 1.0)) * 180.0 / kPi; }

// First-layer neurons in the augmented standardised coordinates: z = m1 w.x + b becomes
// (m1 w .* sd) . x' + (b + m1 w . mu) with x' = (x - mu) / sd.
MatrixXd ExistingDirections(const model::DenseLayer& layer, const Problem& p) {
  const Index d = layer.fan_in();
  MatrixXd v(layer.fan_out(), d + 1);
  const MatrixXd w = layer.multiplier * layer.weight;
  v.leftCols(d) = w * p.sd.asDiagonal();
  v.col(d) = w * p.mean.transpose();
  if (layer.has_bias) v.col(d) += layer.bias;
  return v;
}

nlohmann::json BestNeuronJson(const FoundUnit& unit, const Problem& p, const model::DenseLayer& first) {
  nlohmann::json j;
  const double scale = unit.u.norm();
  if (!(scale > 0.0)) return j;
  const VectorXd direction = unit.u / scale;
  j["direction"] = std::vector<double>(direction.data(), direction.data() + direction.size());
  j["scale"] = scale;
  j["explained_fraction"] = unit.explained;
  MatrixXd h = UnitOutputs(p.activation, p.inputs, unit.u);
  h.array() -= h.mean();
  const MatrixXd r = p.residual.rowwise() - p.residual.colwise().mean();
  std::vector<double> corr;
  for (Index c = 0; c < r.cols(); ++c) {
    const double denom = h.norm() * r.col(c).norm();
    corr.push_back(denom > 0.0 ? h.col(0).dot(r.col(c)) / denom : 0.0);
  }
  j["correlation"] = corr;
  const MatrixXd existing = ExistingDirections(first, p);
  double best_cos = -2.0;
  double best_abs = -1.0;
  Index nearest = -1;
  for (Index n = 0; n < existing.rows(); ++n) {
    const double norm = existing.row(n).norm();
    if (!(norm > 0.0)) continue;
    const double cosine = existing.row(n).dot(direction) / norm;
    if (cosine > best_cos) {
      best_cos = cosine;
      nearest = n;
    }
    best_abs = std::max(best_abs, std::fabs(cosine));
  }
  if (nearest >= 0) {
    j["nearest_neuron"] = nearest;
    j["angle_deg"] = Degrees(best_cos);
    j["angle_sign_free_deg"] = Degrees(best_abs);
  }
  return j;
}

// ---------------------------------------------------------------- assembly

int ResolveThreads(int requested, int folds) {
  return std::max(1, std::min(ThreadsFor(requested), folds + 1));
}

std::vector<RowList> Permutations(Index n, int count, std::uint64_t seed) {
  std::mt19937_64 rng(seed);
  std::vector<RowList> perms;
  perms.reserve(static_cast<std::size_t>(count) + 1);
  RowList identity(static_cast<std::size_t>(n));
  std::iota(identity.begin(), identity.end(), Index{0});
  perms.push_back(std::move(identity));
  for (int b = 0; b < count; ++b) perms.push_back(stats::RandomPermutation(n, rng));
  return perms;
}

std::string Percent(double fraction) { return fmt::format("{:.3g}%", 100.0 * fraction); }

std::string Message(bool explains, const std::string& chosen, double eta, double p, const ResidualFitOptions& o,
                    bool small_removable) {
  if (explains) {
    return fmt::format("fresh features remove {} of the remaining loss out-of-fold ({}, p = {:.3g}): the network "
                       "has not fitted what its function class can reach",
                       Percent(eta), chosen, p);
  }
  if (p <= o.alpha) {
    return fmt::format("fresh features remove {} of the remaining loss out-of-fold (p = {:.3g}), {}",
                       Percent(eta), p,
                       small_removable ? "too little against the baseline loss to matter"
                                       : fmt::format("below the {} effect threshold", Percent(o.effect_threshold)));
  }
  return fmt::format("fresh features remove no more of the remaining loss than chance ({} out-of-fold, p = {:.3g})",
                     Percent(eta), p);
}

}  // namespace

double StudentTUpperTail(double t, double dof) {
  if (!(dof > 0.0) || std::isnan(t)) return kNaN;
  if (std::isinf(t)) return t > 0 ? 0.0 : 1.0;
  // Regularised incomplete beta I_x(a, b) by its continued fraction (Lentz's method), using
  // the symmetry I_x(a, b) = 1 - I_{1-x}(b, a) where the fraction converges slowly.
  auto incomplete_beta = [](double x, double a, double b) {
    if (x <= 0.0) return 0.0;
    if (x >= 1.0) return 1.0;
    auto fraction = [](double xx, double aa, double bb) {
      constexpr double kFloor = 1e-300;
      double c = 1.0;
      double d = 1.0 - (aa + bb) * xx / (aa + 1.0);
      d = 1.0 / (std::fabs(d) < kFloor ? kFloor : d);
      double h = d;
      for (int m = 1; m <= 400; ++m) {
        const double mm = m;
        for (int half = 0; half < 2; ++half) {
          const double num = half == 0 ? mm * (bb - mm) * xx / ((aa + 2 * mm - 1) * (aa + 2 * mm))
                                       : -(aa + mm) * (aa + bb + mm) * xx / ((aa + 2 * mm) * (aa + 2 * mm + 1));
          d = 1.0 + num * d;
          d = 1.0 / (std::fabs(d) < kFloor ? kFloor : d);
          c = 1.0 + num / c;
          if (std::fabs(c) < kFloor) c = kFloor;
          h *= d * c;
          if (half == 1 && std::fabs(d * c - 1.0) < 1e-15) return h;
        }
      }
      return h;
    };
    const double log_front = std::lgamma(a + b) - std::lgamma(a) - std::lgamma(b) + a * std::log(x) +
                             b * std::log1p(-x);
    const double front = std::exp(log_front);
    if (x < (a + 1.0) / (a + b + 2.0)) return front * fraction(x, a, b) / a;
    return 1.0 - front * fraction(1.0 - x, b, a) / b;
  };
  const double tail = 0.5 * incomplete_beta(dof / (dof + t * t), 0.5 * dof, 0.5);
  return t >= 0.0 ? tail : 1.0 - tail;
}

bool ResidualFitOptions::IsValid(std::string* why) const {
  auto fail = [why](std::string text) {
    if (why != nullptr) *why = std::move(text);
    return false;
  };
  auto finite_at_least = [](double v, double low) { return std::isfinite(v) && v >= low; };
  if (features < 1) return fail(fmt::format("features = {} must be >= 1", features));
  if (folds < 2) return fail(fmt::format("folds = {} must be >= 2", folds));
  if (ridge_grid < 1) return fail(fmt::format("ridge_grid = {} must be >= 1", ridge_grid));
  if (!(ridge_min > 0.0) || !std::isfinite(ridge_min)) return fail(fmt::format("ridge_min = {} must be > 0", ridge_min));
  if (!finite_at_least(ridge_max, ridge_min)) return fail(fmt::format("ridge_max = {} must be >= ridge_min = {}", ridge_max, ridge_min));
  if (permutations < 1) return fail(fmt::format("permutations = {} must be >= 1", permutations));
  if (new_neurons < 0) return fail(fmt::format("new_neurons = {} must be >= 0", new_neurons));
  if (neuron_starts < 1) return fail(fmt::format("neuron_starts = {} must be >= 1", neuron_starts));
  if (neuron_evaluations < 1) return fail(fmt::format("neuron_evaluations = {} must be >= 1", neuron_evaluations));
  if (!(alpha > 0.0 && alpha < 1.0)) return fail(fmt::format("alpha = {} must lie in (0, 1)", alpha));
  if (!finite_at_least(effect_threshold, 0.0)) return fail(fmt::format("effect_threshold = {} must be >= 0", effect_threshold));
  if (!finite_at_least(min_removable_rel, 0.0)) return fail(fmt::format("min_removable_rel = {} must be >= 0", min_removable_rel));
  if (!(scale_min > 0.0) || !std::isfinite(scale_min)) return fail(fmt::format("scale_min = {} must be > 0", scale_min));
  if (!finite_at_least(scale_max, scale_min)) return fail(fmt::format("scale_max = {} must be >= scale_min = {}", scale_max, scale_min));
  if (line_search_rows < 1) return fail(fmt::format("line_search_rows = {} must be >= 1", line_search_rows));
  if (threads < 0) return fail(fmt::format("threads = {} must be >= 0", threads));
  return true;
}

CheckResult RunResidualFit(const model::Network& net, const model::Dataset& data, double baseline_loss,
                           const ResidualFitOptions& options) {
  std::string why;
  if (!options.IsValid(&why)) raise(ExitCode::kUsage, "{}: {}", kResidualFitName, why);
  if (net.depth() < 1) raise(ExitCode::kBadData, "{}: the network has no layers", kResidualFitName);
  if (data.dim() != net.input_dim() || data.y.rows() != data.rows()) {
    raise(ExitCode::kBadData, "{}: data are {} x {} with {} target rows, the network takes {} inputs",
          kResidualFitName, data.rows(), data.dim(), data.y.rows(), net.input_dim());
  }
  if (!(baseline_loss >= 0.0) || !std::isfinite(baseline_loss)) {
    raise(ExitCode::kBadData, "{}: baseline loss {} must be finite and >= 0", kResidualFitName, baseline_loss);
  }
  const double threshold = options.effect_threshold;
  const int b_count = options.permutations;
  if ((b_count + 1.0) * options.alpha < 1.0 - 1e-12) {
    return Skipped(kResidualFitName, threshold,
                   fmt::format("{} permutations cannot reach alpha = {}: the smallest p-value is 1/{}", b_count,
                               options.alpha, b_count + 1));
  }
  const Index n = data.rows();
  if (n < 5 * static_cast<Index>(options.folds)) {
    return Skipped(kResidualFitName, threshold,
                   fmt::format("only {} rows; {} folds need at least {}", n, options.folds, 5 * options.folds));
  }
  const Problem p = MakeProblem(net, data);
  if (!p.output.allFinite() || !p.residual.allFinite() || !std::isfinite(p.now_total)) {
    return Skipped(kResidualFitName, threshold, "the network's outputs or loss are not finite");
  }
  if (!(p.now_total > 0.0)) return Skipped(kResidualFitName, threshold, "the current loss is 0: nothing is left to explain");

  const int threads = ResolveThreads(options.threads, options.folds);
  std::mt19937_64 unit_rng(SubSeed(options.seed, kUnitStream));
  const MatrixXd units = DrawUnits(p.inputs.cols(), options.features, options.scale_min, options.scale_max, unit_rng);
  const MatrixXd features = UnitOutputs(p.activation, p.inputs, units);
  const FoldList folds = stats::RandomFolds(n, options.folds, SubSeed(options.seed, kFoldStream));
  const std::vector<RowList> perms = Permutations(n, b_count, SubSeed(options.seed, kPermutationStream));

  const RandomFeatureResult a = RandomFeatureStatistic(p, features, folds, perms, options, threads);
  NeuronResult b;
  if (options.new_neurons > 0) b = NeuronStatistic(p, features, units, folds, options, threads);

  const bool neurons_win = std::isfinite(b.eta) && b.eta > a.eta;
  const double eta = neurons_win ? b.eta : a.eta;
  const double pv = neurons_win ? b.p : a.p;
  const std::string chosen = neurons_win ? "new-neurons" : "random-features";
  const double current = p.now_total / static_cast<double>(n);
  const double removable = eta * current;
  const bool big_enough = removable >= options.min_removable_rel * baseline_loss;
  const bool explains = pv <= options.alpha && eta >= options.effect_threshold && big_enough;

  CheckResult r;
  r.name = kResidualFitName;
  r.status = explains ? Status::kFail : Status::kPass;
  r.statistic = eta;
  r.threshold = threshold;
  r.p_value = pv;
  r.message = Message(explains, chosen, eta, pv, options, !big_enough);
  nlohmann::json& d = r.detail;
  d["eta_a"] = a.eta;
  d["p_a"] = a.p;
  d["eta_b"] = b.eta;
  d["p_b"] = b.p;
  d["chosen"] = chosen;
  d["removable"] = removable;
  d["significant"] = pv <= options.alpha;
  d["removable_below_floor"] = !big_enough;
  d["current_loss"] = current;
  d["baseline_loss"] = baseline_loss;
  d["rows"] = n;
  d["loss"] = model::LossToString(p.loss);
  d["activation"] = model::ActivationToString(p.activation);
  if (net.layers.front().activation == Activation::kIdentity) {
    d["activation_note"] = "the first layer is the identity; fresh units use tanh";
  }
  d["features"] = options.features;
  d["folds"] = options.folds;
  d["permutations"] = b_count;
  d["scale_range"] = {options.scale_min, options.scale_max};
  d["ridge_grid"] = a.grid;
  d["ridge_chosen"] = a.grid[static_cast<std::size_t>(a.chosen)];
  d["ridge_chosen_index"] = a.chosen;
  d["ridge_lambdas_by_fold"] = a.lambdas;
  d["eta_a_by_ridge"] = a.eta_by_strength;
  d["null_eta_a"] = a.null_eta;
  d["step"] = p.loss == Loss::kSquared
                  ? "c = 1: the ridge (or least-squares) fit is the step"
                  : fmt::format("c >= 0 by line search on up to {} training rows per fold (all of them for new neurons)",
                                options.line_search_rows);
  d["new_neurons"] = options.new_neurons;
  if (options.new_neurons > 0) {
    d["neuron_test"] = "one-sided paired t-test of the pooled held-out per-row loss differences, within-fold variance (Bayle et al. 2020)";
    d["eta_b_by_fold"] = b.eta_by_fold;
    d["p_b_by_fold"] = b.p_by_fold;
    d["units_by_fold"] = b.units_by_fold;
    const nlohmann::json best = BestNeuronJson(b.best, p, net.layers.front());
    d["best_neuron"] = best;
    if (best.contains("angle_deg")) {
      d["best_neuron_angle_deg"] = best["angle_deg"];
      d["best_neuron_angle_sign_free_deg"] = best["angle_sign_free_deg"];
    }
  }
  return r;
}

}  // namespace plaudit::checks
