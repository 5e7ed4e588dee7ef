#include "plaudit/report/html_report.h"

#include <algorithm>
#include <cmath>
#include <fstream>
#include <limits>
#include <numeric>
#include <system_error>
#include <vector>

#include <fmt/format.h>

#include "plaudit/core/error.h"
#include "plaudit/report/json_report.h"
#include "plaudit/report/svg_plot.h"

namespace plaudit::report {
namespace {

using nlohmann::json;
namespace svg = report::svg;

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
constexpr const char* kDash = "\u2013";  // shown for a number that is absent or not finite
constexpr svg::Size kWide{760, 320};

std::string E(std::string_view s) { return svg::XmlEscape(s); }

std::string Num(double v) { return std::isfinite(v) ? fmt::format("{:.4g}", v) : std::string(kDash); }

std::string Exact(double v) { return std::isfinite(v) ? fmt::format("{:.17g}", v) : std::string(); }

// A number cell: rounded text, the exact value in data-value (empty when absent).
std::string NumCell(const std::string& field, double v) {
  return fmt::format("<td class=\"num\" data-field=\"{}\" data-value=\"{}\">{}</td>", field, Exact(v), Num(v));
}

double JNum(const json& j, const char* key) {
  if (!j.is_object() || !j.contains(key) || !j[key].is_number()) return kNaN;
  return j[key].get<double>();
}

std::vector<double> JVec(const json& j, const char* key) {
  std::vector<double> out;
  if (!j.is_object() || !j.contains(key) || !j[key].is_array()) return out;
  for (const auto& v : j[key]) out.push_back(v.is_number() ? v.get<double>() : kNaN);
  return out;
}

std::string JStr(const json& j, const char* key) {
  if (!j.is_object() || !j.contains(key) || !j[key].is_string()) return {};
  return j[key].get<std::string>();
}

// ---------------------------------------------------------------- words

const char* VerdictGloss(audit::Verdict v) {
  switch (v) {
    case audit::Verdict::kGlobal: return "the plateau is the best this function class can do on these data";
    case audit::Verdict::kSpurious: return "a stationary point that is not global: fresh features still explain the error";
    case audit::Verdict::kMoving: return "training is still making progress, or the judged gradient has not decayed";
    case audit::Verdict::kInconclusive: return "the checks disagree, or the inputs are too thin to judge";
    case audit::Verdict::kDiverged: return "the loss or the parameters stopped being finite numbers";
  }
  return "";
}

const char* NextStep(audit::Verdict v) {
  switch (v) {
    case audit::Verdict::kGlobal:
      return "Stop training here: the loss is as low as this network gets on these data. To go lower, change the model "
             "or the data, not the optimiser.";
    case audit::Verdict::kSpurious:
      return "More steps at this setting will not help. Restart from another seed or with a wider first layer, or add "
             "a neuron along the best new direction the residual fit found (marked in the direction map), then train "
             "and audit again.";
    case audit::Verdict::kMoving:
      return "Keep training, or wait for more snapshots, and audit again: the loss or the judged gradient is still "
             "changing, so it is too early to judge.";
    case audit::Verdict::kInconclusive:
      return "Read the checks below: they disagree, or lack what they need. Add snapshots, logged losses or audit data "
             "(data.npz) as the summary says, then audit again.";
    case audit::Verdict::kDiverged:
      return "Restart from the last finite snapshot with a smaller step size: numbers after the divergence mean "
             "nothing.";
  }
  return "";
}

// What each check asks, in one line, and how its statistic meets its threshold.
std::string CheckQuestion(const std::string& name) {
  if (name == checks::kGradientDecayName) {
    return "Has the judged layer's gradient died down? Statistic: largest gradient entry now over its peak; fails "
           "above the threshold, or when the gradient grows again.";
  }
  if (name == checks::kSupportSpreadName) {
    return "Do the first-layer neurons still point every way? Statistic: the largest empty cap over its median for "
           "as many random directions; fails above the threshold.";
  }
  if (name == checks::kResidualFitName) {
    return "Can fresh features explain what the network leaves? Statistic: share of the remaining loss they remove "
           "on held-out rows; fails when at least the threshold and significant.";
  }
  if (name == checks::kCurvatureName) {
    return "Is this a saddle training will leave? Statistic: smallest over largest Hessian eigenvalue; fails when "
           "below minus the threshold and a step along that direction lowers the loss enough to matter.";
  }
  if (name == checks::kLayerDegeneracyName) {
    return "Do a deep layer's neurons still compute different functions? Statistic: the worst layer's mean "
           "absolute correlation between its neurons' activations; fails at or above the threshold.";
  }
  if (name == checks::kTwoWayDiversityName) {
    return "Do a middle layer's neurons stay diverse in what they read and what they feed? Statistic: the worst "
           "largest empty cap of incoming rows or outgoing columns over its random median; fails above the "
           "threshold.";
  }
  if (name == checks::kLossPlateauName) {
    return "Has the loss stopped falling? Statistic: relative drop across the tail window; a plateau (pass) below "
           "the threshold.";
  }
  return {};
}

const char* StatusGlyph(checks::Status s) {
  switch (s) {
    case checks::Status::kPass: return "\u2713";  // check mark
    case checks::Status::kFail: return "\u2717";  // ballot x
    case checks::Status::kWarn: return "!";
    case checks::Status::kSkip: return "\u2013";
  }
  return "";
}

// A check's message as a sentence of a caption: capital first letter, closing full stop.
std::string Sentence(std::string text) {
  if (text.empty()) return text;
  text[0] = static_cast<char>(std::toupper(static_cast<unsigned char>(text[0])));
  if (text.back() != '.') text += '.';
  return text;
}

std::string LossUnit(const std::string& loss) {
  if (loss == "squared") return "half squared error";
  if (loss == "cross-entropy" || loss == "logistic") return "nats";
  return "";
}

// ---------------------------------------------------------------- page parts

constexpr const char* kStyle = R"css(
:root { color-scheme: light; }
body { font-family: sans-serif; color: #1a1a1a; background: #ffffff; max-width: 1120px; margin: 0 auto;
  padding: 1.2rem 1.5rem 2rem; line-height: 1.45; }
h1 { font-size: 1.9rem; margin: 0.1rem 0 0.4rem; }
h2 { font-size: 1.25rem; margin: 1.6rem 0 0.5rem; border-bottom: 1px solid #cccccc; padding-bottom: 0.2rem; }
code { font-family: monospace; font-size: 0.95em; }
.banner { border-left: 14px solid #808080; background: #f4f4f4; padding: 0.8rem 1.2rem; }
.banner .eyebrow { margin: 0; color: #444444; }
.banner .gloss { font-weight: normal; font-size: 1.05rem; color: #333333; }
.banner .summary { font-size: 1.1rem; margin: 0.3rem 0; }
.banner .next { margin: 0.4rem 0 0.6rem; }
.verdict-global { border-left-color: #009E73; }
.verdict-spurious { border-left-color: #E69F00; }
.verdict-moving { border-left-color: #56B4E9; }
.verdict-inconclusive { border-left-color: #808080; }
.verdict-diverged { border-left-color: #D55E00; }
table { border-collapse: collapse; width: 100%; }
th, td { text-align: left; vertical-align: top; padding: 0.3rem 0.5rem; border-bottom: 1px solid #d6d6d6; }
th { background: #ececec; font-weight: 600; }
td.num { text-align: right; white-space: nowrap; font-variant-numeric: tabular-nums; }
table.facts { width: auto; margin-top: 0.3rem; }
table.facts th { background: none; font-weight: normal; color: #444444; padding-left: 0; }
td.question { color: #444444; font-size: 0.9rem; max-width: 22rem; }
.status { font-weight: 700; white-space: nowrap; }
.status-pass { color: #006e50; }
.status-fail { color: #b34a00; }
.status-warn { color: #8a6100; }
.status-skip { color: #555555; }
figure { margin: 0.8rem 0 1.2rem; break-inside: avoid; page-break-inside: avoid; }
figcaption { font-size: 0.92rem; color: #333333; margin-bottom: 0.3rem; max-width: 60rem; }
svg.chart { display: block; max-width: 100%; height: auto; }
.pair { display: flex; flex-wrap: wrap; gap: 1.2rem; }
.pair figure { flex: 1 1 380px; max-width: 540px; }
.note { color: #444444; font-style: italic; }
footer { margin-top: 2rem; font-size: 0.85rem; color: #555555; border-top: 1px solid #cccccc; padding-top: 0.4rem; }
@page { size: A4; margin: 14mm; }
@media print {
  body { max-width: none; padding: 0; font-size: 10pt; }
  .banner { background: none; border: 1px solid #999999; border-left-width: 10px;
    -webkit-print-color-adjust: exact; print-color-adjust: exact; }
  svg.chart { -webkit-print-color-adjust: exact; print-color-adjust: exact; }
  h2 { break-after: avoid; page-break-after: avoid; }
  .pair figure { flex: 1 1 45%; }
}
)css";

std::string Figure(const std::string& id, const std::string& title, const std::string& caption, const std::string& chart) {
  return fmt::format("<figure class=\"chart-figure\" id=\"fig-{}\"><figcaption><strong>{}.</strong> {}</figcaption>{}</figure>\n",
                     E(id), E(title), E(caption), chart);
}

std::string Banner(const audit::AuditReport& r, const json& j) {
  const std::string v = audit::VerdictToString(r.verdict);
  std::string word = v;
  word[0] = static_cast<char>(std::toupper(static_cast<unsigned char>(word[0])));
  std::string out = fmt::format("<header class=\"banner verdict-{0}\" data-verdict=\"{0}\">\n", v);
  out += fmt::format("<p class=\"eyebrow\">plaudit audit of <code>{}</code> at step <span data-field=\"step\">{}</span></p>\n",
                     E(r.run), r.step);
  out += fmt::format("<h1><span class=\"verdict\">{}</span> <span class=\"gloss\">{} {}</span></h1>\n", E(word), kDash,
                     E(VerdictGloss(r.verdict)));
  out += fmt::format("<p class=\"summary\">{}</p>\n", E(r.summary));
  out += fmt::format("<p class=\"next\"><strong>What to do next.</strong> {}</p>\n", E(NextStep(r.verdict)));
  out += "<table class=\"facts\"><tbody>\n";
  out += "<tr><th>loss at the last snapshot</th>" + NumCell("last_loss", JNum(j, "last_loss")) + "</tr>\n";
  out += "<tr><th>L0, best constant prediction</th>" + NumCell("baseline_loss", JNum(j, "baseline_loss")) + "</tr>\n";
  out += "<tr><th>loss / L0</th>" + NumCell("last_loss_relative", JNum(j, "last_loss_relative")) + "</tr>\n";
  out += fmt::format("<tr><th>audit rows</th><td class=\"num\" data-field=\"rows_used\" data-value=\"{0}\">{0} of {1}</td></tr>\n",
                     r.rows_used, r.rows_total);
  out += fmt::format("<tr><th>judged layer</th><td class=\"num\" data-field=\"gradient_layer\" data-value=\"{0}\">{0}</td></tr>\n",
                     r.gradient_layer + 1);
  out += fmt::format("<tr><th>seed</th><td class=\"num\" data-field=\"seed\" data-value=\"{0}\">{0}</td></tr>\n", r.seed);
  out += "</tbody></table>\n</header>\n";
  return out;
}

std::string ChecksTable(const audit::AuditReport& r) {
  std::string out = "<section id=\"checks\"><h2>Checks</h2>\n<table class=\"checks\"><thead><tr><th>check</th><th>asks</th>"
                    "<th>status</th><th>statistic</th><th>threshold</th><th>p-value</th><th>in plain words</th></tr></thead>"
                    "<tbody>\n";
  for (const auto& c : r.checks) {
    const std::string status = checks::StatusToString(c.status);
    const std::string words = c.message.empty() ? JStr(c.detail, "reason") : c.message;
    out += fmt::format("<tr data-check=\"{}\"><td><code>{}</code></td><td class=\"question\">{}</td>"
                       "<td class=\"status status-{}\" data-field=\"status\">{} {}</td>",
                       E(c.name), E(c.name), E(CheckQuestion(c.name)), status, StatusGlyph(c.status), status);
    out += NumCell("statistic", c.statistic) + NumCell("threshold", c.threshold) +
           NumCell("p_value", c.p_value ? *c.p_value : kNaN);
    out += fmt::format("<td>{}</td></tr>\n", E(Sentence(words)));
  }
  return out + "</tbody></table></section>\n";
}

// ---------------------------------------------------------------- charts

std::string LossSection(const audit::AuditReport& r) {
  std::string out = "<section id=\"loss\"><h2>Loss</h2>\n";
  const auto& s = r.loss_series;
  std::vector<std::size_t> order(std::min(s.steps.size(), s.loss.size()));
  std::iota(order.begin(), order.end(), std::size_t{0});
  std::stable_sort(order.begin(), order.end(), [&](std::size_t a, std::size_t b) { return s.steps[a] < s.steps[b]; });
  svg::Line line;
  line.name = s.source == "scalars" ? "loss (logged)" : "loss (from the snapshots)";
  for (std::size_t i : order) {
    line.x.push_back(static_cast<double>(s.steps[i]));
    line.y.push_back(s.loss[i]);
  }
  if (line.x.empty()) return out + "<p class=\"note\">No loss values: the run has neither logged losses nor audit data.</p></section>\n";

  const checks::CheckResult* plateau = r.Find(checks::kLossPlateauName);
  const checks::CheckResult* fit = r.Find(checks::kResidualFitName);
  svg::LineChart chart;
  chart.title = "Loss against training step, log scale";
  chart.x = {"training step", "updates", svg::Scale::kLinear, {}, {}};
  chart.y = {"loss", LossUnit(fit ? JStr(fit->detail, "loss") : std::string()), svg::Scale::kLog, {}, {}};
  chart.lines.push_back(line);
  if (std::isfinite(r.baseline_loss) && r.baseline_loss > 0.0) {
    chart.levels.push_back({"L0 (best constant prediction)", r.baseline_loss, svg::Colour::kBlack, svg::Dash::kDashed});
  }
  std::string caption = "Loss at each recorded step on a log scale. Dashed: L0, the loss of predicting the best constant.";
  if (plateau != nullptr && plateau->ran()) {
    const double from = JNum(plateau->detail, "window_start_step"), to = JNum(plateau->detail, "window_end_step");
    if (std::isfinite(from) && std::isfinite(to)) {
      chart.windows.push_back({"tail window judged for a plateau", from, to, svg::Colour::kSkyBlue});
      caption += " Shaded: the tail window the plateau check compares.";
    }
  }
  if (plateau != nullptr && !plateau->message.empty()) caption += " " + Sentence(plateau->message);
  out += Figure("loss", "Loss", caption, svg::RenderLineChart(chart, "loss", kWide));
  return out + "</section>\n";
}

// sup / p99 / mean of one layer: from the check's detail when it ran, else the trajectory.
struct LayerCurves {
  int layer1 = 0;
  std::vector<double> steps, sup, p99, mean;
};

LayerCurves JudgedLayer(const audit::AuditReport& r) {
  LayerCurves c;
  c.layer1 = r.gradient_layer + 1;
  const checks::CheckResult* g = r.Find(checks::kGradientDecayName);
  if (g != nullptr && g->ran() && g->detail.contains("steps")) {
    c.steps = JVec(g->detail, "steps");
    c.sup = JVec(g->detail, "sup");
    c.p99 = JVec(g->detail, "p99");
    c.mean = JVec(g->detail, "mean");
    return c;
  }
  if (r.gradient_layer < r.trajectory.lowest_grad_layer) return c;
  const auto l = static_cast<std::size_t>(r.gradient_layer);
  for (const auto& p : r.trajectory.points) {
    if (l >= p.grad.size()) continue;
    c.steps.push_back(static_cast<double>(p.step));
    c.sup.push_back(p.grad[l].sup);
    c.p99.push_back(p.grad[l].p99);
    c.mean.push_back(p.grad[l].mean);
  }
  return c;
}

std::string GradientSection(const audit::AuditReport& r) {
  std::string out = "<section id=\"gradient\"><h2>Gradient</h2>\n";
  const checks::CheckResult* g = r.Find(checks::kGradientDecayName);
  const LayerCurves c = JudgedLayer(r);
  if (c.steps.empty()) {
    out += "<p class=\"note\">No gradient to draw for the judged layer";
    if (g != nullptr && !g->message.empty()) out += ": " + E(g->message);
    out += ".</p>\n";
  } else {
    svg::LineChart chart;
    chart.title = fmt::format("Layer {} weight gradient against training step, log scale", c.layer1);
    chart.x = {"training step", "updates", svg::Scale::kLinear, {}, {}};
    chart.y = {fmt::format("|gradient| of layer {}", c.layer1), "", svg::Scale::kLog, {}, {}};
    chart.lines.push_back({"largest entry (sup)", c.steps, c.sup, svg::Colour::kBlue, svg::Dash::kSolid, 2.2});
    chart.lines.push_back({"99th percentile", c.steps, c.p99, svg::Colour::kVermilion, svg::Dash::kDashed, 2.0});
    chart.lines.push_back({"mean", c.steps, c.mean, svg::Colour::kBluishGreen, svg::Dash::kDotted, 2.2});
    std::string caption = fmt::format(
        "How large layer {}'s weight gradient is at each snapshot: its largest entry, 99th percentile and mean, on a log "
        "scale, in the parameterization's own scale (in which every weight moves by O(1) in O(1) time).", c.layer1);
    if (g != nullptr && g->ran()) {
      const double peak = JNum(g->detail, "max_sup"), ratio = JNum(g->detail, "decay_ratio");
      if (std::isfinite(peak) && std::isfinite(ratio)) {
        chart.levels.push_back({fmt::format("decay threshold ({} \u00D7 peak)", Num(ratio)), peak * ratio, svg::Colour::kBlack,
                                svg::Dash::kDashDot});
        caption += " Dash-dot: the decay threshold; the check wants the last largest entry below it.";
      }
    }
    if (g != nullptr && !g->message.empty()) caption += " " + Sentence(g->message);
    out += Figure("gradient", fmt::format("Gradient of layer {}", c.layer1), caption, svg::RenderLineChart(chart, "gradient", kWide));
  }

  // Every computed layer, when there are several.
  const auto& pts = r.trajectory.points;
  if (pts.empty()) return out + "</section>\n";
  const std::size_t depth = pts.back().grad.size();
  const auto lowest = static_cast<std::size_t>(std::max(0, r.trajectory.lowest_grad_layer));
  if (depth < lowest + 2) return out + "</section>\n";
  svg::LineChart layers;
  layers.title = "Largest weight-gradient entry of every computed layer against training step, log scale";
  layers.x = {"training step", "updates", svg::Scale::kLinear, {}, {}};
  layers.y = {"largest |gradient| entry", "", svg::Scale::kLog, {}, {}};
  svg::BarChart bars;
  bars.title = "Largest gradient entry now over its peak, per layer, log scale";
  bars.x = {"layer", "", svg::Scale::kLinear, {}, {}};
  bars.y = {"sup now / peak sup", "ratio", svg::Scale::kLog, {}, {}};
  bars.series_name = "sup now / peak";
  for (std::size_t l = lowest; l < depth; ++l) {
    const bool frozen = l < r.trajectory.frozen.size() && r.trajectory.frozen[l];
    svg::Line line;
    const std::size_t k = l - lowest;
    line.name = fmt::format("layer {}{}{}", l + 1, static_cast<int>(l) == r.gradient_layer ? " (judged)" : "",
                            frozen ? " (held fixed)" : "");
    line.colour = svg::SeriesColour(k);
    line.dash = svg::SeriesDash(k);
    double peak = 0.0;
    for (const auto& p : pts) {
      if (l >= p.grad.size()) continue;
      line.x.push_back(static_cast<double>(p.step));
      line.y.push_back(p.grad[l].sup);
      if (std::isfinite(p.grad[l].sup)) peak = std::max(peak, p.grad[l].sup);
    }
    layers.lines.push_back(std::move(line));
    bars.categories.push_back(std::to_string(l + 1) + (frozen ? " (fixed)" : ""));
    bars.values.push_back(peak > 0.0 ? pts.back().grad[l].sup / peak : kNaN);
  }
  std::string bar_caption = "The last largest gradient entry of each layer as a share of its own peak.";
  if (g != nullptr && g->ran() && std::isfinite(JNum(g->detail, "decay_ratio"))) {
    bars.levels.push_back({"decay ratio", JNum(g->detail, "decay_ratio"), svg::Colour::kBlack, svg::Dash::kDashDot});
    bar_caption += " Dash-dot: the decay ratio the judged layer is held to; bars below it have died down.";
  }
  out += Figure("gradient-layers", "Gradient of every computed layer",
                "The largest weight-gradient entry of each layer whose gradient was computed, on a log scale.",
                svg::RenderLineChart(layers, "gradient-layers", kWide));
  out += Figure("gradient-decay-bars", "Decay per layer", bar_caption, svg::RenderBarChart(bars, "gradient-decay-bars", svg::Size{760, 280}));
  return out + "</section>\n";
}

// One direction panel: neurons, and the markers that belong to it.
std::string DirectionChart(const std::string& id, const std::string& title, const std::array<std::string, 2>& axis_names,
                           const DirectionPoints& points, const std::optional<std::array<double, 2>>& cap,
                           const std::optional<std::array<double, 2>>& best) {
  svg::ScatterChart chart;
  chart.title = title;
  chart.x = {"along " + axis_names[0], "direction cosine", svg::Scale::kLinear, -1.08, 1.08};
  chart.y = {"along " + axis_names[1], "direction cosine", svg::Scale::kLinear, -1.08, 1.08};
  chart.equal_aspect = true;
  chart.reference_circle = 1.0;
  svg::PointSet neurons;
  neurons.name = points.weight.empty() ? "neuron" : "neuron (area: outgoing weight)";
  neurons.x = points.x;
  neurons.y = points.y;
  neurons.size = points.weight;
  neurons.colour = svg::Colour::kBlue;
  neurons.opacity = 0.55;
  chart.sets.push_back(std::move(neurons));
  if (cap) {
    svg::PointSet s;
    s.name = "largest empty cap (centre)";
    s.x = {(*cap)[0]};
    s.y = {(*cap)[1]};
    s.radius = 7.0;
    s.colour = svg::Colour::kOrange;
    s.marker = svg::Marker::kStar;
    s.ray_from_origin = true;
    s.opacity = 0.95;
    chart.sets.push_back(std::move(s));
  }
  if (best) {
    svg::PointSet s;
    s.name = "best new neuron";
    s.x = {(*best)[0]};
    s.y = {(*best)[1]};
    s.radius = 6.0;
    s.colour = svg::Colour::kVermilion;
    s.marker = svg::Marker::kDiamond;
    s.ray_from_origin = true;
    s.opacity = 0.95;
    chart.sets.push_back(std::move(s));
  }
  return svg::RenderScatterChart(chart, id, svg::Size{460, 470});
}

DirectionPoints PointsFromDetail(const json& detail, const char* key, const char* weights) {
  DirectionPoints p;
  if (!detail.contains(key) || !detail[key].is_array()) return p;
  for (const auto& xy : detail[key]) {
    if (!xy.is_array() || xy.size() < 2 || !xy[0].is_number() || !xy[1].is_number()) continue;
    p.x.push_back(xy[0].get<double>());
    p.y.push_back(xy[1].get<double>());
  }
  if (weights != nullptr) {
    p.weight = JVec(detail, weights);
    if (p.weight.size() != p.x.size()) p.weight.clear();
  }
  return p;
}

std::string DirectionSection(const audit::AuditReport& r, const HtmlOptions& options) {
  std::string out = "<section id=\"directions\"><h2>First-layer directions</h2>\n";
  const checks::CheckResult* spread = r.Find(checks::kSupportSpreadName);
  DirectionMap map;
  if (options.directions) {
    map = *options.directions;
  } else if (spread != nullptr && spread->ran() && spread->detail.contains("points_2d")) {
    map.axis_names = {"principal direction 1", "principal direction 2"};
    map.first = PointsFromDetail(spread->detail, "points_2d_init", nullptr);
    map.last = PointsFromDetail(spread->detail, "points_2d", "outgoing_norm");
    map.first_step = r.trajectory.points.empty() ? 0 : r.trajectory.points.front().step;
    map.last_step = r.step;
  } else {
    out += "<p class=\"note\">No direction map: ";
    out += spread != nullptr && !spread->ran() ? E(spread->message) : std::string("the support-spread check did not run");
    return out + ".</p></section>\n";
  }
  std::string caption =
      "Each dot is one first-layer neuron, drawn as the direction it points in the standardised input space (the "
      "constant input included), seen along the data's two leading directions; the dashed circle is where a direction "
      "lying wholly in that plane falls.";
  if (!map.last.weight.empty()) caption += " Dot area grows with the neuron's outgoing weight.";
  caption += " Dots all round the circle: the neurons cover every direction; dots bunched in a few places: they collapsed.";
  if (map.empty_cap) {
    const double null_deg = spread ? JNum(spread->detail, "null_median_degrees") : kNaN;
    caption += fmt::format(" Star: the centre of the largest cap no neuron enters (radius {} degrees; {} for as many random "
                           "directions).", Num(map.empty_cap_degrees), Num(null_deg));
  }
  if (map.best_neuron) caption += " Diamond: the direction of the best new neuron the residual fit found.";
  if (spread != nullptr && !spread->message.empty()) caption += " " + Sentence(spread->message);
  if (!options.directions) caption += " (Markers and initial weights need the networks: use plaudit report.)";
  out += "<p class=\"lead\">" + E(caption) + "</p>\n<div class=\"pair\">\n";
  if (!map.first.x.empty()) {
    out += Figure("directions-first", fmt::format("Step {}", map.first_step),
                  fmt::format("{} neurons at the first snapshot.", map.first.x.size()),
                  DirectionChart("directions-first", fmt::format("First-layer directions at step {}", map.first_step),
                                 map.axis_names, map.first, std::nullopt, std::nullopt));
  }
  out += Figure("directions-last", fmt::format("Step {}", map.last_step),
                fmt::format("{} neurons at the last snapshot.", map.last.x.size()),
                DirectionChart("directions-last", fmt::format("First-layer directions at step {}", map.last_step),
                               map.axis_names, map.last, map.empty_cap, map.best_neuron));
  return out + "</div></section>\n";
}

std::string ResidualSection(const audit::AuditReport& r) {
  std::string out = "<section id=\"residual\"><h2>Residual fit</h2>\n";
  const checks::CheckResult* fit = r.Find(checks::kResidualFitName);
  if (fit == nullptr || !fit->ran() || !fit->detail.contains("null_eta_a")) {
    out += "<p class=\"note\">No permutation null to draw";
    if (fit != nullptr && !fit->message.empty()) out += ": " + E(fit->message);
    return out + ".</p></section>\n";
  }
  const std::vector<double> null = JVec(fit->detail, "null_eta_a");
  const double eta_a = JNum(fit->detail, "eta_a"), eta_b = JNum(fit->detail, "eta_b");
  svg::HistogramChart chart;
  chart.title = "Permutation null of the random-feature effect, with the observed effect";
  chart.x = {"share of the remaining loss removed on held-out rows", "fraction", svg::Scale::kLinear, {}, {}};
  chart.y = {"permutations", "count", svg::Scale::kLinear, {}, {}};
  chart.values = null;
  chart.series_name = fmt::format("{} row permutations (null)", null.size());
  chart.colour = svg::Colour::kSkyBlue;
  chart.marks.push_back({"observed, random features", eta_a, svg::Colour::kVermilion, svg::Dash::kSolid});
  if (std::isfinite(eta_b)) chart.marks.push_back({"observed, new neurons (t-test)", eta_b, svg::Colour::kReddishPurple, svg::Dash::kDashDot});
  if (std::isfinite(fit->threshold)) chart.marks.push_back({"effect threshold", fit->threshold, svg::Colour::kBlack, svg::Dash::kDashed});
  std::string caption = fmt::format(
      "Fresh random features are fitted to what the network leaves, and the share of the remaining loss they remove on "
      "held-out rows is compared with the same fit after shuffling the rows (the bars: features that cannot know the "
      "residual). An observed line far right of the bars means the residual still holds structure the network can "
      "reach. p = {} for the random features{}.",
      Num(JNum(fit->detail, "p_a")),
      std::isfinite(eta_b) ? fmt::format("; the new-neuron effect is tested by a paired t-test instead (p = {})",
                                         Num(JNum(fit->detail, "p_b")))
                           : std::string());
  if (!fit->message.empty()) caption += " " + Sentence(fit->message);
  out += Figure("residual-null", "Residual fit against its null", caption, svg::RenderHistogram(chart, "residual-null", kWide));
  return out + "</section>\n";
}

// Deep networks: how alike each hidden layer's neurons are, as bars against the threshold.
std::string DepthSection(const audit::AuditReport& r) {
  const checks::CheckResult* deg = r.Find(checks::kLayerDegeneracyName);
  if (deg == nullptr || !deg->ran() || !deg->detail.contains("layers")) return {};
  svg::BarChart bars;
  bars.title = "Mean absolute correlation between the neurons of each hidden layer after the first";
  bars.x = {"layer", "", svg::Scale::kLinear, {}, {}};
  bars.y = {"mean |corr| of neuron activations", "", svg::Scale::kLinear, 0.0, 1.0};  // a correlation's range
  bars.series_name = "at the last snapshot";
  bars.colour = svg::Colour::kBlue;
  for (const json& layer : deg->detail["layers"]) {
    bars.categories.push_back(std::to_string(layer.value("layer", 0)));
    bars.values.push_back(JNum(layer, "mean_abs_corr"));
  }
  bars.levels.push_back({"degeneracy threshold", deg->threshold, svg::Colour::kBlack, svg::Dash::kDashed});
  std::string caption =
      "For each hidden layer after the first, the mean absolute correlation between the activations of its neurons "
      "over the audit rows. Bars reaching the dashed line mean the layer's neurons compute nearly one function: in "
      "networks of depth four or more started from independent random weights, the middle layers do this in the "
      "mean-field limit, and no amount of width or training undoes it.";
  if (!deg->message.empty()) caption += " " + Sentence(deg->message);
  std::string out = "<section id=\"depth\"><h2>Deep layers</h2>\n";
  out += Figure("layer-degeneracy", "Neuron correlation per layer", caption,
                svg::RenderBarChart(bars, "layer-degeneracy", svg::Size{760, 280}));
  return out + "</section>\n";
}

std::string ThresholdsSection(const json& thresholds) {
  if (!thresholds.is_object() || thresholds.empty()) return {};
  std::string out = "<section id=\"thresholds\"><h2>Thresholds used</h2>\n<table class=\"thresholds\"><thead><tr><th>check</th>"
                    "<th>setting</th><th>value</th></tr></thead><tbody>\n";
  for (const auto& [check, fields] : thresholds.items()) {
    if (fields.is_object()) {
      for (const auto& [key, value] : fields.items()) {
        const std::string text = value.is_number() ? Num(value.get<double>()) : value.dump();
        out += fmt::format("<tr><td><code>{}</code></td><td><code>{}</code></td><td class=\"num\">{}</td></tr>\n", E(check), E(key),
                           E(text));
      }
    } else {
      out += fmt::format("<tr><td><code>{}</code></td><td></td><td class=\"num\">{}</td></tr>\n", E(check), E(fields.dump()));
    }
  }
  return out + "</tbody></table></section>\n";
}

}  // namespace

std::string AuditReportToHtml(const audit::AuditReport& r, const HtmlOptions& options) {
  const json j = AuditReportToJson(r);  // the banner's numbers, exactly as the JSON report has them
  const std::string verdict = audit::VerdictToString(r.verdict);
  std::string out = "<!DOCTYPE html>\n<html xmlns=\"http://www.w3.org/1999/xhtml\" lang=\"en\" xml:lang=\"en\">\n<head>\n";
  out += "<meta charset=\"utf-8\"/>\n<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\"/>\n";
  out += fmt::format("<meta name=\"generator\" content=\"{}\"/>\n", E(options.generator));
  out += fmt::format("<title>plaudit audit: {} {} {}</title>\n", E(verdict), kDash, E(r.run));
  out += std::string("<style>") + kStyle + "</style>\n</head>\n<body>\n";
  out += Banner(r, j);
  out += "<main>\n";
  out += ChecksTable(r);
  out += LossSection(r);
  out += GradientSection(r);
  out += DirectionSection(r, options);
  out += ResidualSection(r);
  out += DepthSection(r);
  out += ThresholdsSection(r.thresholds);
  out += "</main>\n";
  out += fmt::format("<footer>Written by {} ({} report). The page is self-contained: every chart is drawn inline and "
                     "nothing is fetched from elsewhere. Colours: the Okabe{}Ito palette, readable with the common colour-vision "
                     "deficiencies; lines also differ by dash pattern.</footer>\n",
                     E(options.generator), kReportFormat, kDash);
  out += "</body>\n</html>\n";
  return out;
}

void WriteFileAtomically(const std::filesystem::path& path, const std::string& text) {
  std::filesystem::path tmp = path;
  tmp += ".tmp";
  {
    std::ofstream f(tmp, std::ios::binary | std::ios::trunc);
    if (!f) raise(ExitCode::kBadData, "{}: cannot create file", tmp.string());
    f.write(text.data(), static_cast<std::streamsize>(text.size()));
    if (!f.flush()) raise(ExitCode::kBadData, "{}: cannot write", tmp.string());
  }
  std::error_code ec;
  std::filesystem::rename(tmp, path, ec);
  if (ec) {
    const std::string why = ec.message();
    std::filesystem::remove(tmp, ec);
    raise(ExitCode::kBadData, "{}: cannot rename into place ({})", path.string(), why);
  }
}

}  // namespace plaudit::report
