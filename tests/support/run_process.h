#pragma once
// Run a program as a child process (no shell: arguments pass through unchanged), with standard
// input from /dev/null and standard output and standard error captured to files in a scratch
// directory of its own, for tests of the `plaudit` executable and of the Python recipes.
#include <spawn.h>
#include <sys/wait.h>

#include <fcntl.h>
#include <unistd.h>

#include <cerrno>
#include <stdexcept>
#include <string>
#include <vector>

#include "support/temp_dir.h"

extern char** environ;

namespace plaudit::testing {

struct ProcessResult {
  int exit_code = -1;      // the child's exit status; -1 when it was killed by a signal
  bool signalled = false;
  int signal = 0;          // the signal that killed it
  std::string out;         // standard output
  std::string err;         // standard error
  std::string command;     // the command line, for failure messages
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
inline ProcessResult RunProcess(const std::vector<std::string>& args) {
  TempDir scratch("process");
  ProcessResult r;
  for (const auto& a : args) r.command += (r.command.empty() ? "" : " ") + ShellQuote(a);
  const std::string out_path = (scratch / "out").string();
  const std::string err_path = (scratch / "err").string();
  posix_spawn_file_actions_t actions;
  posix_spawn_file_actions_init(&actions);
  posix_spawn_file_actions_addopen(&actions, STDIN_FILENO, "/dev/null", O_RDONLY, 0);
  posix_spawn_file_actions_addopen(&actions, STDOUT_FILENO, out_path.c_str(), O_WRONLY | O_CREAT | O_TRUNC, 0600);
  posix_spawn_file_actions_addopen(&actions, STDERR_FILENO, err_path.c_str(), O_WRONLY | O_CREAT | O_TRUNC, 0600);
  std::vector<std::string> strings = args;
  std::vector<char*> argv;
  for (auto& a : strings) argv.push_back(a.data());
  argv.push_back(nullptr);
  pid_t pid = 0;
  const int rc = posix_spawn(&pid, strings.front().c_str(), &actions, nullptr, argv.data(), environ);
  posix_spawn_file_actions_destroy(&actions);
  if (rc != 0) throw std::runtime_error("cannot start " + strings.front());
  int wstatus = 0;
  while (waitpid(pid, &wstatus, 0) < 0) {
    if (errno != EINTR) throw std::runtime_error("waitpid failed");
  }
  if (WIFEXITED(wstatus)) r.exit_code = WEXITSTATUS(wstatus);
  if (WIFSIGNALED(wstatus)) {
    r.signalled = true;
    r.signal = WTERMSIG(wstatus);
  }
  r.out = ReadBytes(out_path);
  r.err = ReadBytes(err_path);
  return r;
}

// The `plaudit` executable built with the tests (PLAUDIT_CLI, set by tests/CMakeLists.txt).
inline ProcessResult RunPlaudit(std::vector<std::string> args) {
  args.insert(args.begin(), PLAUDIT_CLI);
  return RunProcess(args);
}

}  // namespace plaudit::testing
