#include <unistd.h>

#include <iostream>

#include "cli/audit_args.h"
#include "cli/commands.h"
#include "plaudit/report/json_report.h"
#include "plaudit/report/text_report.h"

namespace plaudit::cli {

Command AddAuditCommand(CLI::App& parent) {
  auto* app = parent.add_subcommand("audit", "Judge a run's plateau: global, spurious, moving, inconclusive or diverged");
  auto args = std::make_shared<AuditArgs>();
  auto html = std::make_shared<std::string>();
  AddAuditArgs(*app, *args);
  app->add_option("--html", *html, "Also write the report as one self-contained HTML page to this file");
  return {app, [args, html] {
            const audit::AuditOptions options = args->Resolve();
            const io::RunDir run(args->run);
            const audit::AuditInputs inputs = audit::ReadAuditInputs(run, options);
            const audit::AuditReport report = audit::RunAudit(run, inputs, options);
            if (!html->empty()) WriteHtmlReport(inputs, report, *html);
            if (args->format == "json") {
              std::cout << report::AuditReportToJson(report).dump(2) << "\n";
            } else {
              report::TextOptions text;
              text.colour = isatty(STDOUT_FILENO) != 0 && std::getenv("NO_COLOR") == nullptr;
              std::cout << report::AuditReportToText(report, text);
            }
            return static_cast<int>(audit::VerdictExitCode(report.verdict));
          }};
}

Command AddCheckCommand(CLI::App& parent) {
  auto* app = parent.add_subcommand("check", "Run one check alone (exit 0 pass, 1 fail, 2 warn or skip)");
  auto args = std::make_shared<AuditArgs>();
  auto name = std::make_shared<std::string>();
  app->add_option("name", *name, "Check: gradient-decay, support-spread, residual-fit, loss-plateau")->required();
  AddAuditArgs(*app, *args);
  return {app, [args, name] {
            const audit::AuditOptions options = args->Resolve();
            const io::RunDir run(args->run);
            const checks::CheckResult result = audit::RunSingleCheck(run, *name, options);
            if (args->format == "json") {
              std::cout << checks::CheckResultToJson(result).dump(2) << "\n";
            } else {
              std::cout << fmt::format("{}: {} (statistic {:.4g}, threshold {:.4g}{})\n  {}\n", result.name,
                                       checks::StatusToString(result.status), result.statistic, result.threshold,
                                       result.p_value ? fmt::format(", p = {:.3g}", *result.p_value) : std::string(),
                                       result.message);
            }
            return checks::CheckExitStatus(result);
          }};
}

}  // namespace plaudit::cli
