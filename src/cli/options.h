#pragma once
// Option helpers shared by the subcommands.
#include <string>
#include <vector>

#include <CLI/CLI.hpp>

namespace plaudit::cli {

inline CLI::Option* AddFormatOption(CLI::App& app, std::string& format, const std::vector<std::string>& allowed) {
  return app.add_option("--format", format, "Output format")->check(CLI::IsMember(allowed))->capture_default_str();
}

}  // namespace plaudit::cli
