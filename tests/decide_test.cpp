// The verdict rules of the checks issue, one case per row of the rule table in
// include/plaudit/audit/decide.h. The rules themselves are the project's specification;
// the inputs are synthetic check results.
#include <cmath>

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
  CheckResult curvature = Result("curvature", Status::kPass, 0.01, -1e-3);
  CheckResult degeneracy = Result("layer-degeneracy", Status::kSkip, std::nan(""), 0.95);
  CheckResult two_way = Result("two-way-diversity", Status::kSkip, std::nan(""), 2.0);
  double loss = 0.1, l0 = 1.0;
  int depth = 2;

  plaudit::audit::Decision Run() {
    DecisionInputs in;
    in.curvature = &curvature;
    in.layer_degeneracy = &degeneracy;
    in.two_way_diversity = &two_way;
    in.depth = depth;
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

TEST_CASE("explained residual at a saddle: moving, naming the layer the escape runs through", "[verdict]") {
  Case c;
  c.residual = Result("residual-fit", Status::kFail, 0.2, 1e-2, 0.005);
  c.curvature = Result("curvature", Status::kFail, -0.05, -1e-3);
  c.curvature.detail = {{"ratio", -0.05}, {"dominant_layer", 1}, {"dominant_part", "weights"},
                        {"escape", {{"actual_decrease_rel", 0.004}}}};
  auto d = c.Run();
  CHECK(d.verdict == Verdict::kMoving);
  CHECK(d.summary.find("saddle") != std::string::npos);
  CHECK(d.summary.find("layer 1's weights") != std::string::npos);
  CHECK(d.summary.find("0.004 x L0") != std::string::npos);
  SECTION("a saddle does not overrule an unexplained residual") {
    c.residual = Result("residual-fit", Status::kPass, 1e-3, 1e-2, 0.4);
    CHECK(c.Run().verdict == Verdict::kGlobal);
  }
  SECTION("a skipped curvature check is not needed for a verdict") {
    c.curvature = Result("curvature", Status::kSkip, std::nan(""), -1e-3);
    CHECK(c.Run().verdict == Verdict::kSpurious);
  }
}

TEST_CASE("exact copies of neurons: spurious, and the advice says copies never separate", "[verdict]") {
  Case c;
  c.residual = Result("residual-fit", Status::kFail, 0.7, 1e-2, 0.005);
  c.curvature.detail = {{"tied_neurons", 32}, {"restricted_to_ties", true}};
  const auto d = c.Run();
  CHECK(d.verdict == Verdict::kSpurious);
  CHECK(d.summary.find("32 hidden neurons are exact copies") != std::string::npos);
}

TEST_CASE("a degenerate middle layer of a deep network: named in the spurious advice, a warning when global",
          "[verdict]") {
  Case c;
  c.depth = 4;
  c.degeneracy = Result("layer-degeneracy", Status::kFail, 0.99, 0.95);
  c.degeneracy.detail = {{"worst_layer", 2}};
  c.residual = Result("residual-fit", Status::kFail, 0.2, 1e-2, 0.005);
  auto d = c.Run();
  CHECK(d.verdict == Verdict::kSpurious);
  CHECK(d.summary.find("layer 2's neurons compute nearly one function") != std::string::npos);
  CHECK(d.summary.find("--init latent") != std::string::npos);
  SECTION("global: the verdict stands, with a warning") {
    c.residual = Result("residual-fit", Status::kPass, 1e-3, 1e-2, 0.4);
    d = c.Run();
    CHECK(d.verdict == Verdict::kGlobal);
    CHECK(d.summary.find("Warning: layer 2's neurons") != std::string::npos);
  }
  SECTION("below depth 4 the rule does not apply") {
    c.depth = 3;
    d = c.Run();
    CHECK(d.verdict == Verdict::kSpurious);
    CHECK(d.summary.find("nearly one function") == std::string::npos);
  }
}

TEST_CASE("no hidden layer: a convex loss, so an explained residual is still global", "[verdict]") {
  // A linear model's squared loss is convex in its weights: every stationary point is its global
  // minimum (a fact of least squares), whatever fresh nonlinear features could add.
  Case c;
  c.depth = 1;
  c.residual = Result("residual-fit", Status::kFail, 0.3, 1e-2, 0.005);
  const auto d = c.Run();
  CHECK(d.verdict == Verdict::kGlobal);
  CHECK(d.summary.find("convex") != std::string::npos);
  CHECK(d.summary.find("add a hidden layer") != std::string::npos);
}
