#pragma once
// Check `curvature`: at a flat loss with a small gradient, is the network at a saddle that
// training will leave (negative curvature with an escape direction) or at a minimum?
//
// H = the Hessian of the full-batch loss at the last snapshot with respect to the stored
// parameters of the chosen layers (model::LossHessian, exact R-operator products by default).
// Lanczos with full reorthogonalization (stats::LanczosExtremes, seeded start, at most
// max_iterations products) gives Ritz values lambda_min >= lambda_min(H) and
// lambda_max <= lambda_max(H), and the unit Ritz vector v of lambda_min, whose Rayleigh quotient
// v.Hv is exactly lambda_min: a negative lambda_min is a direction of negative curvature even
// when the iteration has not converged.
//     statistic = lambda_min / lambda_max  (NaN when lambda_max <= 0),  threshold = -threshold
//
// Escape step. With g the gradient and D = min_decrease_rel * L0, for each sign s = +-1 the
// second-order model of the loss change along s v is q(t) = s g.v t + lambda_min t^2 / 2. When
// lambda_min < 0 its predicted decrease -q(t) grows without bound, so the model alone cannot
// pick a step; the loss itself decides. t_0 > 0 solves -q(t_0) = D: the shortest step whose
// predicted decrease would matter. The loss is evaluated at t_k = 2^k t_0, k = 0 ..
// line_search_steps - 1, stopping once it rises from one step to the next (the line's valley
// is behind). achieved = the largest L(theta) - L(theta + s t_k v) over both signs and all k;
// predicted = -q at that step. Where the quadratic model holds, t_1 already achieves ~4 D, so
// the rule below does not hinge on rounding at t_0. No step is tried when lambda_min >= 0.
//
// Fails ("a saddle with an escape direction") when
//     lambda_min < -threshold * lambda_max  AND  achieved >= D;
// passes otherwise ("no such direction was found": a minimum, or curvature too weak or too
// local to lower the loss by D). A pass after an unconverged iteration is reported with
// detail.converged = false: a lower lambda_min(H) may exist.
//
// Tied neurons. Hidden neurons that are exact copies (model/neuron_ties.h: incoming row, bias
// and outgoing column equal to tie_tolerance) stay copies under gradient descent, so a direction
// that pulls them apart is one training never takes. When there are such ties the iteration
// runs on P H P, P the projection onto the directions that move every copy alike: a collapsed
// network "at a saddle" of the full parameter space that gradient descent cannot leave is then
// not reported as one. detail: tied_neurons, tied_groups, restricted_to_ties.
//
// Skips, with a reason, when the chosen layers hold more than max_parameters parameters
// (Lanczos keeps max_iterations vectors of that length: 40 x 10^6 doubles = 320 MB), when every
// chosen layer is held fixed, when L0 = 0, or when the loss or gradient is not finite.
//
// Cost: one gradient evaluation, `iterations` Hessian-vector products (kExact: each about 1.7x
// the time of a gradient evaluation on a 64-256-1 tanh network; kCentralDifference: two
// gradient evaluations) and at most 2 * line_search_steps forward passes, whatever the width;
// detail records the counts and the seconds.
#include <cstdint>
#include <string>
#include <vector>

#include "plaudit/checks/check_result.h"
#include "plaudit/model/dataset.h"
#include "plaudit/model/hessian.h"
#include "plaudit/model/network.h"

namespace plaudit::checks {

inline constexpr const char* kCurvatureName = "curvature";

struct CurvatureOptions {
  // 1-based layers whose weights and biases span the Hessian; empty = every layer. Layers held
  // fixed (trainable = false) are left out either way: training cannot move along them.
  std::vector<int> layers;
  int max_iterations = 40;        // Lanczos steps = Hessian-vector products; >= 2
  double tolerance = 1e-4;        // Ritz residual relative to max |Ritz value|; in (0, 1)
  double max_seconds = 300.0;     // wall-clock cap on the iteration (>= 0; 0 = none). Hitting it
                                  // makes the result depend on the machine; detail says so.
  Eigen::Index max_parameters = 1'000'000;  // skip above this many parameters; >= 1
  double threshold = 1e-3;        // negative curvature matters when lambda_min < -threshold * lambda_max; >= 0
  double min_decrease_rel = 1e-4; // ... and the step lowers the loss by >= min_decrease_rel * L0; > 0
  int line_search_steps = 5;      // doublings of the escape step tried per sign; >= 1
  model::HessianMethod method = model::HessianMethod::kExact;
  Eigen::Index block_rows = 1024; // rows per block; >= 1
  double tie_tolerance = 1e-12;   // neurons tied when they differ by <= this x their largest entry; >= 0
  bool respect_ties = true;       // restrict to tie-keeping directions when ties exist
  bool record_seconds = true;     // detail.seconds and detail.lanczos_seconds (not reproducible)
  std::uint64_t seed = 0;         // Lanczos start vector
  bool IsValid(std::string* why) const;
};

// Invalid options or a layer beyond the network raise Error(kUsage); a data width different from
// the network's input, or a baseline loss that is negative or not finite, raises Error(kBadData).
CheckResult RunCurvature(const model::Network& last, const model::Dataset& data, double baseline_loss,
                         const CurvatureOptions& options);

}  // namespace plaudit::checks
