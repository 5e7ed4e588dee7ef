// The export recipes of scripts/: a NumPy-only training loop and a PyTorch one each write a
// run directory of the contract (../shared/run-format.md); plaudit must read it, audit it, and
// recompute the losses the script logged. The scripts run under /usr/bin/python3; when it or
// a module is missing the case says so (WARN) and passes without checking.
#include <cmath>
#include <filesystem>
#include <fstream>
#include <map>
#include <set>
#include <string>

#include <catch2/catch.hpp>
#include <nlohmann/json.hpp>

#include "plaudit/audit/audit.h"
#include "plaudit/io/npz.h"
#include "plaudit/io/run_dir.h"
#include "plaudit/model/dataset.h"
#include "plaudit/model/evaluate.h"
#include "plaudit/model/network.h"
#include "support/run_process.h"
#include "support/temp_dir.h"

namespace {

namespace fs = std::filesystem;
using plaudit::testing::RunProcess;
using plaudit::testing::TempDir;

constexpr const char* kPython = "/usr/bin/python3";

// Empty when every module imports; otherwise what is missing.
std::string MissingPython(const std::string& modules) {
  const auto r = RunProcess({kPython, "-c", "import " + modules});
  return r.exit_code == 0 ? std::string() : kPython + std::string(" cannot import ") + modules + ": " + r.err;
}

struct RecipeRun {
  plaudit::audit::AuditReport report;
  std::map<std::int64_t, double> logged;      // scalars.jsonl
  std::map<std::int64_t, double> recomputed;  // model::Evaluate at each snapshot, every row
  plaudit::io::DType data_dtype = plaudit::io::DType::kF8;
};

RecipeRun RunRecipe(const std::string& script, const fs::path& out) {
  const auto r = RunProcess({kPython, std::string(PLAUDIT_SOURCE_DIR) + "/scripts/" + script, out.string()});
  INFO(r.command << "\n" << r.out << r.err);
  REQUIRE(r.exit_code == 0);

  for (const auto& entry : fs::directory_iterator(out / "snapshots")) {
    INFO(entry.path());
    CHECK(entry.path().extension() == ".npz");  // every .tmp was renamed into place
  }
  const plaudit::io::RunDir run(out);
  RecipeRun rr;
  for (const auto& rec : run.Scalars().records) rr.logged[rec.step] = rec.loss;
  const auto net0 = plaudit::model::NetworkFromArrays(run.manifest(), run.ReadSnapshot(run.Snapshots().front()), "first");
  const auto data = plaudit::model::ReadDataset(run.data_path(), run.manifest().loss, net0.output_dim());
  for (const auto& ref : run.Snapshots()) {
    const auto net = plaudit::model::NetworkFromArrays(run.manifest(), run.ReadSnapshot(ref), ref.path.string());
    plaudit::model::EvalOptions eval;
    eval.lowest_grad_layer = -1;
    rr.recomputed[ref.step] = plaudit::model::Evaluate(net, data, eval).loss;
  }
  rr.data_dtype = plaudit::io::ReadNpz(run.data_path()).at("x").dtype;
  rr.report = plaudit::audit::RunAudit(run, plaudit::audit::AuditOptions{});
  return rr;
}

bool ContractVerdict(plaudit::audit::Verdict v) {
  static const std::set<std::string> kVerdicts = {"global", "spurious", "moving", "inconclusive", "diverged"};
  return kVerdicts.count(plaudit::audit::VerdictToString(v)) == 1;
}

void CheckLosses(const RecipeRun& rr, double rel_tol) {
  REQUIRE(rr.logged.size() == rr.recomputed.size());
  for (const auto& [step, loss] : rr.recomputed) {
    INFO("step " << step << ": recomputed " << loss);
    REQUIRE(rr.logged.count(step) == 1);
    const double logged = rr.logged.at(step);
    INFO("logged " << logged);
    CHECK(std::abs(loss - logged) <= rel_tol * std::abs(logged));
  }
}

}  // namespace

TEST_CASE("the NumPy export recipe writes a run that plaudit audits and recomputes", "[export]") {
  if (const std::string missing = MissingPython("numpy"); !missing.empty()) {
    WARN("skipped: " << missing);
    return;
  }
  TempDir dir("export-numpy");
  const RecipeRun rr = RunRecipe("export_numpy_example.py", dir / "run");
  // 600 steps, a snapshot every 50.
  CHECK(rr.recomputed.size() == 13);
  CHECK(rr.report.step == 600);
  CHECK(rr.data_dtype == plaudit::io::DType::kF8);
  // Both sides compute the mean-field forward pass in float64 with different summation orders:
  // they agree to a few ulps per operation, far inside 1e-9.
  CheckLosses(rr, 1e-9);
  CHECK(ContractVerdict(rr.report.verdict));
  CHECK(rr.report.checks.size() == plaudit::audit::CheckNames().size());
  CHECK(rr.report.loss_series.source == "scalars");
}

TEST_CASE("the PyTorch export recipe writes a run that plaudit audits and recomputes", "[export]") {
  if (const std::string missing = MissingPython("numpy, torch"); !missing.empty()) {
    WARN("skipped: " << missing);
    return;
  }
  TempDir dir("export-torch");
  const RecipeRun rr = RunRecipe("export_torch_example.py", dir / "run");
  // 400 steps, a snapshot every 40.
  CHECK(rr.recomputed.size() == 11);
  CHECK(rr.report.step == 400);
  // torch trains and logs in float32 (the dtype of the saved arrays); plaudit recomputes in
  // float64 from those same float32 values, so the logged loss carries float32 rounding: unit
  // roundoff 2^-24 = 6e-8 per operation, amplified where the residual out - y is small next to
  // the output (NumPy's float64 recomputation of this run differs from the log by up to 1.3e-7
  // relative). 1e-5 leaves two orders of magnitude for other BLAS orders, while a wrong
  // multiplier or loss convention (MSELoss is twice the contract's squared loss) is off by O(1).
  CHECK(rr.data_dtype == plaudit::io::DType::kF4);
  CheckLosses(rr, 1e-5);
  CHECK(ContractVerdict(rr.report.verdict));
  CHECK(rr.report.checks.size() == plaudit::audit::CheckNames().size());
}
