#include "plaudit/report/text_report.h"

#include <algorithm>
#include <cmath>

#include <fmt/color.h>
#include <fmt/format.h>

namespace plaudit::report {
namespace {

fmt::text_style VerdictStyle(audit::Verdict v) {
  switch (v) {
    case audit::Verdict::kGlobal: return fmt::fg(fmt::rgb(0, 158, 115)) | fmt::emphasis::bold;       // bluish green
    case audit::Verdict::kSpurious: return fmt::fg(fmt::rgb(230, 159, 0)) | fmt::emphasis::bold;     // orange
    case audit::Verdict::kMoving: return fmt::fg(fmt::rgb(86, 180, 233)) | fmt::emphasis::bold;      // sky blue
    case audit::Verdict::kDiverged: return fmt::fg(fmt::rgb(213, 94, 0)) | fmt::emphasis::bold;      // vermilion
    case audit::Verdict::kInconclusive: return fmt::emphasis::bold;
  }
  return {};
}

std::string Styled(bool colour, const fmt::text_style& style, const std::string& text) {
  return colour ? fmt::format(style, "{}", text) : text;
}

std::string Num(double v) { return std::isfinite(v) ? fmt::format("{:.4g}", v) : std::string("-"); }

std::string Wrap(const std::string& text, std::size_t width, const std::string& indent) {
  std::string out = indent;
  std::size_t col = 0;
  std::size_t pos = 0;
  while (pos < text.size()) {
    std::size_t end = text.find(' ', pos);
    if (end == std::string::npos) end = text.size();
    const std::string word = text.substr(pos, end - pos);
    if (col > 0 && col + 1 + word.size() > width) {
      out += "\n" + indent;
      col = 0;
    } else if (col > 0) {
      out += ' ';
      ++col;
    }
    out += word;
    col += word.size();
    pos = end + 1;
  }
  return out + "\n";
}

std::string GradientTable(const audit::AuditReport& r) {
  const auto& pts = r.trajectory.points;
  if (pts.size() < 2) return {};
  std::string out = fmt::format("\n  {:<6} {:>11} {:>11} {:>11}   {}\n", "layer", "sup now", "peak sup", "now/peak", "");
  const std::size_t depth = pts.back().grad.size();
  for (std::size_t l = static_cast<std::size_t>(r.trajectory.lowest_grad_layer); l < depth; ++l) {
    double peak = 0.0;
    for (const auto& p : pts) peak = std::max(peak, p.grad[l].sup);
    const double now = pts.back().grad[l].sup;
    std::string note = static_cast<int>(l) == r.gradient_layer ? "judged" : "";
    if (l < r.trajectory.frozen.size() && r.trajectory.frozen[l]) note = "held fixed";
    out += fmt::format("  {:<6} {:>11} {:>11} {:>11}   {}\n", l + 1, Num(now), Num(peak), Num(peak > 0 ? now / peak : 0.0), note);
  }
  return out;
}

// Deep networks: one line per hidden layer after the first, from the layer-degeneracy detail.
std::string DepthTable(const audit::AuditReport& r) {
  const checks::CheckResult* deg = r.Find(checks::kLayerDegeneracyName);
  if (deg == nullptr || !deg->ran() || !deg->detail.contains("layers")) return {};
  std::string out = fmt::format("\n  {:<6} {:>6} {:>11} {:>15} {:>12}   {}\n", "layer", "width", "mean |corr|", "effective rank",
                                "translation", "");
  for (const auto& layer : deg->detail["layers"]) {
    auto num = [&](const char* key) {
      return layer.contains(key) && layer[key].is_number() ? layer[key].get<double>() : std::nan("");
    };
    const bool degenerate = num("mean_abs_corr") >= deg->threshold;
    out += fmt::format("  {:<6} {:>6} {:>11} {:>15} {:>12}   {}\n", layer.value("layer", 0), layer.value("width", 0),
                       Num(num("mean_abs_corr")), Num(num("effective_rank")), Num(num("translation_share")),
                       degenerate ? "degenerate" : "");
  }
  return out;
}

}  // namespace

std::string Sparkline(const std::vector<double>& values, int width) {
  static const char* kBlocks[] = {"\u2581", "\u2582", "\u2583", "\u2584", "\u2585", "\u2586", "\u2587", "\u2588"};
  std::vector<double> v;
  for (double x : values) if (std::isfinite(x)) v.push_back(x);
  if (v.empty() || width <= 0) return {};
  const double lo = *std::min_element(v.begin(), v.end());
  const double hi = *std::max_element(v.begin(), v.end());
  const bool log_scale = lo > 0 && hi / lo > 10.0;
  auto t = [&](double x) { return log_scale ? std::log(x) : x; };
  const double a = t(lo), b = t(hi);
  std::string out;
  const int cols = std::min<int>(width, static_cast<int>(v.size()));
  for (int c = 0; c < cols; ++c) {
    const std::size_t i = static_cast<std::size_t>(std::llround(static_cast<double>(c) * static_cast<double>(v.size() - 1) / std::max(1, cols - 1)));
    const double f = b > a ? (t(v[i]) - a) / (b - a) : 0.5;
    out += kBlocks[std::clamp(static_cast<int>(f * 7.0 + 0.5), 0, 7)];
  }
  return out;
}

std::string AuditReportToText(const audit::AuditReport& r, const TextOptions& options) {
  const bool c = options.colour;
  std::string out = fmt::format("{} at step {}\n\n", r.run, r.step);
  std::string verdict = audit::VerdictToString(r.verdict);
  std::transform(verdict.begin(), verdict.end(), verdict.begin(), [](unsigned char ch) { return std::toupper(ch); });
  out += fmt::format("  verdict  {}\n", Styled(c, VerdictStyle(r.verdict), verdict));
  out += Wrap(r.summary, 88, "  ");
  out += fmt::format("\n  {:<18} {:<6} {:>11} {:>11} {:>9}  {}\n", "check", "status", "statistic", "threshold", "p-value", "");
  for (const auto& chk : r.checks) {
    const std::string status = checks::StatusToString(chk.status);
    const auto style = chk.status == checks::Status::kFail ? fmt::emphasis::bold : fmt::text_style{};
    out += fmt::format("  {:<18} {:<6} {:>11} {:>11} {:>9}  {}\n", chk.name, Styled(c, style, status), Num(chk.statistic),
                       Num(chk.threshold), chk.p_value ? Num(*chk.p_value) : std::string("-"), chk.message);
  }
  out += GradientTable(r);
  out += DepthTable(r);
  if (!r.loss_series.loss.empty()) {
    const double first = r.loss_series.loss.front();
    const double last = r.loss_series.loss.back();
    out += fmt::format("\n  loss {}  {} -> {}", Sparkline(r.loss_series.loss, options.sparkline_width), Num(first), Num(last));
    if (r.baseline_loss > 0) out += fmt::format(" ({} x L0)", Num(last / r.baseline_loss));
    out += "\n";
  }
  if (r.rows_total > 0) {
    out += fmt::format("  audit rows {} of {}; L0 (best constant predictor) = {}; seed {}\n", r.rows_used, r.rows_total,
                       Num(r.baseline_loss), r.seed);
  }
  if (r.trajectory.precision == model::Precision::kFloat32) {
    out += fmt::format("  gradient pass in float32; {} of {} snapshots recomputed in double (the last one and those "
                       "whose gradient fell below the refine level)\n",
                       r.trajectory.recomputed_in_double, r.trajectory.points.size());
  }
  return out;
}

}  // namespace plaudit::report
