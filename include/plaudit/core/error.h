#pragma once
// The one exception type for everything a user can cause: bad files, bad options, missing
// inputs. It carries the process exit code of the run-directory contract, so `main` only maps.
#include <stdexcept>
#include <string>
#include <utility>

#include <fmt/format.h>

namespace plaudit {

// Exit statuses of `plaudit audit` and the other subcommands (../shared/run-format.md, section 5).
enum class ExitCode : int {
  kGlobal = 0,        // verdict `global`; also "success" for commands without a verdict
  kSpurious = 1,      // verdict `spurious`
  kUndecided = 2,     // verdict `moving` or `inconclusive`
  kDiverged = 3,      // verdict `diverged`
  kUsage = 64,        // bad command line or invalid option value
  kBadData = 65,      // an input exists but is malformed, inconsistent or non-finite
  kMissing = 66,      // an input file or directory does not exist
};

class Error : public std::runtime_error {
 public:
  Error(ExitCode code, std::string message) : std::runtime_error(std::move(message)), code_(code) {}
  ExitCode code() const noexcept { return code_; }
  int exit_status() const noexcept { return static_cast<int>(code_); }

 private:
  ExitCode code_;
};

// Raise an Error with an fmt-formatted, single-line message.
template <typename... Args>
[[noreturn]] void raise(ExitCode code, fmt::format_string<Args...> format, Args&&... args) {
  throw Error(code, fmt::format(format, std::forward<Args>(args)...));
}

}  // namespace plaudit
