#include "plaudit/io/run_dir.h"

#include <algorithm>
#include <map>

#include "plaudit/core/error.h"
#include "plaudit/io/npz.h"

namespace plaudit::io {

std::optional<std::int64_t> SnapshotStep(const std::string& name) {
  constexpr std::string_view kPrefix = "step-";
  constexpr std::string_view kSuffix = ".npz";
  if (name.size() <= kPrefix.size() + kSuffix.size()) return std::nullopt;
  if (name.compare(0, kPrefix.size(), kPrefix) != 0) return std::nullopt;
  if (name.compare(name.size() - kSuffix.size(), kSuffix.size(), kSuffix) != 0) return std::nullopt;
  const std::string digits = name.substr(kPrefix.size(), name.size() - kPrefix.size() - kSuffix.size());
  if (digits.size() > 18 || !std::all_of(digits.begin(), digits.end(), [](char c) { return c >= '0' && c <= '9'; })) {
    return std::nullopt;
  }
  return std::stoll(digits);
}

std::vector<SnapshotRef> ListSnapshots(const std::filesystem::path& dir) {
  std::vector<SnapshotRef> refs;
  std::error_code ec;
  if (!std::filesystem::is_directory(dir, ec)) return refs;
  std::map<std::int64_t, std::filesystem::path> by_step;
  for (const auto& entry : std::filesystem::directory_iterator(dir, ec)) {
    if (!entry.is_regular_file(ec)) continue;
    const auto step = SnapshotStep(entry.path().filename().string());
    if (!step) continue;
    const auto [it, fresh] = by_step.emplace(*step, entry.path());
    if (!fresh) {
      raise(ExitCode::kBadData, "{}: snapshots '{}' and '{}' both claim step {}", dir.string(),
            it->second.filename().string(), entry.path().filename().string(), *step);
    }
  }
  for (auto& [step, path] : by_step) refs.push_back({step, path});
  return refs;
}

RunDir::RunDir(std::filesystem::path root) : root_(std::move(root)) {
  std::error_code ec;
  if (!std::filesystem::is_directory(root_, ec)) raise(ExitCode::kMissing, "{}: run directory not found", root_.string());
  manifest_ = ReadManifest(manifest_path());
}

bool RunDir::has_data() const {
  std::error_code ec;
  return std::filesystem::exists(data_path(), ec);
}

std::vector<SnapshotRef> RunDir::Snapshots() const { return ListSnapshots(snapshot_dir()); }

ArrayMap RunDir::ReadSnapshot(const SnapshotRef& ref) const { return ReadNpz(ref.path); }

ScalarLog RunDir::Scalars() const { return ReadScalars(scalars_path()); }

}  // namespace plaudit::io
