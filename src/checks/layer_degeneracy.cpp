// GCC 12 reports a false -Wmaybe-uninitialized inside Eigen's symmetric eigensolver kernels
// (as in stats/pca.cpp); the state must be set before Eigen/Core is first read.
#pragma GCC diagnostic push
#pragma GCC diagnostic ignored "-Wmaybe-uninitialized"
#include "plaudit/checks/layer_degeneracy.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <optional>
#include <stdexcept>
#include <utility>
#include <vector>

#include <Eigen/Eigenvalues>
#include <fmt/format.h>

#include "plaudit/core/error.h"
#include "plaudit/model/evaluate.h"

namespace plaudit::checks {
namespace {

using Eigen::Index;
using Eigen::MatrixXd;

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
// A neuron whose spread is below this share of its largest |activation| is constant up to
// round-off (a dead ReLU, a saturated unit).
constexpr double kConstantNeuron = 1e-12;

bool FiniteLayer(const model::DenseLayer& layer) {
  return layer.weight.allFinite() && std::isfinite(layer.multiplier) &&
         (!layer.has_bias || layer.bias.allFinite());
}

bool FiniteNetwork(const model::Network& net) {
  return std::all_of(net.layers.begin(), net.layers.end(), FiniteLayer);
}

// One single-layer network per layer, so a block's activations can be carried up layer by
// layer through the library's own forward pass.
std::vector<model::Network> SingleLayers(const model::Network& net) {
  std::vector<model::Network> out;
  for (const auto& layer : net.layers) {
    model::Network one;
    one.loss = net.loss;
    one.layers.push_back(layer);
    out.push_back(std::move(one));
  }
  return out;
}

// Moments of hidden layers 1..L-2 (0-based) over the rows, a block at a time. Returns nullopt
// when an activation is not finite.
std::optional<std::vector<ColumnMoments>> LayerMoments(const model::Network& net,
                                                       const Eigen::MatrixXd& x,
                                                       Index block_rows) {
  const int depth = net.depth();
  const std::vector<model::Network> single = SingleLayers(net);
  std::vector<ColumnMoments> moments(static_cast<std::size_t>(depth));
  for (Index start = 0; start < x.rows(); start += block_rows) {
    const Index rows = std::min(block_rows, x.rows() - start);
    MatrixXd a = x.middleRows(start, rows);
    for (int l = 0; l + 1 < depth; ++l) {
      a = model::Predict(single[static_cast<std::size_t>(l)], a, block_rows);
      if (!a.allFinite()) return std::nullopt;
      if (l >= 1) moments[static_cast<std::size_t>(l)].Add(a);
    }
  }
  return moments;
}

nlohmann::json Number(double v) { return std::isfinite(v) ? nlohmann::json(v) : nlohmann::json(nullptr); }

void CheckShapes(const model::Network& last, const model::Network* first,
                 const model::Dataset& data) {
  if (data.dim() != last.input_dim()) {
    raise(ExitCode::kBadData, "{}: the data have {} input columns but the first layer takes {}",
          kLayerDegeneracyName, data.dim(), last.input_dim());
  }
  if (first == nullptr) return;
  if (!model::SameLayerShapes(*first, last)) {
    raise(ExitCode::kBadData, "{}: the first network does not have the last network's layer shapes",
          kLayerDegeneracyName);
  }
}

std::optional<std::string> SkipReason(const model::Network& last, const model::Dataset& data) {
  if (last.depth() < 3) {
    return fmt::format("the network has {} layer(s); a hidden layer after the first needs at least 3",
                       last.depth());
  }
  if (data.rows() < 2) {
    return fmt::format("the data have {} row(s); correlations need at least 2", data.rows());
  }
  if (!FiniteNetwork(last)) return std::string("the network has non-finite parameters");
  return std::nullopt;
}

struct LayerReport {
  int layer1 = 0;  // 1-based
  NeuronSpread spread;
  std::optional<NeuronSpread> init;
  std::optional<ChangeShares> shares;
  double change_ratio = kNaN;
};

nlohmann::json LayerJson(const LayerReport& r) {
  const NeuronSpread& s = r.spread;
  nlohmann::json j = {{"layer", r.layer1},
                      {"width", s.width},
                      {"varying", s.varying},
                      {"constant", s.width - s.varying},
                      {"mean_abs_corr", Number(s.mean_abs_corr)},
                      {"mean_corr", Number(s.mean_corr)},
                      {"effective_rank", Number(s.effective_rank)},
                      {"effective_rank_fraction",
                       Number(s.effective_rank / static_cast<double>(std::max<Index>(1, s.width)))},
                      {"top_share", Number(s.top_share)}};
  if (r.init) {
    j["mean_abs_corr_init"] = Number(r.init->mean_abs_corr);
    j["effective_rank_init"] = Number(r.init->effective_rank);
  }
  if (r.shares) {
    j["translation_share"] = Number(r.shares->translation);
    j["common_row_share"] = Number(r.shares->common_row);
    j["common_column_share"] = Number(r.shares->common_column);
    j["change_ratio"] = Number(r.change_ratio);
  }
  return j;
}

std::string Message(const LayerReport& worst, bool failed, double threshold) {
  const NeuronSpread& s = worst.spread;
  if (!failed) {
    return fmt::format(
        "every hidden layer after the first keeps distinct neurons: the most correlated, layer {}, "
        "has mean |corr| {:.3f} (< {:.3g}) and effective rank {:.1f} of {}",
        worst.layer1, s.mean_abs_corr, threshold, s.effective_rank, s.width);
  }
  std::string text = fmt::format(
      "hidden layer {} is degenerate: its {} neurons have mean |corr| {:.3f} (>= {:.3g}) and "
      "effective rank {:.1f}, so they compute nearly one function",
      worst.layer1, s.width, s.mean_abs_corr, threshold, s.effective_rank);
  if (worst.shares && std::isfinite(worst.shares->translation) && worst.shares->translation >= 0.5) {
    text += fmt::format("; {:.0f}% of its incoming weights' change is one common translation",
                        100.0 * worst.shares->translation);
  }
  return text;
}

}  // namespace

void ColumnMoments::Add(const Eigen::MatrixXd& block) {
  const Index n = block.rows();
  if (n == 0) return;
  const Eigen::RowVectorXd m = block.colwise().mean();
  const MatrixXd centred = block.rowwise() - m;
  MatrixXd scatter = MatrixXd::Zero(block.cols(), block.cols());
  scatter.selfadjointView<Eigen::Lower>().rankUpdate(centred.transpose());
  scatter = scatter.selfadjointView<Eigen::Lower>();
  const Eigen::RowVectorXd block_max = block.cwiseAbs().colwise().maxCoeff();
  if (rows_ == 0) {
    rows_ = n;
    mean_ = m;
    max_abs_ = block_max;
    scatter_ = std::move(scatter);
    return;
  }
  if (block.cols() != mean_.size()) {
    throw std::invalid_argument("ColumnMoments: blocks have different numbers of columns");
  }
  const double na = static_cast<double>(rows_);
  const double nb = static_cast<double>(n);
  const Eigen::RowVectorXd delta = m - mean_;
  scatter_ += scatter;
  scatter_.noalias() += (na * nb / (na + nb)) * (delta.transpose() * delta);
  mean_ += (nb / (na + nb)) * delta;
  max_abs_ = max_abs_.cwiseMax(block_max);
  rows_ += n;
}

Eigen::MatrixXd ColumnMoments::Covariance() const {
  if (rows_ == 0) return {};
  return scatter_ / static_cast<double>(rows_);
}

NeuronSpread SummariseMoments(const ColumnMoments& moments) {
  NeuronSpread s;
  const MatrixXd cov = moments.Covariance();
  s.width = cov.rows();
  std::vector<Index> varying;
  for (Index j = 0; j < s.width; ++j) {
    const double sd = std::sqrt(std::max(cov(j, j), 0.0));
    if (sd > kConstantNeuron * moments.max_abs()(j)) varying.push_back(j);
  }
  s.varying = static_cast<Index>(varying.size());
  if (s.varying >= 2) {
    const Eigen::VectorXd inv_sd = cov.diagonal()(varying).cwiseSqrt().cwiseInverse();
    const MatrixXd corr = inv_sd.asDiagonal() * cov(varying, varying) * inv_sd.asDiagonal();
    const double pairs = static_cast<double>(s.varying) * static_cast<double>(s.varying - 1);
    s.mean_abs_corr = (corr.cwiseAbs().sum() - corr.diagonal().cwiseAbs().sum()) / pairs;
    s.mean_corr = (corr.sum() - corr.diagonal().sum()) / pairs;
  } else {
    s.mean_abs_corr = s.mean_corr = kNaN;
  }
  if (s.varying == 0) {
    s.effective_rank = s.top_share = kNaN;
    return s;
  }
  const Eigen::SelfAdjointEigenSolver<MatrixXd> solver(cov, Eigen::EigenvaluesOnly);
  if (solver.info() != Eigen::Success) {
    throw std::runtime_error("layer-degeneracy: symmetric eigensolver did not converge");
  }
  // Round-off leaves tiny negative eigenvalues of a semidefinite matrix; they carry no mass.
  const Eigen::VectorXd lambda = solver.eigenvalues().cwiseMax(0.0);
  const double trace = lambda.sum();
  if (!(trace > 0.0)) {
    s.effective_rank = s.top_share = kNaN;
    return s;
  }
  double entropy = 0.0;
  for (Index i = 0; i < lambda.size(); ++i) {
    const double p = lambda(i) / trace;
    if (p > 0.0) entropy -= p * std::log(p);
  }
  s.effective_rank = std::exp(entropy);
  s.top_share = lambda.maxCoeff() / trace;
  return s;
}

ChangeShares WeightChangeShares(const Eigen::MatrixXd& delta) {
  const double total = delta.squaredNorm();
  if (!(total > 0.0)) return {kNaN, kNaN, kNaN};
  const double rows = static_cast<double>(delta.rows());
  const double cols = static_cast<double>(delta.cols());
  const double c = delta.mean();
  ChangeShares s;
  s.translation = rows * cols * c * c / total;
  s.common_row = rows * delta.colwise().mean().squaredNorm() / total;
  s.common_column = cols * delta.rowwise().mean().squaredNorm() / total;
  return s;
}

bool LayerDegeneracyOptions::IsValid(std::string* why) const {
  auto bad = [&](std::string message) {
    if (why != nullptr) *why = fmt::format("{}: {}", kLayerDegeneracyName, message);
    return false;
  };
  if (!(threshold > 0.0 && threshold <= 1.0)) {
    return bad(fmt::format("threshold is {}, must be in (0, 1]", threshold));
  }
  if (max_rows < 2) return bad(fmt::format("max_rows is {}, must be >= 2", max_rows));
  if (block_rows < 1) return bad(fmt::format("block_rows is {}, must be >= 1", block_rows));
  return true;
}

CheckResult RunLayerDegeneracy(const model::Network& last, const model::Network* first,
                               const model::Dataset& data, const LayerDegeneracyOptions& options) {
  if (std::string why; !options.IsValid(&why)) raise(ExitCode::kUsage, "{}", why);
  if (last.layers.empty()) return Skipped(kLayerDegeneracyName, options.threshold, "the network has no layers");
  if (const auto reason = SkipReason(last, data)) {
    return Skipped(kLayerDegeneracyName, options.threshold, *reason);
  }
  CheckShapes(last, first, data);
  const model::Dataset rows = model::Subsample(data, options.max_rows, options.seed);
  const auto moments = LayerMoments(last, rows.x, options.block_rows);
  if (!moments) {
    return Skipped(kLayerDegeneracyName, options.threshold, "the network's activations are not finite");
  }
  std::optional<std::vector<ColumnMoments>> init_moments;
  if (first != nullptr && FiniteNetwork(*first)) {
    init_moments = LayerMoments(*first, rows.x, options.block_rows);
  }

  std::vector<LayerReport> reports;
  for (int l = 1; l + 1 < last.depth(); ++l) {
    LayerReport r;
    r.layer1 = l + 1;
    r.spread = SummariseMoments((*moments)[static_cast<std::size_t>(l)]);
    if (init_moments) r.init = SummariseMoments((*init_moments)[static_cast<std::size_t>(l)]);
    if (first != nullptr) {
      const MatrixXd& w0 = first->layers[static_cast<std::size_t>(l)].weight;
      const MatrixXd delta = last.layers[static_cast<std::size_t>(l)].weight - w0;
      r.shares = WeightChangeShares(delta);
      const double base = w0.norm();
      r.change_ratio = base > 0.0 ? delta.norm() / base : kNaN;
    }
    reports.push_back(std::move(r));
  }

  const LayerReport* worst = nullptr;
  for (const LayerReport& r : reports) {
    if (!std::isfinite(r.spread.mean_abs_corr)) continue;
    if (worst == nullptr || r.spread.mean_abs_corr > worst->spread.mean_abs_corr) worst = &r;
  }
  if (worst == nullptr) {
    return Skipped(kLayerDegeneracyName, options.threshold,
                   "no hidden layer after the first has two neurons that vary over the rows");
  }

  CheckResult result;
  result.name = kLayerDegeneracyName;
  result.threshold = options.threshold;
  result.statistic = worst->spread.mean_abs_corr;
  const bool failed = result.statistic >= options.threshold;
  result.status = failed ? Status::kFail : Status::kPass;
  result.message = Message(*worst, failed, options.threshold);
  nlohmann::json layers = nlohmann::json::array();
  std::vector<int> degenerate;
  for (const LayerReport& r : reports) {
    layers.push_back(LayerJson(r));
    if (std::isfinite(r.spread.mean_abs_corr) && r.spread.mean_abs_corr >= options.threshold) {
      degenerate.push_back(r.layer1);
    }
  }
  result.detail = {{"threshold", options.threshold},
                   {"rows", rows.rows()},
                   {"worst_layer", worst->layer1},
                   {"degenerate_layers", degenerate},
                   {"first_network", first != nullptr},
                   {"layers", std::move(layers)}};
  return result;
}

}  // namespace plaudit::checks

#pragma GCC diagnostic pop
