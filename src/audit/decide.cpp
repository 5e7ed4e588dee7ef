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

// Depth >= 4 with a degenerate middle layer: the i.i.d. trap of the multilayer mean-field limit.
bool DeepDegenerate(const DecisionInputs& in) { return in.depth >= 4 && Is(in.layer_degeneracy, Status::kFail); }

std::string DegenerateLayer(const DecisionInputs& in) {
  const int layer = static_cast<int>(DetailNumber(in.layer_degeneracy, "worst_layer", 0.0));
  return fmt::format("layer {}'s neurons compute nearly one function (mean |corr| {:.3g} >= {:.3g})", layer,
                     in.layer_degeneracy->statistic, in.layer_degeneracy->threshold);
}

// What to do about a spurious plateau, from the evidence of where capacity is missing.
std::string SpuriousAdvice(const DecisionInputs& in) {
  const double tied = DetailNumber(in.curvature, "tied_neurons", 0.0);
  if (tied >= 2.0) {
    return fmt::format("{:.0f} hidden neurons are exact copies of one another, and gradient descent never pulls "
                       "copies apart: re-initialise without copies (or perturb them) instead of training on",
                       tied);
  }
  if (DeepDegenerate(in)) {
    return fmt::format(
        "{}: i.i.d. initialisation of a network this deep loses diversity in its middle layers, and widening does "
        "not restore it, nor do random biases; restart with a correlated initialisation that keeps neurons diverse in "
        "both directions (plaudit train --init latent)",
        DegenerateLayer(in));
  }
  if (Is(in.two_way_diversity, Status::kFail)) {
    const int layer = static_cast<int>(DetailNumber(in.two_way_diversity, "worst_layer", 0.0));
    const std::string side = in.two_way_diversity->detail.value("worst_direction", std::string("incoming"));
    return fmt::format("layer {}'s {} weight vectors have bunched up ({:.3g}x the random empty cap): restart with "
                       "an initialisation that keeps neurons diverse in both directions (plaudit train --init latent)",
                       layer, side, in.two_way_diversity->statistic);
  }
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

// Warnings a global verdict carries: a degenerate deep layer reaches the optimum of a smaller model.
std::string GlobalWarnings(const DecisionInputs& in) {
  if (!DeepDegenerate(in)) return {};
  return fmt::format(" Warning: {}; the optimum found is that of a network with fewer distinct neurons.",
                     DegenerateLayer(in));
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
                        in.baseline_loss > 0 ? removable / in.baseline_loss : removable) +
                GlobalWarnings(in)};
  }
  std::string s = fmt::format(
      "Global: the loss is flat at {}, the layer-{} gradient {}, and fresh features explain no more of the "
      "remaining error than chance (p = {:.3g}); the rest is noise or beyond this function class, so stop training",
      LossLevel(in), in.gradient_layer + 1, GradientState(in), in.residual_fit->p_value.value_or(std::nan("")));
  if (Is(in.support_spread, Status::kFail)) {
    s += fmt::format(" (note: first-layer directions have bunched up, {:.3g}x the random empty cap)",
                     in.support_spread->statistic);
  }
  return {Verdict::kGlobal, s + "." + GlobalWarnings(in)};
}

// No hidden layer: the loss is convex in the weights (squared, logistic and cross-entropy losses of
// a linear map), so a stationary point is the global optimum of the linear model, and what fresh
// features remove is what a hidden layer would add.
Decision Linear(const DecisionInputs& in) {
  return {Verdict::kGlobal,
          fmt::format("Global: the loss is flat at {} and the gradient {}; a network without a hidden layer has a convex "
                      "loss, so this is the best linear fit. Fresh features still remove {:.3g}% of the remaining loss "
                      "(p = {:.3g}): add a hidden layer to go lower.",
                      LossLevel(in), GradientState(in), 100.0 * in.residual_fit->statistic,
                      in.residual_fit->p_value.value_or(std::nan("")))};
}

// A saddle: the residual is explained, yet the curvature shows the way down; training leaves it.
Decision Saddle(const DecisionInputs& in) {
  const double ratio = DetailNumber(in.curvature, "ratio");
  const double drop = in.curvature->detail.contains("escape") && in.curvature->detail["escape"].is_object()
                          ? in.curvature->detail["escape"].value("actual_decrease_rel", std::nan(""))
                          : std::nan("");
  const int layer = static_cast<int>(DetailNumber(in.curvature, "dominant_layer", 0.0));
  const std::string part = in.curvature->detail.value("dominant_part", std::string("weights"));
  std::string s = fmt::format(
      "Moving: the loss is flat at {} and the layer-{} gradient {}, but the network sits at a saddle: the Hessian "
      "has negative curvature (lambda_min / lambda_max = {:.3g}) and a step along it lowers the loss by {:.3g} x L0, "
      "mostly through layer {}'s {}; fresh features remove {:.3g}% of the remaining loss, so expect the loss to fall "
      "again: keep training.",
      LossLevel(in), in.gradient_layer + 1, GradientState(in), ratio, drop, layer, part,
      100.0 * in.residual_fit->statistic);
  if (DeepDegenerate(in)) s += fmt::format(" Warning: {}.", DegenerateLayer(in));
  return {Verdict::kMoving, s};
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
  if (Is(in.residual_fit, Status::kFail) && in.depth == 1) return Linear(in);
  if (Is(in.residual_fit, Status::kFail)) {
    if (Is(in.curvature, Status::kFail)) return Saddle(in);
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
