#pragma once
// The verdict rules: from the checks' results to one verdict and a sentence a person can act on.
//   diverged      any loss or parameter non-finite
//   global        last loss <= global_loss_ratio * L0, or plateau + gradient decayed + residual
//                 not explained by fresh features
//   spurious      plateau + gradient decayed + residual explained
//   moving        loss still falling, or the chosen layer's gradient has not decayed
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
};

struct Decision {
  Verdict verdict = Verdict::kInconclusive;
  std::string summary;
};

Decision Decide(const DecisionInputs& in);

}  // namespace plaudit::audit
