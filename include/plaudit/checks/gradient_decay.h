#pragma once
// Check `gradient-decay`: has the chosen layer's weight gradient decayed, and uniformly?
//
// Per snapshot t: S(t) = sup |g|, M(t) = mean |g|, P(t) = p99 |g| of the layer's scaled gradient.
//     rho = S(last) / max_t S(t)
// Tail trend: least-squares slope of log max(S(t), tiny) against step over the last third of
// the snapshots (at least 3), with its standard error and t = slope / se.
// Fails when rho > decay_ratio (the gradient has not fallen far from its peak) OR
// t > slope_t (the gradient is growing again, as when training leaves a saddle); else passes.
// Exception, status warn: rho <= floor_ratio and the tail is flat (|t| <= slope_t). The gradient
// fell far from its peak and then stopped falling: the noise floor that minibatch SGD at a
// constant step size leaves (the full-batch gradient settles instead of going to zero). The
// verdict then judges the plateau as stationary at that noise level.
// Uniformity U(t) = S(t) / M(t) is reported alongside: a sup far above the mean at the end
// means a few neurons still move while the rest have stopped.
#include <string>
#include <vector>

#include "plaudit/audit/trajectory.h"
#include "plaudit/checks/check_result.h"

namespace plaudit::checks {

inline constexpr const char* kGradientDecayName = "gradient-decay";

// Default layer, 1-based rule: 1 layer -> layer 1; 2 layers -> layer 2; 3 layers -> layer 2;
// 4+ -> the last layer. A frozen choice falls back to the nearest trained layer (ties: the
// higher one); if every layer is frozen the rule's choice is kept (the check then skips).
// `frozen` may be shorter than `depth` (missing entries: trained). Returns a 0-based index;
// depth < 1 raises Error(kBadData).
int DefaultGradientLayer(int depth, const std::vector<bool>& frozen);

struct GradientDecayOptions {
  int layer = 0;                  // 1-based; 0 = DefaultGradientLayer
  double decay_ratio = 1e-2;      // fails when rho = S(last) / max_t S(t) > decay_ratio; > 0
  double slope_t = 2.0;           // fails when the tail slope of log S has t-statistic > slope_t
  // warns instead of failing when decay_ratio < rho <= floor_ratio and |t| <= slope_t; set it to
  // decay_ratio to turn the exception off. 0.1 (one order of magnitude) is common practice.
  double floor_ratio = 0.1;
  int min_snapshots = 3;          // skips with fewer snapshots; >= 3 (a slope needs a residual)
  double uniformity_factor = 4.0; // detail.few_neurons_moving when U(last) > uniformity_factor *
                                  // median_t U(t); 4x is common practice, not a derived bound
  bool IsValid(std::string* why) const;
};

// The 0-based layer `options.layer` names (its default rule when 0); a layer beyond `depth`
// raises Error(kUsage).
int ResolveGradientLayer(const GradientDecayOptions& options, int depth,
                         const std::vector<bool>& frozen);

// Skips when there are fewer than min_snapshots points, when the layer was held fixed, when its
// gradient was not computed (layer0 < trajectory.lowest_grad_layer) or is not finite.
// Invalid options or a layer0 beyond the trajectory's layers raise Error(kUsage).
CheckResult RunGradientDecay(const audit::Trajectory& trajectory, int layer0,
                             const GradientDecayOptions& options);

}  // namespace plaudit::checks
