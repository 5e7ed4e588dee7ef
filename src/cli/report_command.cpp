// `plaudit report RUN -o FILE`: the audit as one self-contained HTML page.
#include <iostream>

#include "cli/audit_args.h"
#include "cli/commands.h"
#include "plaudit/report/direction_map.h"
#include "plaudit/report/html_report.h"
#include "plaudit/report/json_report.h"

namespace plaudit::cli {

int WriteHtmlReport(const audit::AuditInputs& inputs, const audit::AuditReport& report, const std::string& path) {
  report::HtmlOptions html;
  html.directions = report::DirectionMapForInputs(inputs, report);
  report::WriteFileAtomically(path, report::AuditReportToHtml(report, html));
  return static_cast<int>(audit::VerdictExitCode(report.verdict));
}

Command AddReportCommand(CLI::App& parent) {
  auto* app = parent.add_subcommand("report", "Audit a run and write the result as one self-contained HTML page with charts");
  auto args = std::make_shared<AuditArgs>();
  auto out = std::make_shared<std::string>();
  AddAuditArgs(*app, *args);
  app->add_option("-o,--output", *out, "HTML file to write (through FILE.tmp, then renamed)")->required();
  return {app, [args, out] {
            const audit::AuditOptions options = args->Resolve();
            const io::RunDir run(args->run);
            const audit::AuditInputs inputs = audit::ReadAuditInputs(run, options);
            const audit::AuditReport report = audit::RunAudit(run, inputs, options);
            const int status = WriteHtmlReport(inputs, report, *out);
            if (args->format == "json") {
              std::cout << report::AuditReportToJson(report).dump(2) << "\n";
            } else {
              std::cout << fmt::format("{}: {} at step {}; report written to {}\n", report.run,
                                       audit::VerdictToString(report.verdict), report.step, *out);
            }
            return status;
          }};
}

}  // namespace plaudit::cli
