// The verdict rules of the checks issue, one case per row of the rule table in
// include/plaudit/audit/decide.h. The rules themselves are the project's specification;
// the inputs are synthetic check results.
#include <catch2/catch.hpp>

#include "plaudit/audit/decide.h"

using plaudit::audit::Decide;
using plaudit::audit::DecisionInputs;
using plaudit::audit::Verdict;
using plaudit::checks::CheckResult;
using plaudit::checks::Status;

namespace {

CheckResult Result(const char* name, Status s, double stat, double thr, std::optional<double> p = std::nullopt) {
  CheckResult r;
  r.name = name;
  r.status = s;
  r.statistic = stat;
  r.threshold = thr;
  r.p_value = p;
  r.message = "synthetic";
  return r;
}

struct Case {
  CheckResult grad = Result("gradient-decay", Status::kPass, 1e-3, 1e-2);
  CheckResult plateau = Result("loss-plateau", Status::kPass, 1e-4, 1e-2);
  CheckResult residual = Result("residual-fit", Status::kPass, 1e-3, 1e-2, 0.4);
  CheckResult spread = Result("support-spread", Status::kPass, 1.1, 2.0);
  double loss = 0.1, l0 = 1.0;

  plaudit::audit::Decision Run() {
    DecisionInputs in;
    in.last_loss = loss;
    in.baseline_loss = l0;
    in.gradient_decay = &grad;
    in.loss_plateau = &plateau;
    in.residual_fit = &residual;
    in.support_spread = &spread;
    return Decide(in);
  }
};

}  // namespace

TEST_CASE("plateau, decayed gradient, unexplained residual: global", "[verdict]") {
  Case c;
  const auto d = c.Run();
  CHECK(d.verdict == Verdict::kGlobal);
  CHECK(d.summary.find("stop training") != std::string::npos);
}

TEST_CASE("plateau, decayed gradient, explained residual: spurious", "[verdict]") {
  Case c;
  c.residual = Result("residual-fit", Status::kFail, 0.2, 1e-2, 0.005);
  auto d = c.Run();
  CHECK(d.verdict == Verdict::kSpurious);
  CHECK(d.summary.find("20%") != std::string::npos);
  SECTION("support lost: the advice names the first layer's spread") {
    c.spread = Result("support-spread", Status::kFail, 3.5, 2.0);
    d = c.Run();
    CHECK(d.verdict == Verdict::kSpurious);
    CHECK(d.summary.find("re-initialise with full-support directions") != std::string::npos);
  }
}

TEST_CASE("loss still falling: moving, whatever the residual says", "[verdict]") {
  Case c;
  c.plateau = Result("loss-plateau", Status::kFail, 0.3, 1e-2);
  c.residual = Result("residual-fit", Status::kFail, 0.2, 1e-2, 0.005);
  CHECK(c.Run().verdict == Verdict::kMoving);
}

TEST_CASE("gradient not decayed: moving", "[verdict]") {
  Case c;
  c.grad = Result("gradient-decay", Status::kFail, 0.5, 1e-2);
  const auto d = c.Run();
  CHECK(d.verdict == Verdict::kMoving);
  CHECK(d.summary.find("0.5 of its peak") != std::string::npos);
}

TEST_CASE("a needed check skipped: inconclusive, naming it", "[verdict]") {
  Case c;
  c.residual = plaudit::checks::Skipped("residual-fit", 1e-2, "too few rows for the permutation test");
  const auto d = c.Run();
  CHECK(d.verdict == Verdict::kInconclusive);
  CHECK(d.summary.find("residual-fit") != std::string::npos);
  CHECK(d.summary.find("too few rows") != std::string::npos);
}

TEST_CASE("loss at most 1e-6 x L0: global even before a plateau", "[verdict]") {
  Case c;
  c.loss = 5e-7;
  c.plateau = Result("loss-plateau", Status::kFail, 0.5, 1e-2);
  CHECK(c.Run().verdict == Verdict::kGlobal);
}

TEST_CASE("non-finite values: diverged beats everything", "[verdict]") {
  Case c;
  DecisionInputs in;
  in.diverged = true;
  in.diverged_where = "parameters at step 40";
  in.gradient_decay = &c.grad;
  const auto d = Decide(in);
  CHECK(d.verdict == Verdict::kDiverged);
  CHECK(d.summary.find("step 40") != std::string::npos);
}

TEST_CASE("verdicts map to the contract's exit codes", "[verdict]") {
  using plaudit::audit::VerdictExitCode;
  CHECK(static_cast<int>(VerdictExitCode(Verdict::kGlobal)) == 0);
  CHECK(static_cast<int>(VerdictExitCode(Verdict::kSpurious)) == 1);
  CHECK(static_cast<int>(VerdictExitCode(Verdict::kMoving)) == 2);
  CHECK(static_cast<int>(VerdictExitCode(Verdict::kInconclusive)) == 2);
  CHECK(static_cast<int>(VerdictExitCode(Verdict::kDiverged)) == 3);
}

TEST_CASE("gradient settled at a noise floor (warn): judged as stationary at that level", "[verdict]") {
  Case c;
  c.grad = Result("gradient-decay", Status::kWarn, 0.03, 1e-2);
  auto d = c.Run();
  CHECK(d.verdict == Verdict::kGlobal);
  CHECK(d.summary.find("noise floor") != std::string::npos);
  c.residual = Result("residual-fit", Status::kFail, 0.2, 1e-2, 0.005);
  d = c.Run();
  CHECK(d.verdict == Verdict::kSpurious);
  CHECK(d.summary.find("noise floor") != std::string::npos);
}

TEST_CASE("residual explained but negligible: global, and the summary says why", "[verdict]") {
  Case c;
  c.residual = Result("residual-fit", Status::kPass, 0.2, 1e-2, 0.005);
  c.residual.detail = {{"significant", true}, {"removable_below_floor", true}, {"removable", 2e-6}};
  c.loss = 1e-5;
  const auto d = c.Run();
  CHECK(d.verdict == Verdict::kGlobal);
  CHECK(d.summary.find("below the floor") != std::string::npos);
  CHECK(d.summary.find("chance") == std::string::npos);
}
