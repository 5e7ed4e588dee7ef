#pragma once
// Run a program as a child process through /bin/sh, with standard output and standard error
// captured to files in a scratch directory, for tests of the `plaudit` executable and of the
// Python recipes. Arguments are single-quoted, so paths and JSON pass through unchanged.
#include <sys/wait.h>

#include <cstdlib>
#include <string>
#include <vector>

#include "support/temp_dir.h"

namespace plaudit::testing {

struct ProcessResult {
  int exit_code = -1;  // the child's exit status; -1 when it was killed by a signal
  std::string out;     // standard output
  std::string err;     // standard error
  std::string command; // the shell line, for failure messages
};

inline std::string ShellQuote(const std::string& arg) {
  std::string q = "'";
  for (const char c : arg) {
    if (c == '\'') q += "'\\''";
    else q.push_back(c);
  }
  return q + "'";
}

// Run `argv` (argv[0] is the program path) and wait for it.
inline ProcessResult RunProcess(const std::vector<std::string>& argv) {
  TempDir scratch("process");
  ProcessResult r;
  for (const auto& a : argv) r.command += (r.command.empty() ? "" : " ") + ShellQuote(a);
  const std::string line =
      r.command + " </dev/null >" + ShellQuote((scratch / "out").string()) + " 2>" + ShellQuote((scratch / "err").string());
  const int status = std::system(line.c_str());
  r.exit_code = status != -1 && WIFEXITED(status) ? WEXITSTATUS(status) : -1;
  r.out = ReadBytes(scratch / "out");
  r.err = ReadBytes(scratch / "err");
  return r;
}

// The `plaudit` executable built with the tests (PLAUDIT_CLI, set by tests/CMakeLists.txt).
inline ProcessResult RunPlaudit(std::vector<std::string> args) {
  args.insert(args.begin(), PLAUDIT_CLI);
  return RunProcess(args);
}

}  // namespace plaudit::testing
