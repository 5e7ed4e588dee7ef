#pragma once
// Following a run directory while a trainer writes it. Each Poll() looks once for new
// snapshots and new scalar lines, evaluates only what is new, and reports events. A snapshot
// that cannot be read yet (half-written, renamed mid-read) is retried on a later poll.
#include <cstdint>
#include <filesystem>
#include <map>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "plaudit/audit/audit.h"

namespace plaudit::audit {

struct WatchOptions {
  AuditOptions audit;
  // Polls without a new snapshot or scalar line after which the run is reported idle (once).
  int idle_polls = 30;
  // A snapshot that still fails to read after this many polls is reported and given up on.
  int max_retries = 20;
  // While the loss stays flat after a `moving` or `inconclusive` verdict, audit again every this
  // many new snapshots (the gradient may decay later); a global or spurious verdict stands until
  // the loss moves again.
  int reaudit_every = 5;
};

enum class WatchEventKind {
  kStarted,   // manifest read
  kSnapshot,  // a new snapshot was evaluated
  kPlateau,   // the plateau state changed (entered or left)
  kVerdict,   // a full audit ran at a plateau
  kRetry,     // a snapshot could not be read yet
  kSkipped,   // a snapshot was given up on after max_retries
  kIdle,      // nothing new for idle_polls polls
};

const char* WatchEventKindToString(WatchEventKind k);

struct WatchEvent {
  WatchEventKind kind = WatchEventKind::kSnapshot;
  std::int64_t step = 0;
  double loss = 0.0;
  double loss_relative = 0.0;      // loss / L0 (NaN without data)
  double gradient_ratio = 0.0;     // judged layer: sup|grad| now / max so far
  bool plateau = false;
  std::optional<Verdict> verdict;  // kVerdict only
  std::string message;
  std::shared_ptr<const AuditReport> report;  // kVerdict only
};

nlohmann::json WatchEventToJson(const WatchEvent& e);

class RunWatcher {
 public:
  RunWatcher(std::filesystem::path root, WatchOptions options);

  // Look once for new files; returns the events in order. Throws only for errors that retrying
  // cannot fix (a malformed manifest, audit data of the wrong shape).
  std::vector<WatchEvent> Poll();

  const Trajectory& trajectory() const { return trajectory_; }
  std::size_t snapshots_read() const { return trajectory_.points.size(); }
  std::optional<Verdict> last_verdict() const { return last_verdict_; }

 private:
  bool Start(std::vector<WatchEvent>& events);
  void ReadNewScalars(bool& changed);
  bool PlateauNow() const;

  std::filesystem::path root_;
  WatchOptions options_;
  std::optional<io::RunDir> run_;
  AuditInputs inputs_;
  int layer_ = 0;  // judged layer, 0-based
  Trajectory trajectory_;
  std::map<std::int64_t, int> retries_;
  std::vector<std::int64_t> given_up_;
  std::vector<io::ScalarRecord> scalars_;
  std::uint64_t scalars_offset_ = 0;
  double max_sup_ = 0.0;
  bool plateau_ = false;
  bool audited_this_plateau_ = false;
  int since_audit_ = 0;
  bool idle_reported_ = false;
  int quiet_polls_ = 0;
  std::optional<Verdict> last_verdict_;
};

}  // namespace plaudit::audit
