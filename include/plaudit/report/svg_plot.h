#pragma once
// Inline SVG charts for the HTML report: line charts (optional log y, shaded x windows,
// horizontal level lines), scatter charts (per-point size), bar charts (with threshold levels)
// and histograms (with vertical marks for observed values). Each Render* call returns one
// self-contained <svg> element: axes, nice-number ticks (decades on a log axis), axis labels
// with units and a legend, all text XML-escaped, no external resource (fonts are the reader's
// generic sans-serif).
//
// Colours come from the Okabe-Ito palette (M. Okabe and K. Ito, "Color Universal Design (CUD):
// how to make figures and presentations that are friendly to colorblind people", J*FLY, 2008),
// chosen to stay distinct under protanopia, deuteranopia and tritanopia. Series also differ by
// dash pattern or marker shape, so a chart printed in grey still reads.
#include <cstddef>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

namespace plaudit::report::svg {

// ---------------------------------------------------------------- building blocks

enum class Colour { kBlack, kOrange, kSkyBlue, kBluishGreen, kYellow, kBlue, kVermilion, kReddishPurple, kGrey };

// "#rrggbb" of an Okabe-Ito colour (kGrey is a neutral 50% grey for reference marks).
const char* ColourHex(Colour c);
// The i-th colour of the series cycle: blue, vermilion, bluish green, reddish purple, orange,
// sky blue, black, yellow (yellow last: it is faint on white paper).
Colour SeriesColour(std::size_t index);

enum class Dash { kSolid, kDashed, kDotted, kDashDot };
// The i-th dash pattern of the series cycle (solid, dashed, dotted, dash-dot).
Dash SeriesDash(std::size_t index);

enum class Scale { kLinear, kLog };

struct Axis {
  std::string label;               // what is plotted, e.g. "loss"
  std::string unit;                // shown as "label (unit)"; empty: no unit
  Scale scale = Scale::kLinear;    // log: non-positive values are left out of the chart
  std::optional<double> min, max;  // fixed ends; otherwise the data range, padded by 4%
};

// Text with &, <, >, " and ' replaced by entities, safe in XML text and attribute values.
std::string XmlEscape(std::string_view text);

// Linear ticks by Heckbert's nice-number rule ("Nice numbers for graph labels", Graphics Gems,
// 1990): step = nice(nice(hi - lo) / (target - 1)) from {1, 2, 5} x 10^k, ticks at the multiples
// of step that lie in [lo, hi]; when fewer than two lie there, target is raised (up to 4x) until
// two do. lo == hi gives that one value; non-finite ends give none.
std::vector<double> NiceTicks(double lo, double hi, int target = 5);
// Log ticks for 0 < lo <= hi: the powers of ten in [lo, hi] when there are at least three
// (every 2nd, 3rd ... power when there are more than 8); otherwise the 1-2-5 multiples of powers
// of ten in range if at least two; failing that, every integer multiple 1..9 of a power; failing
// that, NiceTicks.
std::vector<double> LogTicks(double lo, double hi);
// Labels for a set of ticks: linear ticks with as many decimals as the tick step needs; log
// ticks that are powers of ten as 10 with a superscript exponent when any is below 0.01 or
// above 1000, plain numbers otherwise.
std::vector<std::string> TickLabels(const std::vector<double>& ticks, Scale scale);

// Bin edges and counts as numpy.histogram(values, bins) computes them: `bins` equal-width bins
// over [min, max] of the finite values (a zero range widens to [v - 0.5, v + 0.5]); every bin
// half-open except the last, which holds its right edge. bins <= 0: ceil(sqrt(n)) clamped to
// 5..30 (the square-root rule, common practice).
struct Bins {
  std::vector<double> edges;  // bins + 1 values, increasing
  std::vector<int> counts;    // bins values
};
Bins Histogram(const std::vector<double>& values, int bins);

// ---------------------------------------------------------------- charts

struct Size {
  int width = 640;   // viewBox size in CSS pixels; the page scales the chart to its column
  int height = 300;
};

// A horizontal line at y (a threshold, a baseline), drawn across the plot and named in the legend.
struct Level {
  std::string name;
  double y = 0.0;
  Colour colour = Colour::kBlack;
  Dash dash = Dash::kDashed;
};

// A vertical line at x (an observed value).
struct Mark {
  std::string name;
  double x = 0.0;
  Colour colour = Colour::kVermilion;
  Dash dash = Dash::kSolid;
};

// A shaded x interval (a window of steps).
struct Window {
  std::string name;
  double from = 0.0, to = 0.0;
  Colour colour = Colour::kSkyBlue;
};

struct Line {
  std::string name;
  std::vector<double> x, y;  // same length; a non-finite (or, on a log axis, non-positive) y breaks the line
  Colour colour = Colour::kBlue;
  Dash dash = Dash::kSolid;
  double width = 2.0;
};

struct LineChart {
  std::string title;  // the SVG's <title>, read by screen readers
  Axis x, y;
  std::vector<Line> lines;
  std::vector<Level> levels;
  std::vector<Window> windows;
};

enum class Marker { kCircle, kSquare, kDiamond, kTriangle, kCross, kStar };

struct PointSet {
  std::string name;
  std::vector<double> x, y;
  // Optional, one per point: marker area is proportional to size / max size over the chart's
  // sets (radius 2..9 px); empty: every marker the middle size.
  std::vector<double> size;
  double radius = 0.0;  // > 0: every marker this radius in px (size then unused)
  Colour colour = Colour::kBlue;
  Marker marker = Marker::kCircle;
  bool ray_from_origin = false;  // a thin line from (0, 0) to each point: for directions
  double opacity = 0.7;
};

struct ScatterChart {
  std::string title;
  Axis x, y;
  std::vector<PointSet> sets;
  std::optional<double> reference_circle;  // a grey dashed circle of this radius about (0, 0)
  bool equal_aspect = false;               // one unit is as long on both axes
};

struct BarChart {
  std::string title;
  Axis x;  // its label names the categories; scale and limits unused
  Axis y;  // log: bars rise from the bottom of the axis
  std::vector<std::string> categories;
  std::vector<double> values;  // one per category
  std::string series_name;     // legend entry of the bars
  Colour colour = Colour::kBlue;
  std::vector<Level> levels;   // threshold lines
};

struct HistogramChart {
  std::string title;
  Axis x;
  Axis y;  // counts; scale unused (always linear from 0)
  std::vector<double> values;
  int bins = 0;             // 0: the square-root rule (see Histogram)
  std::string series_name;  // legend entry of the bars
  Colour colour = Colour::kSkyBlue;
  std::vector<Mark> marks;  // the x range widens to show every mark
};

// Each returns one <svg> element with class="chart" and data-chart="<id>"; `id` also prefixes
// the element ids inside, so that several charts can share a page. Every data series is a
// <g class="series" data-name="..."> holding its shapes; levels and marks carry data-value.
// A chart with nothing to draw still returns an <svg>, saying so in its middle.
std::string RenderLineChart(const LineChart& chart, const std::string& id, const Size& size = {});
std::string RenderScatterChart(const ScatterChart& chart, const std::string& id, const Size& size = {});
std::string RenderBarChart(const BarChart& chart, const std::string& id, const Size& size = {});
std::string RenderHistogram(const HistogramChart& chart, const std::string& id, const Size& size = {});

}  // namespace plaudit::report::svg
