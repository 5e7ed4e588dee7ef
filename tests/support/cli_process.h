#pragma once
// Run the plaudit executable (PLAUDIT_CLI) as a child process, as a pipeline would, and capture
// its exit status, standard output and standard error. Output goes to files in a scratch
// directory of its own, never into the run being audited.
#include <spawn.h>
#include <sys/wait.h>

#include <fcntl.h>
#include <unistd.h>

#include <cerrno>

#include <filesystem>
#include <map>
#include <stdexcept>
#include <string>
#include <vector>

#include "support/temp_dir.h"

extern char** environ;

namespace plaudit::testing {

struct CliResult {
  int status = -1;      // exit status; 128 + signal number when the process was killed
  bool signalled = false;
  std::string out;      // standard output
  std::string err;      // standard error
};

inline CliResult RunCli(const std::vector<std::string>& args) {
  TempDir scratch("cli");
  const std::string out_path = (scratch / "stdout").string();
  const std::string err_path = (scratch / "stderr").string();
  posix_spawn_file_actions_t actions;
  posix_spawn_file_actions_init(&actions);
  posix_spawn_file_actions_addopen(&actions, STDIN_FILENO, "/dev/null", O_RDONLY, 0);
  posix_spawn_file_actions_addopen(&actions, STDOUT_FILENO, out_path.c_str(), O_WRONLY | O_CREAT | O_TRUNC, 0600);
  posix_spawn_file_actions_addopen(&actions, STDERR_FILENO, err_path.c_str(), O_WRONLY | O_CREAT | O_TRUNC, 0600);
  std::vector<std::string> argv_strings = {PLAUDIT_CLI};
  argv_strings.insert(argv_strings.end(), args.begin(), args.end());
  std::vector<char*> argv;
  for (auto& a : argv_strings) argv.push_back(a.data());
  argv.push_back(nullptr);
  pid_t pid = 0;
  const int rc = posix_spawn(&pid, PLAUDIT_CLI, &actions, nullptr, argv.data(), environ);
  posix_spawn_file_actions_destroy(&actions);
  if (rc != 0) throw std::runtime_error(std::string("cannot start ") + PLAUDIT_CLI);
  int wstatus = 0;
  while (waitpid(pid, &wstatus, 0) < 0) {
    if (errno != EINTR) throw std::runtime_error("waitpid failed");
  }
  CliResult r;
  if (WIFEXITED(wstatus)) {
    r.status = WEXITSTATUS(wstatus);
  } else if (WIFSIGNALED(wstatus)) {
    r.signalled = true;
    r.status = 128 + WTERMSIG(wstatus);
  }
  r.out = ReadBytes(out_path);
  r.err = ReadBytes(err_path);
  return r;
}

// Every file and directory under `root`, by relative path, with the file's bytes (directories
// map to "<dir>"): two listings are equal only when nothing was added, removed or changed.
inline std::map<std::string, std::string> ListTree(const std::filesystem::path& root) {
  std::map<std::string, std::string> tree;
  std::error_code ec;
  if (!std::filesystem::exists(root, ec)) return tree;
  for (const auto& entry : std::filesystem::recursive_directory_iterator(root)) {
    const std::string rel = std::filesystem::relative(entry.path(), root).generic_string();
    tree[rel] = entry.is_directory() ? std::string("<dir>") : ReadBytes(entry.path());
  }
  return tree;
}

}  // namespace plaudit::testing
