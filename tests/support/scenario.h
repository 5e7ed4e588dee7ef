#pragma once
// Helpers for end-to-end scenarios: train (or descend from a hand-built start), audit the run
// directory, and describe the report in one line for failure messages.
#include <cstdint>
#include <filesystem>
#include <fstream>
#include <sstream>
#include <string>

#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include "plaudit/audit/audit.h"
#include "plaudit/io/manifest.h"
#include "plaudit/io/npz.h"
#include "plaudit/io/run_dir.h"
#include "plaudit/model/network.h"
#include "plaudit/train/teacher.h"
#include "plaudit/train/trainer.h"

namespace plaudit::testing {

// Noise-free rows of a planted teacher (train/teacher.h) of this kind, size and seed.
inline model::Dataset TeacherRows(train::TeacherKind kind, Eigen::Index dim, Eigen::Index width, Eigen::Index rows,
                                  std::uint64_t seed) {
  train::TeacherOptions t;
  t.kind = kind;
  t.dim = dim;
  t.width = width;
  t.rows = rows;
  t.seed = seed;
  return train::MakeTeacherData(t).data;
}

struct DescentRun {
  std::int64_t final_step = 0;
  double final_loss = 0.0;
};

// Full-batch gradient descent with the trainer's own engine (train::Descent) from a network
// the initialisers cannot draw (e.g. output weights fixed to exactly 1), written as a run
// directory of the contract: run.json from train::TrainManifest(options), data.npz,
// snapshots/step-N.npz at step 0, every options.save_every steps and the last, and
// scalars.jsonl with the full-batch loss at every saved step and every options.log_every.
inline DescentRun DescendAndWrite(const model::Dataset& data, const train::TrainOptions& options,
                                  model::Network net, const std::filesystem::path& out) {
  namespace fs = std::filesystem;
  const io::Manifest manifest = train::TrainManifest(options);
  fs::create_directories(out / "snapshots");
  {
    std::ofstream f(out / "run.json", std::ios::binary | std::ios::trunc);
    f << io::ManifestToJson(manifest);
  }
  io::WriteNpz(out / "data.npz", {{"x", io::MakeArray(data.x)}, {"y", io::MakeArray(data.y)}});
  std::ofstream log(out / "scalars.jsonl", std::ios::binary | std::ios::trunc);
  train::Descent descent(data, options, options.seed);
  DescentRun run;
  for (std::int64_t t = 0;; ++t) {
    const model::Evaluation ev = descent.FullBatch(net, true);
    const bool last = t == options.steps;
    const bool save = last || t == 0 || (options.save_every > 0 && t % options.save_every == 0);
    if (save || (options.log_every > 0 && t % options.log_every == 0)) {
      log << nlohmann::json{{"step", t}, {"loss", ev.loss}}.dump() << '\n';
    }
    if (save) io::WriteNpz(out / "snapshots" / fmt::format("step-{}.npz", t), model::NetworkToArrays(manifest, net));
    if (last) {
      run.final_step = t;
      run.final_loss = ev.loss;
      return run;
    }
    descent.Apply(net, ev);
  }
}

inline audit::AuditReport Audit(const std::filesystem::path& dir, const audit::AuditOptions& options = {}) {
  return audit::RunAudit(io::RunDir(dir), options);
}

inline checks::Status StatusOf(const audit::AuditReport& report, const std::string& check) {
  const checks::CheckResult* r = report.Find(check);
  return r == nullptr ? checks::Status::kSkip : r->status;
}

// "verdict; check status statistic (p) ..." plus the loss levels, for INFO().
inline std::string Describe(const audit::AuditReport& report) {
  std::ostringstream s;
  s << audit::VerdictToString(report.verdict) << " (last loss " << report.last_loss << ", L0 " << report.baseline_loss
    << ")";
  for (const checks::CheckResult& c : report.checks) {
    s << "; " << c.name << ' ' << checks::StatusToString(c.status) << ' ' << c.statistic;
    if (c.p_value) s << " (p " << *c.p_value << ')';
  }
  s << "; " << report.summary;
  return s.str();
}

}  // namespace plaudit::testing
