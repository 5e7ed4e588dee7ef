#pragma once
// Check `loss-plateau`: has the loss stopped falling?
//
// The tail window is every point whose step lies in the last `tail_fraction` of the step range
// [first step, last step] (at least `min_points` points: if fewer lie there, the last
// `min_points` points). The window is cut into fifths by point count (each fifth holds
// round(w/5) >= 1 points) and the medians of the first and last fifths are compared:
//     delta_rel = (m_first - m_last) / max(|m_last|, tiny)
//     delta_abs = (m_first - m_last) / L0                       (L0: the baseline loss)
// The loss has plateaued (pass) when delta_rel < rel_threshold OR delta_abs < abs_threshold;
// otherwise it is still falling (fail). A rising loss counts as a plateau here (the deltas are
// negative) and is flagged `rising` in the detail; divergence is judged elsewhere, so
// non-finite losses make the check skip.
#include <cstdint>
#include <string>
#include <vector>

#include "plaudit/checks/check_result.h"

namespace plaudit::checks {

inline constexpr const char* kLossPlateauName = "loss-plateau";

struct LossSeries {
  std::vector<std::int64_t> steps;  // any order; sorted (stably) by the check
  std::vector<double> loss;         // same length as steps
  std::string source;               // "scalars" (scalars.jsonl) or "snapshots" (computed there)
};

struct LossPlateauOptions {
  double tail_fraction = 0.2;   // window = last 20% of the step range; in (0, 1]
  int min_points = 8;           // window holds at least this many points; skip when the series
                                // has fewer; must be >= 5 (one point per fifth)
  double rel_threshold = 1e-2;  // plateau when delta_rel < rel_threshold (> 0) ...
  double abs_threshold = 1e-4;  // ... or when delta_abs = drop / L0 < abs_threshold (>= 0)
  bool IsValid(std::string* why) const;
};

// `baseline_loss` L0 scales the absolute drop (typically the loss at initialisation); the check
// skips when it is not finite and positive. Invalid options raise Error(kUsage); steps and
// losses of different lengths raise Error(kBadData).
CheckResult RunLossPlateau(const LossSeries& series, double baseline_loss,
                           const LossPlateauOptions& options);

}  // namespace plaudit::checks
