#include "plaudit/checks/loss_plateau.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <numeric>

#include <fmt/format.h>

#include "plaudit/core/error.h"
#include "plaudit/stats/mann_kendall.h"

namespace plaudit::checks {
namespace {

constexpr double kTiny = std::numeric_limits<double>::min();

struct SortedSeries {
  std::vector<std::int64_t> steps;
  std::vector<double> loss;
};

SortedSeries SortByStep(const LossSeries& series) {
  std::vector<std::size_t> order(series.steps.size());
  std::iota(order.begin(), order.end(), std::size_t{0});
  std::stable_sort(order.begin(), order.end(), [&](std::size_t a, std::size_t b) {
    return series.steps[a] < series.steps[b];
  });
  SortedSeries out;
  for (std::size_t i : order) {
    out.steps.push_back(series.steps[i]);
    out.loss.push_back(series.loss[i]);
  }
  return out;
}

double Median(std::vector<double> v) {
  const std::size_t mid = v.size() / 2;
  std::nth_element(v.begin(), v.begin() + static_cast<std::ptrdiff_t>(mid), v.end());
  const double upper = v[mid];
  if (v.size() % 2 == 1) return upper;
  const double lower = *std::max_element(v.begin(), v.begin() + static_cast<std::ptrdiff_t>(mid));
  return 0.5 * (lower + upper);
}

// Index of the first window point: steps in the last `fraction` of the range, at least
// `min_points` points.
std::size_t WindowStart(const std::vector<std::int64_t>& steps, double fraction, int min_points) {
  const double first = static_cast<double>(steps.front());
  const double last = static_cast<double>(steps.back());
  const double cut = last - fraction * (last - first);
  std::size_t start = steps.size();
  while (start > 0 && static_cast<double>(steps[start - 1]) >= cut) --start;
  const std::size_t floor_start = steps.size() - static_cast<std::size_t>(min_points);
  return std::min(start, floor_start);
}

// Earliest index from which every later point lies within `tol` of `level`; npos if the
// last point itself lies outside.
std::size_t PlateauStart(const std::vector<double>& loss, double level, double tol) {
  std::size_t i = loss.size();
  while (i > 0 && std::fabs(loss[i - 1] - level) <= tol) --i;
  return i == loss.size() ? std::string::npos : i;
}

std::string Verdict(bool plateau, bool rising, double delta_rel, double level, double l0,
                    std::int64_t from, std::int64_t to) {
  if (!plateau) {
    return fmt::format("the loss is still falling: {:.3g}% lower between steps {} and {}",
                       100.0 * delta_rel, from, to);
  }
  if (rising) {
    return fmt::format("the loss is not falling: it rose by {:.3g}% between steps {} and {}",
                       -100.0 * delta_rel, from, to);
  }
  return fmt::format("the loss has levelled off at {:.4g} ({:.3g} of the baseline) by step {}",
                     level, level / l0, to);
}

}  // namespace

bool LossPlateauOptions::IsValid(std::string* why) const {
  auto fail = [why](const char* text) {
    if (why != nullptr) *why = text;
    return false;
  };
  if (!(tail_fraction > 0.0 && tail_fraction <= 1.0)) return fail("tail_fraction must lie in (0, 1]");
  if (min_points < 5) return fail("min_points must be at least 5 (one point per fifth)");
  if (!(rel_threshold > 0.0) || !std::isfinite(rel_threshold)) {
    return fail("rel_threshold must be positive and finite");
  }
  if (!(abs_threshold >= 0.0) || !std::isfinite(abs_threshold)) {
    return fail("abs_threshold must be non-negative and finite");
  }
  return true;
}

CheckResult RunLossPlateau(const LossSeries& series, double baseline_loss,
                           const LossPlateauOptions& options) {
  std::string why;
  if (!options.IsValid(&why)) raise(ExitCode::kUsage, "{}: {}", kLossPlateauName, why);
  if (series.steps.size() != series.loss.size()) {
    raise(ExitCode::kBadData, "{}: {} steps but {} loss values", kLossPlateauName,
          series.steps.size(), series.loss.size());
  }
  const double threshold = options.rel_threshold;
  const std::size_t total = series.loss.size();
  if (total < static_cast<std::size_t>(options.min_points)) {
    CheckResult r = Skipped(kLossPlateauName, threshold,
                            fmt::format("only {} loss points; at least {} are needed", total,
                                        options.min_points));
    r.detail["source"] = series.source;
    r.detail["points"] = total;
    return r;
  }
  for (std::size_t i = 0; i < total; ++i) {
    if (!std::isfinite(series.loss[i])) {
      return Skipped(kLossPlateauName, threshold,
                     fmt::format("non-finite loss at step {}", series.steps[i]));
    }
  }
  if (!(baseline_loss > 0.0) || !std::isfinite(baseline_loss)) {
    return Skipped(kLossPlateauName, threshold,
                   fmt::format("baseline loss {} is not positive and finite", baseline_loss));
  }

  const SortedSeries s = SortByStep(series);
  const std::size_t start = WindowStart(s.steps, options.tail_fraction, options.min_points);
  const std::vector<double> window(s.loss.begin() + static_cast<std::ptrdiff_t>(start), s.loss.end());
  const std::size_t w = window.size();
  const std::size_t fifth = std::max<std::size_t>(1, static_cast<std::size_t>(std::lround(static_cast<double>(w) / 5.0)));
  const double m_first = Median({window.begin(), window.begin() + static_cast<std::ptrdiff_t>(fifth)});
  const double m_last = Median({window.end() - static_cast<std::ptrdiff_t>(fifth), window.end()});
  const double drop = m_first - m_last;
  const double delta_rel = drop / std::max(std::fabs(m_last), kTiny);
  const double delta_abs = drop / baseline_loss;
  const bool plateau = delta_rel < options.rel_threshold || delta_abs < options.abs_threshold;
  const bool rising = drop < 0.0;

  const double tol = std::max(options.rel_threshold * std::fabs(m_last),
                              options.abs_threshold * baseline_loss);
  const std::size_t plateau_index = PlateauStart(s.loss, m_last, tol);

  CheckResult r;
  r.name = kLossPlateauName;
  r.status = plateau ? Status::kPass : Status::kFail;
  r.statistic = delta_rel;
  r.threshold = threshold;
  const std::int64_t from = s.steps[start];
  const std::int64_t to = s.steps.back();
  r.detail = {{"delta_rel", delta_rel},
              {"delta_abs", delta_abs},
              {"rel_threshold", options.rel_threshold},
              {"abs_threshold", options.abs_threshold},
              {"baseline_loss", baseline_loss},
              {"window_start_step", from},
              {"window_end_step", to},
              {"window_points", w},
              {"fifth_points", fifth},
              {"m_first", m_first},
              {"m_last", m_last},
              {"rising", rising},
              {"mann_kendall", stats::MannKendallToJson(stats::MannKendall(window))},
              {"plateau_start_step", nullptr},
              {"plateau_level", m_last},
              {"plateau_level_rel", m_last / baseline_loss},
              {"plateau_tolerance", tol},
              {"source", series.source},
              {"points", total}};
  if (plateau_index != std::string::npos) r.detail["plateau_start_step"] = s.steps[plateau_index];
  r.message = Verdict(plateau, rising, delta_rel, m_last, baseline_loss, from, to);
  return r;
}

}  // namespace plaudit::checks
