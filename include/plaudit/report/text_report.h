#pragma once
// The terminal rendering of an audit: verdict line, a compact checks table, a loss sparkline.
// Colour only when asked (the CLI asks when standard output is a terminal).
#include <string>
#include <vector>

#include "plaudit/audit/audit.h"

namespace plaudit::report {

struct TextOptions {
  bool colour = false;
  int sparkline_width = 48;
};

std::string AuditReportToText(const audit::AuditReport& report, const TextOptions& options = {});

// A one-line chart of a series in block characters, resampled to `width` columns; log scale
// when every value is positive and the range spans more than a factor of 10.
std::string Sparkline(const std::vector<double>& values, int width);

}  // namespace plaudit::report
