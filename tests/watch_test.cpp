// The live monitor (plaudit/audit/watch.h) and `plaudit watch`, on a run directory that is
// being written while it is watched (../shared/run-format.md, section 1: writers write
// step-N.npz.tmp and rename; a reader that meets a half-written file skips it and looks again;
// scalars.jsonl lines may arrive while the run is written).
//
// The run is trained once by plaudit::train::Train into a source directory, then a writer
// thread copies it file by file into the watched directory while the test thread calls
// RunWatcher::Poll(). The writer grants the poller a fixed number of polls after each step of
// writing, so which poll sees which state is fixed (the event sequence is deterministic), while
// each .tmp file is written during a poll.
#include <algorithm>
#include <exception>
#include <stdexcept>
#include <condition_variable>
#include <cstdint>
#include <filesystem>
#include <fstream>
#include <map>
#include <mutex>
#include <sstream>
#include <string>
#include <thread>
#include <vector>

#include <catch2/catch.hpp>
#include <nlohmann/json.hpp>

#include "plaudit/audit/audit.h"
#include "plaudit/audit/watch.h"
#include "plaudit/io/run_dir.h"
#include "plaudit/model/dataset.h"
#include "plaudit/model/evaluate.h"
#include "plaudit/model/network.h"
#include "plaudit/train/teacher.h"
#include "plaudit/train/trainer.h"
#include "support/run_process.h"
#include "support/temp_dir.h"

namespace {

namespace fs = std::filesystem;
using plaudit::audit::RunWatcher;
using plaudit::audit::Verdict;
using plaudit::audit::WatchEvent;
using plaudit::audit::WatchEventKind;
using plaudit::testing::ReadBytes;
using plaudit::testing::RunPlaudit;
using plaudit::testing::TempDir;

// Data from a planted two-layer tanh teacher (2 neurons, d = 3, noise 0): a student with 16
// tanh neurons contains it, so full-batch gradient descent converges towards zero loss.
plaudit::model::Dataset TeacherData() {
  plaudit::train::TeacherOptions t;
  t.kind = plaudit::train::TeacherKind::kTwoLayer;
  t.activation = plaudit::model::Activation::kTanh;
  t.dim = 3;
  t.width = 2;
  t.rows = 200;
  t.seed = 2;
  return plaudit::train::MakeTeacherData(t).data;
}

plaudit::train::TrainOptions StudentOptions(std::int64_t steps, std::int64_t save_every, double lr = 1.0) {
  plaudit::train::TrainOptions o;
  o.widths = {16};
  o.lr = lr;
  o.steps = steps;
  o.save_every = save_every;
  o.seed = 1;
  return o;
}

// Best constant predictor's squared loss, from its closed form: half the population variance
// of y (one output column), as numpy.var computes it.
double ConstantPredictorLoss(const Eigen::MatrixXd& y) {
  const double mean = y.col(0).mean();
  return 0.5 * (y.col(0).array() - mean).square().mean();
}

// NaN (a skipped check's statistic) is close only to NaN.
bool RelClose(double a, double b, double rel) {
  if (std::isnan(a) || std::isnan(b)) return std::isnan(a) && std::isnan(b);
  return std::abs(a - b) <= rel * std::max(std::abs(a), std::abs(b));
}

std::map<std::int64_t, std::string> ScalarLines(const fs::path& file) {
  std::map<std::int64_t, std::string> lines;
  std::ifstream in(file);
  for (std::string line; std::getline(in, line);) {
    if (line.empty()) continue;
    lines[nlohmann::json::parse(line).at("step").get<std::int64_t>()] = line + "\n";
  }
  return lines;
}

void Append(const fs::path& file, const std::string& bytes) {
  std::ofstream out(file, std::ios::binary | std::ios::app);
  out.write(bytes.data(), static_cast<std::streamsize>(bytes.size()));
  if (!out.flush()) throw std::runtime_error("cannot append to " + file.string());
}

void WriteFile(const fs::path& file, const std::string& bytes) {
  std::ofstream out(file, std::ios::binary | std::ios::trunc);
  out.write(bytes.data(), static_cast<std::streamsize>(bytes.size()));
  if (!out.flush()) throw std::runtime_error("cannot write " + file.string());
}

// The poller may poll only when the writer grants it a poll; the writer waits for the polls it
// granted before its next change. File changes and polls exclude each other (fs_mutex), except
// the writing of .tmp files, which overlaps polls on purpose.
class Lockstep {
 public:
  void Grant(int polls) {
    std::lock_guard<std::mutex> lock(m_);
    target_ += polls;
    tokens_ += polls;
    cv_.notify_all();
  }
  void AwaitGranted() {
    std::unique_lock<std::mutex> lock(m_);
    cv_.wait(lock, [&] { return done_polls_ >= target_ || finished_; });
  }
  // Writer at the end, or either side on an error (which also releases the other).
  void Finish() {
    std::lock_guard<std::mutex> lock(m_);
    finished_ = true;
    cv_.notify_all();
  }
  // Poller: false once the writer has finished and every granted poll was made.
  bool NextPoll() {
    std::unique_lock<std::mutex> lock(m_);
    cv_.wait(lock, [&] { return tokens_ > 0 || finished_; });
    if (tokens_ == 0) return false;
    --tokens_;
    return true;
  }
  void PollDone() {
    std::lock_guard<std::mutex> lock(m_);
    ++done_polls_;
    cv_.notify_all();
  }
  std::mutex fs_mutex;

 private:
  std::mutex m_;
  std::condition_variable cv_;
  int tokens_ = 0, target_ = 0, done_polls_ = 0;
  bool finished_ = false;
};

struct PolledEvent {
  int poll = 0;
  WatchEvent event;
};

}  // namespace

TEST_CASE("watch follows a run written file by file: snapshots in order, a retry, idle, a verdict at the plateau",
          "[watch]") {
  TempDir scratch("watch");
  const fs::path source = scratch / "source";
  const fs::path live = scratch / "live";
  const plaudit::model::Dataset data = TeacherData();
  plaudit::train::Train(data, StudentOptions(3000, 100), source);
  const plaudit::io::RunDir src(source);
  const auto snaps = src.Snapshots();
  REQUIRE(snaps.size() == 31);
  const auto lines = ScalarLines(source / "scalars.jsonl");
  REQUIRE(lines.size() == snaps.size());

  // The half-written snapshot, and the step whose scalars line first arrives cut short. The
  // cut line comes while fewer than loss_plateau.min_points (8) lines exist, so the plateau
  // state is judged from the snapshots then and does not depend on the missing line.
  const std::int64_t half_step = 500;
  const std::int64_t cut_step = 200;
  plaudit::audit::WatchOptions options;
  options.idle_polls = 4;  // the writer never leaves more than 2 polls in a row without news

  Lockstep sync;
  std::exception_ptr writer_error;
  std::thread writer([&] {
    try {
      fs::create_directories(live / "snapshots");
      sync.Grant(1);  // an empty directory: the trainer has not begun
      sync.AwaitGranted();
      {
        std::lock_guard<std::mutex> lock(sync.fs_mutex);
        fs::copy_file(source / "data.npz", live / "data.npz");
        WriteFile(live / "run.json.tmp", ReadBytes(source / "run.json"));
        fs::rename(live / "run.json.tmp", live / "run.json");
      }
      sync.Grant(1);
      for (const auto& ref : snaps) {
        const std::string bytes = ReadBytes(ref.path);
        const fs::path target = live / "snapshots" / ref.path.filename();
        const fs::path tmp = target.string() + ".tmp";
        const std::string& line = lines.at(ref.step);
        if (ref.step == half_step) {
          sync.AwaitGranted();
          {
            std::lock_guard<std::mutex> lock(sync.fs_mutex);
            WriteFile(target, bytes.substr(0, bytes.size() / 2));  // a writer without .tmp, caught mid-write
            Append(live / "scalars.jsonl", line);
          }
          sync.Grant(2);
          sync.AwaitGranted();
          {
            std::lock_guard<std::mutex> lock(sync.fs_mutex);
            Append(target, bytes.substr(bytes.size() / 2));
          }
          sync.Grant(1);
          continue;
        }
        WriteFile(tmp, bytes);  // overlaps the poll granted for the previous change
        sync.AwaitGranted();
        {
          std::lock_guard<std::mutex> lock(sync.fs_mutex);
          Append(live / "scalars.jsonl", ref.step == cut_step ? line.substr(0, line.size() / 2) : line);
          fs::rename(tmp, target);
        }
        if (ref.step == cut_step) {
          sync.Grant(2);
          sync.AwaitGranted();
          std::lock_guard<std::mutex> lock(sync.fs_mutex);
          Append(live / "scalars.jsonl", line.substr(line.size() / 2));
        }
        sync.Grant(1);
      }
      sync.AwaitGranted();
      sync.Grant(options.idle_polls + 2);  // the writer has stopped
      sync.AwaitGranted();
    } catch (...) {
      writer_error = std::current_exception();
    }
    sync.Finish();
  });

  std::vector<PolledEvent> events;
  int polls = 0;
  std::exception_ptr poll_error;
  try {
    RunWatcher watcher(live, options);
    while (sync.NextPoll()) {
      std::vector<WatchEvent> got;
      {
        std::lock_guard<std::mutex> lock(sync.fs_mutex);
        got = watcher.Poll();
      }
      for (auto& e : got) events.push_back({polls, std::move(e)});
      ++polls;
      sync.PollDone();
    }
    CHECK(watcher.snapshots_read() == snaps.size());
    CHECK(watcher.last_verdict().has_value());
  } catch (...) {
    poll_error = std::current_exception();
    sync.Finish();
  }
  writer.join();
  if (writer_error) std::rethrow_exception(writer_error);
  if (poll_error) std::rethrow_exception(poll_error);  // Poll() must not throw on any of this

  // Reference losses: model::Evaluate on every source snapshot over all 200 rows (the audit
  // keeps every row below max_rows = 8192), and L0 from its closed form.
  const plaudit::model::Dataset audit_rows = plaudit::model::ReadDataset(source / "data.npz", plaudit::model::Loss::kSquared, 1);
  const double l0 = ConstantPredictorLoss(audit_rows.y);
  std::map<std::int64_t, double> loss_at;
  for (const auto& ref : snaps) {
    const auto net = plaudit::model::NetworkFromArrays(src.manifest(), src.ReadSnapshot(ref), ref.path.string());
    plaudit::model::EvalOptions eval;
    eval.lowest_grad_layer = -1;
    loss_at[ref.step] = plaudit::model::Evaluate(net, audit_rows, eval).loss;
  }
  auto logged = [&](std::int64_t step) { return nlohmann::json::parse(lines.at(step)).at("loss").get<double>(); };
  // The problem converges (the planted teacher is in the student class).
  REQUIRE(loss_at.at(3000) < 1e-3 * l0);

  {  // The first poll finds an empty directory and says nothing; the second starts the run.
    REQUIRE_FALSE(events.empty());
    CHECK(events.front().poll == 1);
    CHECK(events.front().event.kind == WatchEventKind::kStarted);
    CHECK(std::count_if(events.begin(), events.end(),
                        [](const PolledEvent& e) { return e.event.kind == WatchEventKind::kStarted; }) == 1);
  }

  {  // One snapshot event per snapshot, in step order, with the recomputed loss.
    std::vector<std::int64_t> steps, expected;
    for (const auto& pe : events) {
      const WatchEvent& e = pe.event;
      if (e.kind != WatchEventKind::kSnapshot) continue;
      steps.push_back(e.step);
      INFO("step " << e.step);
      REQUIRE(loss_at.count(e.step) == 1);
      CHECK(RelClose(e.loss, loss_at.at(e.step), 1e-12));
      // The trainer logs the full-batch loss at the saved weights (trainer.h).
      CHECK(RelClose(e.loss, logged(e.step), 1e-12));
      CHECK(RelClose(e.loss_relative, loss_at.at(e.step) / l0, 1e-12));
      CHECK(e.gradient_ratio >= 0.0);
      CHECK(e.gradient_ratio <= 1.0);
    }
    for (const auto& ref : snaps) expected.push_back(ref.step);
    CHECK(steps == expected);
  }

  {  // The half-written snapshot is retried, then read; nothing is given up on.
    std::size_t first_retry = events.size(), read_at = events.size();
    int retries = 0;
    for (std::size_t i = 0; i < events.size(); ++i) {
      const WatchEvent& e = events[i].event;
      CHECK(e.kind != WatchEventKind::kSkipped);
      if (e.kind == WatchEventKind::kRetry) {
        CHECK(e.step == half_step);
        CHECK(e.message.find("step-500.npz") != std::string::npos);
        ++retries;
        first_retry = std::min(first_retry, i);
      }
      if (e.kind == WatchEventKind::kSnapshot && e.step == half_step) read_at = i;
    }
    CHECK(retries == 2);  // each of the two polls made while the file was half-written
    CHECK(first_retry < read_at);
    CHECK(read_at < events.size());
  }

  {  // Idle is reported once, after the writer stopped.
    std::vector<std::size_t> idle;
    std::size_t last_snapshot = 0;
    for (std::size_t i = 0; i < events.size(); ++i) {
      if (events[i].event.kind == WatchEventKind::kIdle) idle.push_back(i);
      if (events[i].event.kind == WatchEventKind::kSnapshot) last_snapshot = i;
    }
    REQUIRE(idle.size() == 1);
    CHECK(idle[0] > last_snapshot);
    CHECK(events[idle[0]].event.step == 3000);
    CHECK(events[idle[0]].poll >= polls - (options.idle_polls + 2));  // among the polls after the writer stopped
  }

  {  // A verdict where the loss-plateau rule first holds on the losses logged so far.
    std::int64_t flat_from = -1;
    plaudit::checks::LossSeries series;
    series.source = "scalars";
    for (const auto& ref : snaps) {
      series.steps.push_back(ref.step);
      series.loss.push_back(logged(ref.step));
      if (plaudit::checks::RunLossPlateau(series, l0, options.audit.loss_plateau).status == plaudit::checks::Status::kPass) {
        flat_from = ref.step;
        break;
      }
    }
    REQUIRE(flat_from > 0);

    std::size_t plateau_at = events.size();
    for (std::size_t i = 0; i < events.size(); ++i) {
      const WatchEvent& e = events[i].event;
      if (e.kind == WatchEventKind::kPlateau && plateau_at == events.size()) plateau_at = i;
      if (e.kind == WatchEventKind::kVerdict) {
        INFO("verdict at step " << e.step);
        CHECK(i > plateau_at);  // no verdict before the loss is flat
      }
    }
    REQUIRE(plateau_at + 1 < events.size());
    const WatchEvent& plateau = events[plateau_at].event;
    CHECK(plateau.step == flat_from);
    CHECK(plateau.plateau);
    const WatchEvent& verdict = events[plateau_at + 1].event;
    REQUIRE(verdict.kind == WatchEventKind::kVerdict);
    CHECK(verdict.step == flat_from);
    REQUIRE(verdict.verdict.has_value());
    REQUIRE(verdict.report != nullptr);
    CHECK(*verdict.verdict == verdict.report->verdict);

    // The live verdict equals a from-scratch audit of the run as it stood at that step.
    TempDir partial("watch-partial");
    fs::create_directories(partial / "snapshots");
    fs::copy_file(source / "run.json", partial / "run.json");
    fs::copy_file(source / "data.npz", partial / "data.npz");
    std::string log;
    for (const auto& ref : snaps) {
      if (ref.step > flat_from) break;
      fs::copy_file(ref.path, partial / "snapshots" / ref.path.filename());
      log += lines.at(ref.step);
    }
    partial.Write("scalars.jsonl", log);
    const auto fresh = plaudit::audit::RunAudit(plaudit::io::RunDir(partial.path()), options.audit);
    CHECK(fresh.verdict == verdict.report->verdict);
    REQUIRE(fresh.checks.size() == verdict.report->checks.size());
    for (std::size_t c = 0; c < fresh.checks.size(); ++c) {
      INFO(fresh.checks[c].name);
      CHECK(fresh.checks[c].name == verdict.report->checks[c].name);
      CHECK(fresh.checks[c].status == verdict.report->checks[c].status);
      CHECK(RelClose(fresh.checks[c].statistic, verdict.report->checks[c].statistic, 1e-9));
    }
  }

  {  // The cut scalars line is read once, whole, after it was completed.
    const WatchEvent* last = nullptr;
    for (const auto& pe : events) {
      if (pe.event.kind == WatchEventKind::kVerdict) last = &pe.event;
    }
    REQUIRE(last != nullptr);
    const auto& s = last->report->loss_series;
    CHECK(s.source == "scalars");
    REQUIRE(std::count(s.steps.begin(), s.steps.end(), cut_step) == 1);
    const auto at = static_cast<std::size_t>(std::find(s.steps.begin(), s.steps.end(), cut_step) - s.steps.begin());
    CHECK(s.loss[at] == logged(cut_step));
  }
}

namespace {

// `plaudit watch` with --format jsonl: every line one JSON object with an "event".
std::vector<nlohmann::json> JsonLines(const std::string& out) {
  std::vector<nlohmann::json> events;
  std::istringstream in(out);
  for (std::string line; std::getline(in, line);) {
    INFO(line);
    const auto j = nlohmann::json::parse(line, nullptr, false);
    REQUIRE_FALSE(j.is_discarded());
    REQUIRE(j.contains("event"));
    events.push_back(j);
  }
  return events;
}

}  // namespace

TEST_CASE("plaudit watch --until verdict on a finished converged run exits as plaudit audit does", "[watch][cli]") {
  TempDir scratch("watch-cli");
  const fs::path run = scratch / "run";
  plaudit::train::Train(TeacherData(), StudentOptions(3000, 100), run);

  const auto audit = RunPlaudit({"audit", run.string(), "--format", "json"});
  INFO(audit.command << "\n" << audit.err);
  const auto report = nlohmann::json::parse(audit.out);
  // The fixture is converged: its audit reaches a verdict that `--until verdict` stops at.
  REQUIRE((report.at("verdict") == "global" || report.at("verdict") == "spurious"));

  const auto watch = RunPlaudit({"watch", run.string(), "--until", "verdict", "--interval", "0.05", "--timeout", "60",
                                 "--format", "jsonl"});
  INFO(watch.command << "\n" << watch.out << watch.err);
  CHECK(watch.exit_code == audit.exit_code);
  const auto events = JsonLines(watch.out);
  REQUIRE_FALSE(events.empty());
  CHECK(events.front().at("event") == "started");
  CHECK(events.back().at("event") == "verdict");
  CHECK(events.back().at("verdict") == report.at("verdict"));
  // Every earlier verdict was `moving`: --until stops at the first other one.
  for (std::size_t i = 0; i + 1 < events.size(); ++i) {
    if (events[i].at("event") == "verdict") CHECK(events[i].at("verdict") == "moving");
  }
}

TEST_CASE("plaudit watch --timeout on a run that is still moving exits 2 with the state so far", "[watch][cli]") {
  TempDir scratch("watch-timeout");
  const fs::path run = scratch / "run";
  // 150 small steps (lr 0.1) on the same problem: the loss is still falling fast at the end.
  plaudit::train::Train(TeacherData(), StudentOptions(150, 10, 0.1), run);
  const auto audit = RunPlaudit({"audit", run.string(), "--format", "json"});
  INFO(audit.command << "\n" << audit.err);
  REQUIRE(nlohmann::json::parse(audit.out).at("verdict") == "moving");

  const auto watch = RunPlaudit({"watch", run.string(), "--until", "verdict", "--interval", "0.05", "--timeout", "0.5",
                                 "--format", "jsonl"});
  INFO(watch.command << "\n" << watch.out << watch.err);
  CHECK(watch.exit_code == 2);
  const auto events = JsonLines(watch.out);
  REQUIRE_FALSE(events.empty());
  CHECK(events.back().at("event") == "stopped");
  CHECK(events.back().at("message").get<std::string>().find("timed out") != std::string::npos);
  CHECK(std::count_if(events.begin(), events.end(), [](const nlohmann::json& e) { return e.at("event") == "snapshot"; }) == 16);
  for (const auto& e : events) {
    if (e.at("event") == "verdict") CHECK(e.at("verdict") == "moving");
  }
}
