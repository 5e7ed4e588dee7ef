#include "plaudit/checks/check_result.h"

#include <cmath>

namespace plaudit::checks {
namespace {

nlohmann::json Number(double v) { return std::isfinite(v) ? nlohmann::json(v) : nlohmann::json(nullptr); }

}  // namespace

const char* StatusToString(Status s) {
  switch (s) {
    case Status::kPass: return "pass";
    case Status::kFail: return "fail";
    case Status::kWarn: return "warn";
    case Status::kSkip: return "skip";
  }
  return "?";
}

CheckResult Skipped(std::string name, double threshold, std::string reason) {
  CheckResult r;
  r.name = std::move(name);
  r.status = Status::kSkip;
  r.threshold = threshold;
  r.detail["reason"] = reason;
  r.message = std::move(reason);
  return r;
}

nlohmann::json CheckResultToJson(const CheckResult& r) {
  nlohmann::json j;
  j["name"] = r.name;
  j["status"] = StatusToString(r.status);
  j["statistic"] = Number(r.statistic);
  j["threshold"] = Number(r.threshold);
  if (r.p_value) j["p_value"] = Number(*r.p_value);
  j["message"] = r.message;
  j["detail"] = r.detail;
  return j;
}

int CheckExitStatus(const CheckResult& r) {
  switch (r.status) {
    case Status::kPass: return 0;
    case Status::kFail: return 1;
    default: return 2;
  }
}

}  // namespace plaudit::checks
