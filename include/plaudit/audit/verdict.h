#pragma once
// The verdict an audit reaches and how it maps to the process exit status
// (../shared/run-format.md, section 5).
#include <optional>
#include <string>

#include "plaudit/core/error.h"

namespace plaudit::audit {

enum class Verdict {
  kGlobal,        // the plateau is at the best the function class can do on these data
  kSpurious,      // a stationary point that is not global: fresh features still explain the error
  kMoving,        // still making progress, or the chosen layer's gradient has not decayed
  kInconclusive,  // the checks disagree or the inputs are too thin; the summary says which
  kDiverged,      // non-finite loss or parameters
};

const char* VerdictToString(Verdict v);
std::optional<Verdict> VerdictFromString(const std::string& name);
ExitCode VerdictExitCode(Verdict v);

}  // namespace plaudit::audit
