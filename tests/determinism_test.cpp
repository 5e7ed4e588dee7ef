// Reports drive pipelines, so one seed must give one report: `plaudit audit RUN --format json
// --seed S` prints the same bytes on every invocation and whatever --threads is
// (audit/audit.h: "the report does not depend on it"). Run as separate processes, as a
// pipeline would, on a trained run with several snapshots and a seeded row subsample.
#include <filesystem>
#include <string>

#include <catch2/catch.hpp>
#include <nlohmann/json.hpp>

#include "plaudit/train/teacher.h"
#include "plaudit/train/trainer.h"
#include "support/cli_process.h"
#include "support/scenario.h"
#include "support/temp_dir.h"

namespace {

using plaudit::testing::CliResult;
using plaudit::testing::RunCli;

CliResult AuditJson(const std::filesystem::path& run, const std::string& seed, const std::string& threads) {
  // 300 rows, 200 audited: the subsample, the probes, the fresh features and the permutations
  // all come from the seed.
  return RunCli({"audit", run.string(), "--format", "json", "--seed", seed, "--threads", threads, "--max-rows", "200"});
}

}  // namespace

TEST_CASE("audit --format json is byte-identical across invocations and thread counts", "[determinism][cli]") {
  plaudit::train::TrainOptions o;
  o.widths = {10};
  o.activation = plaudit::model::Activation::kTanh;
  o.steps = 60;
  o.save_every = 10;  // 7 snapshots: more than the threads, so the workers interleave
  o.seed = 4;
  plaudit::testing::TempDir dir("determinism");
  const auto run = dir / "run";
  plaudit::train::Train(plaudit::testing::TeacherRows(plaudit::train::TeacherKind::kReluSum, 4, 3, 300, 21), o, run);

  const CliResult first = AuditJson(run, "7", "1");
  INFO("stderr: " << first.err);
  REQUIRE(first.err.empty());
  REQUIRE(first.status >= 0);
  REQUIRE(first.status <= 3);
  const auto report = nlohmann::json::parse(first.out);
  CHECK(report["seed"] == 7);
  CHECK(report["rows"]["used"] == 200);
  CHECK(report["rows"]["total"] == 300);
  CHECK(report["trajectory"]["points"].size() == 7);

  for (const char* threads : {"1", "2", "2"}) {
    INFO("--threads " << threads);
    const CliResult again = AuditJson(run, "7", threads);
    CHECK(again.status == first.status);
    CHECK(again.err.empty());
    CHECK(again.out == first.out);
  }

  // The seed is really in use: another one audits another 200 of the 300 rows, so the
  // constant-predictor baseline moves (an identical float would take a coincidence).
  const CliResult other = AuditJson(run, "8", "2");
  REQUIRE(other.err.empty());
  const auto other_report = nlohmann::json::parse(other.out);
  CHECK(other_report["baseline_loss"] != report["baseline_loss"]);
  // ...and it is itself reproducible.
  CHECK(AuditJson(run, "8", "1").out == other.out);
}
