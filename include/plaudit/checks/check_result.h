#pragma once
// What every check returns: the raw evidence, its threshold and a status, serialisable to the
// report's `checks` array (../shared/run-format.md, section 5). Defaults are sentinels so that a
// check that never ran is visible as `skip`.
#include <limits>
#include <optional>
#include <string>

#include <nlohmann/json.hpp>

namespace plaudit::checks {

enum class Status { kPass, kFail, kWarn, kSkip };

const char* StatusToString(Status s);

struct CheckResult {
  std::string name;
  Status status = Status::kSkip;
  double statistic = std::numeric_limits<double>::quiet_NaN();
  double threshold = std::numeric_limits<double>::quiet_NaN();
  std::optional<double> p_value;
  nlohmann::json detail = nlohmann::json::object();  // raw evidence; `reason` when skipped
  std::string message;  // one plain-words line for people

  bool ran() const { return status != Status::kSkip; }
};

// A skipped result with its reason in detail.reason and message.
CheckResult Skipped(std::string name, double threshold, std::string reason);

// The report's JSON object for one check; non-finite numbers become null.
nlohmann::json CheckResultToJson(const CheckResult& r);

// Exit code of `plaudit check NAME`: 0 pass, 1 fail, 2 warn or skip.
int CheckExitStatus(const CheckResult& r);

}  // namespace plaudit::checks
