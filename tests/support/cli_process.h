#pragma once
// The plaudit executable run as a pipeline would (support/run_process.h), with its exit status
// in the shell's convention, and a listing of a directory tree to show nothing was written.
#include <filesystem>
#include <map>
#include <string>
#include <vector>

#include "support/run_process.h"
#include "support/temp_dir.h"

namespace plaudit::testing {

struct CliResult {
  int status = -1;      // exit status; 128 + signal number when the process was killed
  bool signalled = false;
  std::string out;      // standard output
  std::string err;      // standard error
};

inline CliResult RunCli(const std::vector<std::string>& args) {
  const ProcessResult p = RunPlaudit(args);
  CliResult r;
  r.signalled = p.signalled;
  r.status = p.signalled ? 128 + p.signal : p.exit_code;
  r.out = p.out;
  r.err = p.err;
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
