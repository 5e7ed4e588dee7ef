#pragma once
// The report object of ../shared/run-format.md section 5, with plaudit's extensions
// (baseline loss, rows, thresholds, the loss and gradient trajectory).
#include <nlohmann/json.hpp>

#include "plaudit/audit/audit.h"

namespace plaudit::report {

inline constexpr const char* kReportFormat = "plaudit-report/1";

nlohmann::json AuditReportToJson(const audit::AuditReport& report);

}  // namespace plaudit::report
