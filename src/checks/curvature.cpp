#include "plaudit/checks/curvature.h"

#include <algorithm>
#include <chrono>
#include <cmath>
#include <limits>
#include <utility>

#include <fmt/format.h>

#include "plaudit/core/error.h"
#include "plaudit/model/neuron_ties.h"
#include "plaudit/stats/lanczos.h"

namespace plaudit::checks {
namespace {

using Clock = std::chrono::steady_clock;

double Seconds(Clock::time_point since) { return std::chrono::duration<double>(Clock::now() - since).count(); }

nlohmann::json Number(double v) { return std::isfinite(v) ? nlohmann::json(v) : nlohmann::json(nullptr); }

// 0-based trainable layers the options choose; kUsage for a layer beyond the network.
std::vector<int> ChosenLayers(const model::Network& net, const CurvatureOptions& options) {
  std::vector<int> one_based = options.layers;
  if (one_based.empty()) {
    for (int l = 1; l <= net.depth(); ++l) one_based.push_back(l);
  }
  std::vector<int> chosen;
  for (int l : one_based) {
    if (l < 1 || l > net.depth()) {
      raise(ExitCode::kUsage, "{}: layer {} out of range: the network has {} layers", kCurvatureName, l, net.depth());
    }
    if (net.layers[static_cast<std::size_t>(l - 1)].trainable) chosen.push_back(l - 1);
  }
  std::sort(chosen.begin(), chosen.end());
  chosen.erase(std::unique(chosen.begin(), chosen.end()), chosen.end());
  return chosen;
}

std::vector<int> OneBased(const std::vector<int>& layers0) {
  std::vector<int> out;
  for (int l : layers0) out.push_back(l + 1);
  return out;
}

struct Probe {
  int sign = 1;
  double t = 0.0;
  double loss = 0.0;
  double decrease = -std::numeric_limits<double>::infinity();  // L(theta) - L(theta + sign t v)
  double predicted = 0.0;                                      // -q(t)
};

// The shortest t > 0 with -(gs t + lambda t^2 / 2) = target, for lambda < 0 and target > 0;
// the two forms avoid cancellation for either sign of gs.
double FirstStep(double gs, double lambda, double target) {
  const double a = -lambda;
  const double root = std::sqrt(gs * gs + 2.0 * a * target);
  return gs <= 0.0 ? 2.0 * target / (root - gs) : (gs + root) / a;
}

struct EscapeSearch {
  std::vector<Probe> probes;
  Probe best;
  double gv = 0.0;  // g . v for the sign of `best`
};

EscapeSearch SearchEscape(model::LossHessian& h, const Eigen::VectorXd& v, double lambda, double target, int steps) {
  EscapeSearch out;
  const double gv = h.gradient().dot(v);
  const double l0 = h.loss();
  // Downhill sign first; both are tried because at an exact saddle (g.v = 0) third-order terms
  // decide which side falls.
  const int first = gv <= 0.0 ? 1 : -1;
  for (int sign : {first, -first}) {
    const double gs = sign * gv;
    const double t0 = FirstStep(gs, lambda, target);
    double previous = std::numeric_limits<double>::infinity();
    for (int k = 0; k < steps; ++k) {
      Probe p;
      p.sign = sign;
      p.t = std::ldexp(t0, k);
      p.loss = h.LossAt(v, sign * p.t);
      p.decrease = l0 - p.loss;
      p.predicted = -(gs * p.t + 0.5 * lambda * p.t * p.t);
      out.probes.push_back(p);
      if (std::isfinite(p.decrease) && p.decrease > out.best.decrease) {
        out.best = p;
        out.gv = gs;
      }
      if (!std::isfinite(p.loss) || p.loss > previous) break;
      previous = p.loss;
    }
  }
  return out;
}

struct LayerMass {
  int layer = 0;  // 0-based
  double weight = 0.0, bias = 0.0;
};

std::vector<LayerMass> MassByLayer(const model::ParameterLayout& layout, const Eigen::VectorXd& v) {
  std::vector<LayerMass> out;
  for (const auto& b : layout.blocks) {
    LayerMass m;
    m.layer = b.layer;
    m.weight = v.segment(b.weight_offset, b.rows * b.cols).squaredNorm();
    if (b.bias_offset >= 0) m.bias = v.segment(b.bias_offset, b.rows).squaredNorm();
    out.push_back(m);
  }
  return out;
}

nlohmann::json TiedGroups(const std::vector<model::NeuronTies>& ties) {
  nlohmann::json out = nlohmann::json::array();
  for (const auto& t : ties) {
    for (const auto& g : t.groups) out.push_back({{"layer", t.layer + 1}, {"size", g.size()}});
  }
  return out;
}

// How the message says the search was restricted, or nothing.
std::string TiesNote(const std::vector<model::NeuronTies>& ties) {
  if (ties.empty()) return {};
  std::size_t groups = 0;
  for (const auto& t : ties) groups += t.groups.size();
  return fmt::format(", along the directions gradient descent can take ({} hidden neurons are exact copies in {} "
                     "group(s) and stay so)",
                     model::TiedNeuronCount(ties), groups);
}

}  // namespace

bool CurvatureOptions::IsValid(std::string* why) const {
  auto fail = [why](const char* text) {
    if (why != nullptr) *why = text;
    return false;
  };
  for (int l : layers) {
    if (l < 1) return fail("layers are 1-based and must be >= 1");
  }
  if (max_iterations < 2) return fail("max_iterations must be at least 2");
  if (!(tolerance > 0.0 && tolerance < 1.0)) return fail("tolerance must be in (0, 1)");
  if (!(max_seconds >= 0.0) || !std::isfinite(max_seconds)) return fail("max_seconds must be >= 0 and finite");
  if (max_parameters < 1) return fail("max_parameters must be at least 1");
  if (!(threshold >= 0.0) || !std::isfinite(threshold)) return fail("threshold must be >= 0 and finite");
  if (!(min_decrease_rel > 0.0) || !std::isfinite(min_decrease_rel)) {
    return fail("min_decrease_rel must be positive and finite");
  }
  if (line_search_steps < 1) return fail("line_search_steps must be at least 1");
  if (block_rows < 1) return fail("block_rows must be at least 1");
  if (!(tie_tolerance >= 0.0) || !std::isfinite(tie_tolerance)) return fail("tie_tolerance must be >= 0 and finite");
  return true;
}

CheckResult RunCurvature(const model::Network& last, const model::Dataset& data, double baseline_loss,
                         const CurvatureOptions& options) {
  const auto started = Clock::now();
  std::string why;
  if (!options.IsValid(&why)) raise(ExitCode::kUsage, "{}: {}", kCurvatureName, why);
  if (!std::isfinite(baseline_loss) || baseline_loss < 0.0) {
    raise(ExitCode::kBadData, "{}: baseline loss {} must be finite and >= 0", kCurvatureName, baseline_loss);
  }
  if (data.dim() != last.input_dim()) {
    raise(ExitCode::kBadData, "{}: the data have {} columns but the first layer takes {} inputs", kCurvatureName,
          data.dim(), last.input_dim());
  }
  const double threshold = -options.threshold;
  const std::vector<int> layers0 = ChosenLayers(last, options);
  auto skip = [&](std::string reason) {
    CheckResult r = Skipped(kCurvatureName, threshold, std::move(reason));
    r.detail["layers"] = OneBased(layers0);
    return r;
  };
  if (layers0.empty()) return skip("every chosen layer was held fixed during training");
  const model::ParameterLayout layout = model::MakeParameterLayout(last, layers0);
  if (layout.size > options.max_parameters) {
    CheckResult r = skip(fmt::format("{} parameters in the chosen layers, more than max_parameters = {}; choose "
                                     "fewer layers or raise the limit",
                                     layout.size, options.max_parameters));
    r.detail["parameters"] = layout.size;
    return r;
  }
  if (data.rows() < 1) return skip("the audit data have no rows");
  if (baseline_loss == 0.0) return skip("the baseline loss L0 is 0, so no decrease can be read against it");

  model::HessianOptions ho;
  ho.method = options.method;
  ho.block_rows = options.block_rows;
  model::LossHessian hessian(last, data, layers0, ho);
  if (!std::isfinite(hessian.loss()) || !hessian.gradient().allFinite()) {
    return skip("the loss or its gradient is not finite at the last snapshot");
  }

  const std::vector<model::NeuronTies> ties =
      options.respect_ties ? model::FindNeuronTies(last, options.tie_tolerance) : std::vector<model::NeuronTies>{};
  const bool restricted = !ties.empty();
  Eigen::VectorXd projected;

  stats::LanczosOptions lo;
  lo.max_iterations = options.max_iterations;
  lo.tolerance = options.tolerance;
  lo.max_seconds = options.max_seconds;
  lo.seed = options.seed;
  bool finite_products = true;
  const stats::LanczosResult eig = stats::LanczosExtremes(
      [&](const Eigen::VectorXd& in, Eigen::VectorXd& out) {
        if (restricted) {  // P H P: only directions that keep tied neurons tied
          projected = in;
          model::ProjectOntoTies(layout, ties, projected);
          hessian.Apply(projected, out);
          model::ProjectOntoTies(layout, ties, out);
        } else {
          hessian.Apply(in, out);
        }
        if (!out.allFinite()) {
          finite_products = false;
          out.setZero();  // ends the iteration as an invariant subspace; the result is skipped below
        }
      },
      layout.size, lo);
  if (!finite_products) return skip("a Hessian-vector product is not finite at the last snapshot");

  const double lmin = eig.min, lmax = eig.max;
  const double ratio = lmax > 0.0 ? lmin / lmax : std::numeric_limits<double>::quiet_NaN();
  const bool negative = lmin < -options.threshold * lmax;
  const double target = options.min_decrease_rel * baseline_loss;
  Eigen::VectorXd v = eig.min_vector;
  if (restricted) {
    // The start vector's part outside the tie-keeping directions can linger in a Ritz vector; it
    // adds nothing to v.Hv under P H P, so dropping it keeps lambda_min an upper bound along v.
    model::ProjectOntoTies(layout, ties, v);
    if (v.norm() > 0.0) v.normalize();
  }

  EscapeSearch escape;
  const bool searched = lmin < 0.0;
  if (searched) escape = SearchEscape(hessian, v, lmin, target, options.line_search_steps);
  const double achieved = searched ? escape.best.decrease : std::numeric_limits<double>::quiet_NaN();
  const bool escapes = searched && achieved >= target;
  const bool saddle = negative && escapes;

  const std::vector<LayerMass> mass = MassByLayer(layout, v);
  const auto top = std::max_element(mass.begin(), mass.end(), [](const LayerMass& a, const LayerMass& b) {
    return a.weight + a.bias < b.weight + b.bias;
  });
  const int dominant1 = top->layer + 1;
  const char* dominant_part = top->bias > top->weight ? "biases" : "weights";

  CheckResult r;
  r.name = kCurvatureName;
  r.status = saddle ? Status::kFail : Status::kPass;
  r.statistic = ratio;
  r.threshold = threshold;
  nlohmann::json masses = nlohmann::json::array();
  for (const auto& m : mass) masses.push_back({{"layer", m.layer + 1}, {"weight", m.weight}, {"bias", m.bias}});
  nlohmann::json probes = nlohmann::json::array();
  for (const auto& p : escape.probes) {
    probes.push_back({{"sign", p.sign}, {"step", p.t}, {"loss", Number(p.loss)}, {"decrease", Number(p.decrease)},
                      {"predicted", p.predicted}});
  }
  const double theta_norm = hessian.parameters().norm();
  r.detail = {{"layers", OneBased(layers0)},
              {"parameters", layout.size},
              {"method", model::HessianMethodToString(options.method)},
              {"lambda_min", lmin},
              {"lambda_max", lmax},
              {"ratio", Number(ratio)},
              {"threshold", options.threshold},
              {"negative_curvature", negative},
              {"lambda_min_residual", eig.min_residual},
              {"lambda_max_residual", eig.max_residual},
              {"ritz_values", eig.ritz_values},
              {"converged", eig.converged},
              {"invariant_subspace", eig.invariant_subspace},
              {"stopped_by_time", eig.stopped_by_time},
              {"iterations", eig.iterations},
              {"hessian_vector_products", hessian.products()},
              {"gradient_evaluations", hessian.gradient_evaluations()},
              {"loss_evaluations", hessian.loss_evaluations()},
              {"rows", data.rows()},
              {"loss", hessian.loss()},
              {"baseline_loss", baseline_loss},
              {"gradient_norm", hessian.gradient().norm()},
              {"parameter_norm", theta_norm},
              {"min_decrease_rel", options.min_decrease_rel},
              {"target_decrease", target},
              {"eigenvector_mass", masses},
              {"dominant_layer", dominant1},
              {"dominant_part", dominant_part},
              {"saddle", saddle},
              {"restricted_to_ties", restricted},
              {"tied_neurons", model::TiedNeuronCount(ties)},
              {"tied_groups", TiedGroups(ties)}};
  if (searched) {
    const Probe& b = escape.best;
    const bool any = std::isfinite(b.decrease);
    r.detail["escape"] = {{"sign", b.sign},
                          {"step", any ? Number(b.t) : nlohmann::json(nullptr)},
                          {"step_rel", any && theta_norm > 0.0 ? Number(b.t / theta_norm) : nlohmann::json(nullptr)},
                          {"gradient_along", escape.gv},
                          {"predicted_decrease", any ? Number(b.predicted) : nlohmann::json(nullptr)},
                          {"predicted_gradient_part", any ? Number(-escape.gv * b.t) : nlohmann::json(nullptr)},
                          {"predicted_curvature_part", any ? Number(-0.5 * lmin * b.t * b.t) : nlohmann::json(nullptr)},
                          {"actual_decrease", Number(achieved)},
                          {"actual_decrease_rel", Number(achieved / baseline_loss)},
                          {"probes", probes}};
  } else {
    r.detail["escape"] = nullptr;
  }
  if (options.record_seconds) {
    r.detail["lanczos_seconds"] = eig.seconds;
    r.detail["seconds"] = Seconds(started);
  }

  const std::string cost = fmt::format("{} Hessian-vector products", eig.iterations);
  if (saddle) {
    r.message = fmt::format(
        "saddle: lambda_min / lambda_max = {:.3g}; a step along its direction lowers the loss by {:.3g} ({:.3g} x L0), "
        "mostly through layer {}'s {}",
        ratio, achieved, achieved / baseline_loss, dominant1, dominant_part);
    if (!std::isfinite(ratio)) {
      r.message = fmt::format("saddle: lambda_min = {:.3g} with no positive curvature found; a step along it lowers the "
                              "loss by {:.3g} ({:.3g} x L0), mostly through layer {}'s {}",
                              lmin, achieved, achieved / baseline_loss, dominant1, dominant_part);
    }
  } else if (negative) {
    r.message = fmt::format(
        "negative curvature (lambda_min / lambda_max = {:.3g}) but a step along it lowers the loss by at most {:.3g} x "
        "L0 (< {:.3g}): no escape direction found",
        ratio, achieved / baseline_loss, options.min_decrease_rel);
  } else if (!std::isfinite(ratio)) {
    r.message = fmt::format("no curvature found: lambda_min = {:.3g}, lambda_max = {:.3g}", lmin, lmax);
  } else {
    r.message = fmt::format("no negative curvature that matters: lambda_min / lambda_max = {:.3g} (>= {:.3g})", ratio,
                            threshold);
    if (!eig.converged) r.message += fmt::format(", not converged after {}", cost);
  }
  r.message += TiesNote(ties);
  return r;
}

}  // namespace plaudit::checks
