#pragma once
// The verdict rules: from the checks' results to one verdict and a sentence a person can act on.
//   diverged      any loss or parameter non-finite
//   global        last loss <= global_loss_ratio * L0, or plateau + gradient decayed + residual
//                 not explained by fresh features
//   spurious      plateau + gradient decayed + residual explained, and no saddle found
//   moving        loss still falling, or the chosen layer's gradient has not decayed, or
//                 plateau + gradient decayed + residual explained at a saddle (curvature fails)
// A network without a hidden layer (depth 1) has a convex loss: a plateau with a decayed gradient
// is global for it even when fresh features explain the residual (the summary says so).
// A failed layer-degeneracy check of a network of depth >= 4 names the degenerate layer in the
// spurious advice and adds a warning to a global summary; curvature and the deep checks are
// never required (their skips do not make the verdict inconclusive).
//   inconclusive  a check needed for the decision was skipped
#include <string>
#include <vector>

#include "plaudit/audit/verdict.h"
#include "plaudit/checks/check_result.h"

namespace plaudit::audit {

struct DecisionInputs {
  bool diverged = false;
  std::string diverged_where;         // e.g. "parameters at step 400"
  double last_loss = 0.0;
  double baseline_loss = 0.0;         // L0
  double global_loss_ratio = 1e-6;
  int gradient_layer = 0;             // 0-based
  const checks::CheckResult* gradient_decay = nullptr;
  const checks::CheckResult* loss_plateau = nullptr;
  const checks::CheckResult* residual_fit = nullptr;
  const checks::CheckResult* support_spread = nullptr;
  const checks::CheckResult* curvature = nullptr;          // optional
  const checks::CheckResult* layer_degeneracy = nullptr;   // optional
  const checks::CheckResult* two_way_diversity = nullptr;  // optional
  int depth = 2;                      // number of weight layers
};

struct Decision {
  Verdict verdict = Verdict::kInconclusive;
  std::string summary;
};

Decision Decide(const DecisionInputs& in);

}  // namespace plaudit::audit
