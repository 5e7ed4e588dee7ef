#pragma once
// The subcommand table of the `plaudit` CLI. Each subcommand lives in its own file, declares
// its options on a CLI11 subcommand and returns the function that runs it; `main` only parses,
// dispatches and maps plaudit::Error to the contract's exit codes.
#include <functional>
#include <string>
#include <vector>

#include <CLI/CLI.hpp>

#include "plaudit/audit/audit.h"

namespace plaudit::cli {

using Action = std::function<int()>;  // returns the process exit status

struct Command {
  CLI::App* app = nullptr;
  Action run;
};

Command AddInspectCommand(CLI::App& parent);
Command AddAuditCommand(CLI::App& parent);
Command AddCheckCommand(CLI::App& parent);
Command AddTrainCommand(CLI::App& parent);
Command AddWatchCommand(CLI::App& parent);
Command AddSynthCommand(CLI::App& parent);
Command AddReportCommand(CLI::App& parent);

// Write the HTML page of `report` to `path` (`report` and `audit --html`); returns the audit's
// exit status.
int WriteHtmlReport(const audit::AuditInputs& inputs, const audit::AuditReport& report,
                    const std::string& path);

}  // namespace plaudit::cli
