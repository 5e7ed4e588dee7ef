#include "plaudit/audit/decide.h"

#include <cmath>

#include <fmt/format.h>

namespace plaudit::audit {
namespace {

using checks::CheckResult;
using checks::Status;

bool Is(const CheckResult* r, Status s) { return r != nullptr && r->status == s; }

double DetailNumber(const CheckResult* r, const char* key, double fallback = std::nan("")) {
  if (r == nullptr || !r->detail.contains(key) || !r->detail[key].is_number()) return fallback;
  return r->detail[key].get<double>();
}

// How the judged layer's gradient ended: decayed, or settled at a noise floor (a warn).
std::string GradientState(const DecisionInputs& in) {
  if (Is(in.gradient_decay, Status::kWarn)) {
    return fmt::format("has settled at a noise floor ({:.3g} of its peak, flat tail)", in.gradient_decay->statistic);
  }
  return "has decayed";
}

std::string LossLevel(const DecisionInputs& in) {
  return in.baseline_loss > 0 ? fmt::format("{:.3g} x L0", in.last_loss / in.baseline_loss)
                              : fmt::format("{:.3g}", in.last_loss);
}

// What to do about a spurious plateau, from the evidence of where capacity is missing.
std::string SpuriousAdvice(const DecisionInputs& in) {
  if (Is(in.support_spread, Status::kFail)) {
    return fmt::format(
        "the first-layer neurons have lost their spread (largest empty cap {:.3g}x that of random directions): "
        "re-initialise with full-support directions or widen the first layer",
        in.support_spread->statistic);
  }
  const double angle = DetailNumber(in.residual_fit, "best_neuron_angle_deg");
  if (std::isfinite(angle) && angle >= 30.0) {
    return fmt::format("the best new neuron points {:.0f} degrees away from every existing one: add capacity there "
                       "(widen) or restart from a new initialisation",
                       angle);
  }
  return "restart from a new initialisation or widen the network";
}

bool DetailFlag(const CheckResult* r, const char* key) {
  return r != nullptr && r->detail.contains(key) && r->detail[key].is_boolean() && r->detail[key].get<bool>();
}

Decision Converged(const DecisionInputs& in) {
  // Passed only because what fresh features remove is too small to matter: say that, not "chance".
  if (DetailFlag(in.residual_fit, "significant") && DetailFlag(in.residual_fit, "removable_below_floor") &&
      in.residual_fit->statistic >= in.residual_fit->threshold) {
    const double removable = DetailNumber(in.residual_fit, "removable");
    return {Verdict::kGlobal,
            fmt::format("Global: the loss is flat at {}, the layer-{} gradient {}, and what fresh features still remove "
                        "({:.3g}% of the remaining loss, {:.2g} x L0) is below the floor worth chasing; stop training.",
                        LossLevel(in), in.gradient_layer + 1, GradientState(in), 100.0 * in.residual_fit->statistic,
                        in.baseline_loss > 0 ? removable / in.baseline_loss : removable)};
  }
  std::string s = fmt::format(
      "Global: the loss is flat at {}, the layer-{} gradient {}, and fresh features explain no more of the "
      "remaining error than chance (p = {:.3g}); the rest is noise or beyond this function class, so stop training",
      LossLevel(in), in.gradient_layer + 1, GradientState(in), in.residual_fit->p_value.value_or(std::nan("")));
  if (Is(in.support_spread, Status::kFail)) {
    s += fmt::format(" (note: first-layer directions have bunched up, {:.3g}x the random empty cap)",
                     in.support_spread->statistic);
  }
  return {Verdict::kGlobal, s + "."};
}

}  // namespace

Decision Decide(const DecisionInputs& in) {
  if (in.diverged) {
    return {Verdict::kDiverged, fmt::format("Diverged: non-finite {}; lower the step size or check the inputs.",
                                            in.diverged_where)};
  }
  if (in.baseline_loss > 0 && in.last_loss <= in.global_loss_ratio * in.baseline_loss) {
    return {Verdict::kGlobal, fmt::format("Global: the loss has reached {:.3g} x L0 (at most {:.0e} x L0): the data "
                                          "are fitted; stop training.",
                                          in.last_loss / in.baseline_loss, in.global_loss_ratio)};
  }
  if (Is(in.loss_plateau, Status::kFail)) {
    return {Verdict::kMoving, fmt::format("Moving: the loss fell by {:.2g}% over the tail window and is still "
                                          "falling (now {}); keep training.",
                                          100.0 * in.loss_plateau->statistic, LossLevel(in))};
  }
  if (Is(in.gradient_decay, Status::kFail)) {
    const double t = DetailNumber(in.gradient_decay, "slope_t", 0.0);
    const std::string why = t > 2.0 && in.gradient_decay->statistic <= in.gradient_decay->threshold
                                ? fmt::format("is growing again (tail slope t = {:.3g}), typical of leaving a saddle", t)
                                : fmt::format("has only fallen to {:.3g} of its peak (needs <= {:.3g})",
                                              in.gradient_decay->statistic, in.gradient_decay->threshold);
    return {Verdict::kMoving, fmt::format("Moving: the loss is flat at {} but the layer-{} gradient {}; too early to "
                                          "judge, keep training.",
                                          LossLevel(in), in.gradient_layer + 1, why)};
  }
  for (const CheckResult* needed : {in.loss_plateau, in.gradient_decay, in.residual_fit}) {
    if (needed == nullptr || !needed->ran()) {
      const std::string name = needed ? needed->name : "a required check";
      const std::string reason = needed ? needed->message : "it did not run";
      return {Verdict::kInconclusive, fmt::format("Inconclusive: {} was skipped ({}).", name, reason)};
    }
  }
  if (Is(in.residual_fit, Status::kFail)) {
    const double eta = in.residual_fit->statistic;
    return {Verdict::kSpurious,
            fmt::format("Spurious: the loss is flat at {} and the layer-{} gradient {}, yet fresh features "
                        "remove {:.3g}% of the remaining loss out-of-fold (p = {:.3g}); {}.",
                        LossLevel(in), in.gradient_layer + 1, GradientState(in), 100.0 * eta, in.residual_fit->p_value.value_or(std::nan("")),
                        SpuriousAdvice(in))};
  }
  return Converged(in);
}

}  // namespace plaudit::audit
