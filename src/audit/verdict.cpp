#include "plaudit/audit/verdict.h"

namespace plaudit::audit {

const char* VerdictToString(Verdict v) {
  switch (v) {
    case Verdict::kGlobal: return "global";
    case Verdict::kSpurious: return "spurious";
    case Verdict::kMoving: return "moving";
    case Verdict::kInconclusive: return "inconclusive";
    case Verdict::kDiverged: return "diverged";
  }
  return "?";
}

std::optional<Verdict> VerdictFromString(const std::string& name) {
  for (Verdict v : {Verdict::kGlobal, Verdict::kSpurious, Verdict::kMoving, Verdict::kInconclusive, Verdict::kDiverged}) {
    if (name == VerdictToString(v)) return v;
  }
  return std::nullopt;
}

ExitCode VerdictExitCode(Verdict v) {
  switch (v) {
    case Verdict::kGlobal: return ExitCode::kGlobal;
    case Verdict::kSpurious: return ExitCode::kSpurious;
    case Verdict::kDiverged: return ExitCode::kDiverged;
    default: return ExitCode::kUndecided;
  }
}

}  // namespace plaudit::audit
