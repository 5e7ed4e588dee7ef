#include <unistd.h>

#include <chrono>
#include <csignal>
#include <iostream>
#include <thread>

#include "cli/audit_args.h"
#include "cli/commands.h"
#include "cli/interrupt.h"
#include "cli/watch_printer.h"
#include "plaudit/audit/watch.h"

namespace plaudit::cli {
namespace {

struct WatchArgs {
  AuditArgs audit;
  double interval = 2.0;
  double timeout = 0.0;
  std::string until;
  int idle_polls = 30;
};

}  // namespace

Command AddWatchCommand(CLI::App& parent) {
  auto* app = parent.add_subcommand("watch", "Follow a run while it is written; audit each plateau");
  auto args = std::make_shared<WatchArgs>();
  AddAuditArgs(*app, args->audit);
  // The report formats of `audit` do not apply; watch streams text lines or JSON events.
  app->remove_option(app->get_option("--format"));
  app->add_option("--format", args->audit.format, "text lines, or jsonl: one JSON object per event")
      ->check(CLI::IsMember({"text", "jsonl"}))->capture_default_str();
  app->add_option("--interval", args->interval, "Seconds between polls")->check(CLI::PositiveNumber)->capture_default_str();
  app->add_option("--timeout", args->timeout, "Give up after this many seconds (0 = never); exit 2")
      ->check(CLI::NonNegativeNumber);
  app->add_option("--until", args->until, "verdict: exit at the first verdict other than moving, with its exit code")
      ->check(CLI::IsMember({"verdict"}));
  app->add_option("--idle-polls", args->idle_polls, "Polls without news before the run is reported idle")
      ->check(CLI::PositiveNumber)->capture_default_str();
  return {app, [args] {
            audit::WatchOptions options;
            options.audit = args->audit.Resolve();
            options.idle_polls = args->idle_polls;
            audit::RunWatcher watcher(args->audit.run, options);
            const bool jsonl = args->audit.format == "jsonl";
            const bool tty = !jsonl && isatty(STDOUT_FILENO) != 0;
            InstallInterruptHandler();
            const auto start = std::chrono::steady_clock::now();
            WatchPrinter printer(jsonl, tty);
            for (;;) {
              for (const auto& e : watcher.Poll()) {
                printer.Print(e);
                if (e.kind == audit::WatchEventKind::kVerdict && args->until == "verdict" && e.verdict &&
                    *e.verdict != audit::Verdict::kMoving) {
                  printer.EndStatusLine();
                  return static_cast<int>(audit::VerdictExitCode(*e.verdict));
                }
              }
              const double elapsed = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
              if (Interrupted() || (args->timeout > 0 && elapsed >= args->timeout)) {
                const std::string why = Interrupted() ? "interrupted" : fmt::format("timed out after {:.0f} s", elapsed);
                const std::string state = fmt::format("{}; {} snapshots read; last verdict {}", why, watcher.snapshots_read(),
                                                      watcher.last_verdict() ? audit::VerdictToString(*watcher.last_verdict()) : "none");
                printer.Message("stopped", state);
                return static_cast<int>(ExitCode::kUndecided);
              }
              std::this_thread::sleep_for(std::chrono::duration<double>(args->interval));
            }
          }};
}

}  // namespace plaudit::cli
