#pragma once
// The HTML rendering of an audit: one self-contained page (no scripts, fonts, styles or images
// from elsewhere) that is also well-formed XML, so XHTML tools parse it, with print styles.
// It holds the verdict banner (summary and what to do next), the checks table, and inline SVG
// charts (plaudit/report/svg_plot.h): loss vs step, the judged layer's gradient (and every
// computed layer's), the first-layer directions at the first and last snapshot, and the
// residual-fit permutation null. Every number comes from the AuditReport and its checks'
// details, the same values report::AuditReportToJson writes; table cells carry the exact value
// in data-value (17 significant digits) beside the rounded text.
#include <filesystem>
#include <optional>
#include <string>

#include "plaudit/audit/audit.h"
#include "plaudit/report/direction_map.h"

namespace plaudit::report {

struct HtmlOptions {
  // First-layer directions computed from the networks (DirectionMapForRun): outgoing weights at
  // both ends, the empty cap and the best new neuron marked. Absent: the support-spread
  // detail's points, without markers or initial weights.
  std::optional<DirectionMap> directions;
  std::string generator = "plaudit 0.1.0";  // named in the page's footer and <meta name="generator">
};

std::string AuditReportToHtml(const audit::AuditReport& report, const HtmlOptions& options = {});

// Write `text` to `path` through `path`.tmp and a rename, so that a reader never sees half a
// file. Failures raise Error(kBadData) naming the file.
void WriteFileAtomically(const std::filesystem::path& path, const std::string& text);

}  // namespace plaudit::report
