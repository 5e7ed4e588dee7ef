#include <iostream>
#include <string>

#include "cli/commands.h"
#include "cli/options.h"
#include "plaudit/audit/inspect.h"

namespace plaudit::cli {

Command AddInspectCommand(CLI::App& parent) {
  auto* app = parent.add_subcommand("inspect", "Show what a run directory holds, with losses recomputed from the weights");
  struct Args {
    std::string run;
    std::string format = "text";
    audit::InspectOptions options;
  };
  auto args = std::make_shared<Args>();
  app->add_option("run", args->run, "Run directory")->required();
  AddFormatOption(*app, args->format, {"text", "json"});
  app->add_flag("--all", args->options.all_losses, "Compute the loss at every snapshot, not only the first and last");
  app->add_option("--max-rows", args->options.max_rows, "Subsample the audit data to this many rows (0 = all)")
      ->check(CLI::NonNegativeNumber);
  app->add_option("--seed", args->options.seed, "Seed of the row subsample");
  return {app, [args] {
            const io::RunDir run(args->run);
            const audit::RunSummary summary = audit::Inspect(run, args->options);
            if (args->format == "json") std::cout << audit::RunSummaryToJson(summary).dump(2) << "\n";
            else std::cout << audit::RunSummaryToText(summary);
            return 0;
          }};
}

}  // namespace plaudit::cli
