// plaudit: audit a trained fully-connected network's loss plateau.
#include <cstdio>
#include <iostream>

#include <fmt/core.h>

#include "cli/commands.h"
#include "cli/memory_limit.h"
#include "plaudit/core/allocator.h"
#include "plaudit/core/error.h"

int main(int argc, char** argv) {
  plaudit::KeepFreedMemoryForReuse();
  CLI::App app{"plaudit: is this loss plateau a spurious stationary point, a global one, or still moving?"};
  // One line per error, like every other bad input. At most one subcommand: an unknown word is
  // then reported by name (with a minimum, CLI11 only says a subcommand is required).
  app.failure_message([](const CLI::App*, const CLI::Error& e) {
    return fmt::format("plaudit: {} (see plaudit --help)\n", e.what());
  });
  app.require_subcommand(0, 1);
  app.set_version_flag("--version", "plaudit 0.1.0");
  std::string max_memory;
  app.add_option("--max-memory", max_memory,
                 "Cap the process's memory (address space), e.g. 512M or 4G; exceeding it is a one-line error (exit 65)")
      ->check([](const std::string& v) {
        return plaudit::cli::ParseMemorySize(v) ? std::string() : "not a size such as 512M or 4G: " + v;
      });
  std::vector<plaudit::cli::Command> commands = {
      plaudit::cli::AddInspectCommand(app),
      plaudit::cli::AddAuditCommand(app),
      plaudit::cli::AddReportCommand(app),
      plaudit::cli::AddCheckCommand(app),
      plaudit::cli::AddWatchCommand(app),
      plaudit::cli::AddTrainCommand(app),
      plaudit::cli::AddSynthCommand(app),
  };
  try {
    app.parse(argc, argv);
  } catch (const CLI::CallForHelp& e) {
    return app.exit(e);
  } catch (const CLI::CallForAllHelp& e) {
    return app.exit(e);
  } catch (const CLI::CallForVersion& e) {
    return app.exit(e);
  } catch (const CLI::ParseError& e) {
    app.exit(e);
    return static_cast<int>(plaudit::ExitCode::kUsage);
  }
  try {
    if (!max_memory.empty()) plaudit::cli::ApplyMemoryLimit(*plaudit::cli::ParseMemorySize(max_memory));
    for (auto& c : commands) {
      if (c.app != nullptr && c.app->parsed()) return c.run();
    }
    std::string names;
    for (const auto& c : commands) names += (names.empty() ? "" : ", ") + c.app->get_name();
    fmt::print(stderr, "plaudit: a subcommand is required ({}; see plaudit --help)\n", names);
  } catch (const plaudit::Error& e) {
    std::fflush(stdout);
    fmt::print(stderr, "plaudit: {}\n", e.what());
    return e.exit_status();
  } catch (const std::bad_alloc&) {
    fmt::print(stderr, "plaudit: out of memory{} (try a smaller --max-rows or --block-rows)\n",
               max_memory.empty() ? std::string() : " under --max-memory " + max_memory);
    return static_cast<int>(plaudit::ExitCode::kBadData);
  }
  return static_cast<int>(plaudit::ExitCode::kUsage);
}
