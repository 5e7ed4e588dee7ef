#pragma once
// A run directory (../shared/run-format.md, section 1): manifest, audit data, snapshots and
// scalars log. Opening reads the manifest and lists the snapshots; arrays are read on demand,
// one snapshot at a time, so a run with thousands of snapshots streams.
#include <cstdint>
#include <filesystem>
#include <optional>
#include <string>
#include <vector>

#include "plaudit/io/manifest.h"
#include "plaudit/io/ndarray.h"
#include "plaudit/io/scalars.h"

namespace plaudit::io {

struct SnapshotRef {
  std::int64_t step = 0;
  std::filesystem::path path;
};

// `step-<non-negative integer>.npz` -> the integer; anything else -> nullopt.
std::optional<std::int64_t> SnapshotStep(const std::string& file_name);

// The snapshots of a directory sorted by step; other names are ignored. Duplicate steps
// (step-7.npz and step-07.npz) are an error naming both files.
std::vector<SnapshotRef> ListSnapshots(const std::filesystem::path& snapshot_dir);

class RunDir {
 public:
  // Reads run.json (kMissing if the directory or manifest is absent).
  explicit RunDir(std::filesystem::path root);

  const std::filesystem::path& root() const { return root_; }
  const Manifest& manifest() const { return manifest_; }
  std::filesystem::path manifest_path() const { return root_ / "run.json"; }
  std::filesystem::path data_path() const { return root_ / manifest_.data; }
  std::filesystem::path snapshot_dir() const { return root_ / "snapshots"; }
  std::filesystem::path scalars_path() const { return root_ / "scalars.jsonl"; }
  bool has_data() const;

  // Re-list the snapshots directory (for live runs).
  std::vector<SnapshotRef> Snapshots() const;
  // Read one snapshot's arrays; every array the manifest names must be there.
  ArrayMap ReadSnapshot(const SnapshotRef& ref) const;
  ScalarLog Scalars() const;

 private:
  std::filesystem::path root_;
  Manifest manifest_;
};

}  // namespace plaudit::io
