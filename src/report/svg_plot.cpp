#include "plaudit/report/svg_plot.h"

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <limits>

#include <fmt/format.h>

namespace plaudit::report::svg {
namespace {

constexpr double kPi = 3.14159265358979323846;
constexpr double kTickFont = 11.0;
constexpr double kLabelFont = 12.5;
constexpr double kCharWidth = 0.6;   // average advance of a sans-serif glyph, in ems (estimate)
constexpr double kRangePad = 0.04;   // share of the span added at a free axis end
constexpr double kSnap = 1e-9;       // relative slack when deciding a tick lies in range
constexpr const char* kGridColour = "#e3e3e3";
constexpr const char* kAxisColour = "#333333";

// ---------------------------------------------------------------- text

// Code points of a UTF-8 string, for width estimates.
std::size_t Glyphs(std::string_view s) {
  std::size_t n = 0;
  for (unsigned char c : s) n += (c & 0xC0u) != 0x80u;
  return n;
}

double TextWidth(std::string_view s, double font) { return static_cast<double>(Glyphs(s)) * font * kCharWidth; }

std::string F(double v) { return fmt::format("{:.1f}", v); }

std::string Exact(double v) { return std::isfinite(v) ? fmt::format("{:.17g}", v) : std::string(); }

std::string AxisTitle(const Axis& a) { return a.unit.empty() ? a.label : fmt::format("{} ({})", a.label, a.unit); }

const char* DashArray(Dash d) {
  switch (d) {
    case Dash::kSolid: return "";
    case Dash::kDashed: return "7 4";
    case Dash::kDotted: return "2 3";
    case Dash::kDashDot: return "8 3 2 3";
  }
  return "";
}

std::string DashAttr(Dash d) {
  const std::string a = DashArray(d);
  return a.empty() ? std::string() : fmt::format(" stroke-dasharray=\"{}\"", a);
}

// ---------------------------------------------------------------- ticks

double NiceNumber(double x, bool round) {
  const double e = std::floor(std::log10(x));
  const double p = std::pow(10.0, e);
  const double f = x / p;
  double nf = 10.0;
  if (round) {
    if (f < 1.5) nf = 1.0;
    else if (f < 3.0) nf = 2.0;
    else if (f < 7.0) nf = 5.0;
  } else {
    if (f <= 1.0) nf = 1.0;
    else if (f <= 2.0) nf = 2.0;
    else if (f <= 5.0) nf = 5.0;
  }
  return nf * p;
}

bool IsPowerOfTen(double v, int* exponent) {
  if (!(v > 0.0)) return false;
  const double e = std::log10(v);
  const double r = std::round(e);
  if (std::fabs(e - r) > 1e-9) return false;
  *exponent = static_cast<int>(r);
  return true;
}

std::string Superscript(int e) {
  static const char* kDigits[] = {"\u2070", "\u00B9", "\u00B2", "\u00B3", "\u2074",
                                  "\u2075", "\u2076", "\u2077", "\u2078", "\u2079"};
  std::string out = e < 0 ? "\u207B" : "";
  const std::string digits = std::to_string(std::abs(e));
  for (char c : digits) out += kDigits[c - '0'];
  return out;
}

// ---------------------------------------------------------------- axes

struct Range {
  double lo = 0.0, hi = 1.0;  // in data units
};

// The axis range: the finite (log: positive) values, fixed ends where the axis has them, free
// ends padded. `floor_zero`: a linear axis that starts at 0 (counts, bars).
Range ResolveRange(const Axis& a, const std::vector<double>& values, bool floor_zero = false) {
  const bool log = a.scale == Scale::kLog;
  double lo = std::numeric_limits<double>::infinity();
  double hi = -lo;
  for (double v : values) {
    if (!std::isfinite(v) || (log && !(v > 0.0))) continue;
    lo = std::min(lo, v);
    hi = std::max(hi, v);
  }
  if (floor_zero && !log) lo = std::min(lo, 0.0), hi = std::max(hi, 0.0);
  if (!(lo <= hi)) {  // nothing to show
    lo = log ? 1.0 : 0.0;
    hi = log ? 10.0 : 1.0;
  }
  const bool fix_lo = a.min.has_value() && (!log || *a.min > 0.0);
  const bool fix_hi = a.max.has_value() && (!log || *a.max > 0.0);
  if (fix_lo) lo = *a.min;
  if (fix_hi) hi = *a.max;
  if (log) {
    double llo = std::log10(lo), lhi = std::log10(hi);
    if (!(lhi > llo)) {
      llo -= 0.5;
      lhi += 0.5;
    } else {
      const double pad = kRangePad * (lhi - llo);
      if (!fix_lo) llo -= pad;
      if (!fix_hi) lhi += pad;
    }
    return {std::pow(10.0, llo), std::pow(10.0, lhi)};
  }
  if (!(hi > lo)) {
    const double d = lo != 0.0 ? 0.1 * std::fabs(lo) : 0.5;
    return {lo - d, hi + d};
  }
  const double pad = kRangePad * (hi - lo);
  if (!fix_lo && !(floor_zero && lo == 0.0)) lo -= pad;
  if (!fix_hi) hi += pad;
  return {lo, hi};
}

// Data value -> pixel along one axis.
struct AxisMap {
  Scale scale = Scale::kLinear;
  Range range;
  double p0 = 0.0, p1 = 1.0;  // pixels of range.lo and range.hi

  double T(double v) const { return scale == Scale::kLog ? std::log10(v) : v; }
  bool Drawable(double v) const { return std::isfinite(v) && (scale == Scale::kLinear || v > 0.0); }
  double operator()(double v) const {
    const double a = T(range.lo), b = T(range.hi);
    const double f = (T(v) - a) / (b - a);
    const double px = p0 + f * (p1 - p0);
    return std::clamp(px, std::min(p0, p1), std::max(p0, p1));
  }
  std::vector<double> Ticks(int target) const {
    std::vector<double> ticks = scale == Scale::kLog ? LogTicks(range.lo, range.hi) : NiceTicks(range.lo, range.hi, target);
    return ticks;
  }
};

// ---------------------------------------------------------------- legend

enum class Swatch { kLine, kBox, kMarker };

struct LegendItem {
  std::string name;
  Swatch swatch = Swatch::kLine;
  Colour colour = Colour::kBlack;
  Dash dash = Dash::kSolid;
  Marker marker = Marker::kCircle;
  double opacity = 1.0;
};

constexpr double kLegendRow = 18.0;
constexpr double kSwatch = 22.0;

double ItemWidth(const LegendItem& it) { return kSwatch + 6.0 + TextWidth(it.name, kTickFont) + 16.0; }

int LegendRows(const std::vector<LegendItem>& items, double width) {
  if (items.empty()) return 0;
  int rows = 1;
  double x = 0.0;
  for (const auto& it : items) {
    const double w = ItemWidth(it);
    if (x > 0.0 && x + w > width) {
      ++rows;
      x = 0.0;
    }
    x += w;
  }
  return rows;
}

std::string MarkerShape(Marker m, double cx, double cy, double r, Colour colour, double opacity, const std::string& extra) {
  const char* hex = ColourHex(colour);
  const std::string fill = fmt::format("fill=\"{}\" fill-opacity=\"{:.2f}\" stroke=\"{}\" stroke-width=\"1\"", hex, opacity, hex);
  switch (m) {
    case Marker::kCircle:
      return fmt::format("<circle cx=\"{}\" cy=\"{}\" r=\"{}\" {}{}/>", F(cx), F(cy), F(r), fill, extra);
    case Marker::kSquare:
      return fmt::format("<rect x=\"{}\" y=\"{}\" width=\"{}\" height=\"{}\" {}{}/>", F(cx - 0.9 * r), F(cy - 0.9 * r),
                         F(1.8 * r), F(1.8 * r), fill, extra);
    case Marker::kDiamond:
      return fmt::format("<polygon points=\"{},{} {},{} {},{} {},{}\" {}{}/>", F(cx), F(cy - 1.3 * r), F(cx + 1.3 * r), F(cy),
                         F(cx), F(cy + 1.3 * r), F(cx - 1.3 * r), F(cy), fill, extra);
    case Marker::kTriangle:
      return fmt::format("<polygon points=\"{},{} {},{} {},{}\" {}{}/>", F(cx), F(cy - 1.3 * r), F(cx + 1.15 * r),
                         F(cy + 0.7 * r), F(cx - 1.15 * r), F(cy + 0.7 * r), fill, extra);
    case Marker::kCross:
      return fmt::format("<path d=\"M{},{}L{},{}M{},{}L{},{}\" fill=\"none\" stroke=\"{}\" stroke-width=\"2.5\"{}/>",
                         F(cx - r), F(cy - r), F(cx + r), F(cy + r), F(cx - r), F(cy + r), F(cx + r), F(cy - r), hex, extra);
    case Marker::kStar: {
      std::string pts;
      for (int k = 0; k < 10; ++k) {
        const double rad = (k % 2 == 0 ? 1.5 : 0.65) * r;
        const double a = -kPi / 2.0 + k * kPi / 5.0;
        pts += fmt::format("{}{},{}", k ? " " : "", F(cx + rad * std::cos(a)), F(cy + rad * std::sin(a)));
      }
      return fmt::format("<polygon points=\"{}\" fill=\"{}\" fill-opacity=\"{:.2f}\" stroke=\"{}\" stroke-width=\"1\"{}/>",
                         pts, hex, opacity, kAxisColour, extra);
    }
  }
  return {};
}

std::string RenderLegend(const std::vector<LegendItem>& items, double x0, double y0, double width) {
  if (items.empty()) return {};
  std::string out = "<g class=\"legend\">";
  double x = 0.0, y = y0;
  for (const auto& it : items) {
    const double w = ItemWidth(it);
    if (x > 0.0 && x + w > width) {
      x = 0.0;
      y += kLegendRow;
    }
    const double sx = x0 + x, cy = y + kLegendRow / 2.0;
    const char* hex = ColourHex(it.colour);
    switch (it.swatch) {
      case Swatch::kLine:
        out += fmt::format("<line x1=\"{}\" y1=\"{}\" x2=\"{}\" y2=\"{}\" stroke=\"{}\" stroke-width=\"2.5\"{}/>", F(sx), F(cy),
                           F(sx + kSwatch), F(cy), hex, DashAttr(it.dash));
        break;
      case Swatch::kBox:
        out += fmt::format("<rect x=\"{}\" y=\"{}\" width=\"{}\" height=\"10\" fill=\"{}\" fill-opacity=\"{:.2f}\" stroke=\"{}\"/>",
                           F(sx), F(cy - 5.0), F(kSwatch), hex, it.opacity, hex);
        break;
      case Swatch::kMarker:
        out += MarkerShape(it.marker, sx + kSwatch / 2.0, cy, 4.5, it.colour, std::max(it.opacity, 0.6), "");
        break;
    }
    out += fmt::format("<text x=\"{}\" y=\"{}\" font-size=\"{}\" dominant-baseline=\"middle\">{}</text>", F(sx + kSwatch + 6.0),
                       F(cy + 0.5), kTickFont, XmlEscape(it.name));
    x += w;
  }
  return out + "</g>";
}

// ---------------------------------------------------------------- the frame every chart shares

struct Frame {
  double width = 0, height = 0;
  double left = 0, right = 0, top = 0, bottom = 0;  // plot area, pixels
  AxisMap x, y;
};

std::string MaxLabel(const std::vector<std::string>& labels) {
  std::string best;
  for (const auto& l : labels) if (Glyphs(l) > Glyphs(best)) best = l;
  return best;
}

// Lays out the plot area for a legend and y tick labels, then maps the ranges onto it.
Frame MakeFrame(const Size& size, const Axis& xa, Range xr, const Axis& ya, Range yr, const std::vector<LegendItem>& legend,
                std::vector<double>* yticks, std::vector<std::string>* ylabels) {
  Frame f;
  f.width = std::max(size.width, 160);
  f.height = std::max(size.height, 120);
  f.y.scale = ya.scale;
  f.y.range = yr;
  const int rows = LegendRows(legend, f.width - 20.0);
  f.top = 10.0 + rows * kLegendRow + (rows ? 4.0 : 0.0);
  f.bottom = f.height - 44.0;
  f.y.p0 = f.bottom;
  f.y.p1 = f.top;
  *yticks = f.y.Ticks(std::max(3, static_cast<int>((f.bottom - f.top) / 50.0)));
  *ylabels = TickLabels(*yticks, ya.scale);
  f.left = 24.0 + TextWidth(MaxLabel(*ylabels), kTickFont) + 10.0;
  f.right = f.width - 16.0;
  f.x.scale = xa.scale;
  f.x.range = xr;
  f.x.p0 = f.left;
  f.x.p1 = f.right;
  return f;
}

// Square data units: shrink one side of the plot area and centre it.
void EqualAspect(Frame& f) {
  const double ux = (f.right - f.left) / (f.x.range.hi - f.x.range.lo);
  const double uy = (f.bottom - f.top) / (f.y.range.hi - f.y.range.lo);
  if (ux > uy) {
    const double w = uy * (f.x.range.hi - f.x.range.lo);
    f.left += ((f.right - f.left) - w) / 2.0;
    f.right = f.left + w;
  } else {
    const double h = ux * (f.y.range.hi - f.y.range.lo);
    f.top += ((f.bottom - f.top) - h) / 2.0;
    f.bottom = f.top + h;
  }
  f.x.p0 = f.left;
  f.x.p1 = f.right;
  f.y.p0 = f.bottom;
  f.y.p1 = f.top;
}

std::string Open(const std::string& id, const std::string& title, const Frame& f) {
  return fmt::format(
      "<svg xmlns=\"http://www.w3.org/2000/svg\" class=\"chart\" data-chart=\"{0}\" viewBox=\"0 0 {1} {2}\" width=\"{1}\" "
      "height=\"{2}\" role=\"img\" aria-labelledby=\"{0}-title\" font-family=\"sans-serif\" font-size=\"{3}\">"
      "<title id=\"{0}-title\">{4}</title>",
      XmlEscape(id), f.width, f.height, kTickFont, XmlEscape(title));
}

// The axis-title font, shrunk (to 8 px at least) so that the title fits `room` pixels.
double FittedFont(const std::string& text, double room) {
  const double wide = TextWidth(text, kLabelFont);
  return wide <= room ? kLabelFont : std::max(8.0, kLabelFont * room / wide);
}

// Grid, axes, ticks with labels and axis titles. `xticks`/`xlabels` empty: ticks from the map.
std::string Axes(const Frame& f, const Axis& xa, const Axis& ya, const std::vector<double>& yticks,
                 const std::vector<std::string>& ylabels, std::vector<double> xticks = {}, std::vector<std::string> xlabels = {}) {
  if (xticks.empty()) {
    xticks = f.x.Ticks(std::max(3, static_cast<int>((f.right - f.left) / 90.0)));
    xlabels = TickLabels(xticks, xa.scale);
  }
  std::string grid = "<g class=\"grid\" stroke=\"" + std::string(kGridColour) + "\" stroke-width=\"1\">";
  std::string ticks = "<g class=\"ticks\" stroke=\"" + std::string(kAxisColour) + "\" stroke-width=\"1\">";
  std::string labels = "<g class=\"tick-labels\" fill=\"" + std::string(kAxisColour) + "\">";
  for (std::size_t i = 0; i < yticks.size(); ++i) {
    const double py = f.y(yticks[i]);
    grid += fmt::format("<line x1=\"{}\" y1=\"{}\" x2=\"{}\" y2=\"{}\"/>", F(f.left), F(py), F(f.right), F(py));
    ticks += fmt::format("<line x1=\"{}\" y1=\"{}\" x2=\"{}\" y2=\"{}\"/>", F(f.left - 5.0), F(py), F(f.left), F(py));
    labels += fmt::format("<text x=\"{}\" y=\"{}\" text-anchor=\"end\" dominant-baseline=\"middle\">{}</text>", F(f.left - 8.0),
                          F(py), XmlEscape(ylabels[i]));
  }
  for (std::size_t i = 0; i < xticks.size(); ++i) {
    const double px = f.x(xticks[i]);
    grid += fmt::format("<line x1=\"{}\" y1=\"{}\" x2=\"{}\" y2=\"{}\"/>", F(px), F(f.top), F(px), F(f.bottom));
    ticks += fmt::format("<line x1=\"{}\" y1=\"{}\" x2=\"{}\" y2=\"{}\"/>", F(px), F(f.bottom), F(px), F(f.bottom + 5.0));
    labels += fmt::format("<text x=\"{}\" y=\"{}\" text-anchor=\"middle\">{}</text>", F(px), F(f.bottom + 17.0),
                          XmlEscape(xlabels[i]));
  }
  std::string out = grid + "</g>" + ticks + "</g>" + labels + "</g>";
  out += fmt::format("<rect class=\"frame\" x=\"{}\" y=\"{}\" width=\"{}\" height=\"{}\" fill=\"none\" stroke=\"{}\"/>", F(f.left),
                     F(f.top), F(f.right - f.left), F(f.bottom - f.top), kAxisColour);
  const std::string xtitle = AxisTitle(xa), ytitle = AxisTitle(ya);
  out += fmt::format("<text class=\"axis-label\" x=\"{}\" y=\"{}\" text-anchor=\"middle\" font-size=\"{:.1f}\">{}</text>",
                     F((f.left + f.right) / 2.0), F(f.bottom + 36.0), FittedFont(xtitle, f.width - 20.0),
                     XmlEscape(xtitle));
  const double yx = 14.0, yy = (f.top + f.bottom) / 2.0;
  out += fmt::format(
      "<text class=\"axis-label\" x=\"{0}\" y=\"{1}\" text-anchor=\"middle\" font-size=\"{2:.1f}\" "
      "transform=\"rotate(-90 {0} {1})\">{3}</text>",
      F(yx), F(yy), FittedFont(ytitle, f.bottom - f.top + 30.0), XmlEscape(ytitle));
  return out;
}

std::string NothingToDraw(const Frame& f) {
  return fmt::format("<text class=\"empty\" x=\"{}\" y=\"{}\" text-anchor=\"middle\" font-size=\"{}\" fill=\"{}\">"
                     "nothing to draw</text>",
                     F((f.left + f.right) / 2.0), F((f.top + f.bottom) / 2.0), kLabelFont, kAxisColour);
}

std::string Levels(const Frame& f, const std::vector<Level>& levels) {
  std::string out;
  for (const auto& l : levels) {
    if (!f.y.Drawable(l.y)) continue;
    const double py = f.y(l.y);
    out += fmt::format(
        "<line class=\"level\" data-name=\"{}\" data-value=\"{}\" x1=\"{}\" y1=\"{}\" x2=\"{}\" y2=\"{}\" stroke=\"{}\" "
        "stroke-width=\"1.8\"{}/>",
        XmlEscape(l.name), Exact(l.y), F(f.left), F(py), F(f.right), F(py), ColourHex(l.colour), DashAttr(l.dash));
  }
  return out;
}

void AddLevelLegend(const std::vector<Level>& levels, std::vector<LegendItem>& legend) {
  for (const auto& l : levels) legend.push_back({l.name, Swatch::kLine, l.colour, l.dash, Marker::kCircle, 1.0});
}

}  // namespace

// ---------------------------------------------------------------- public helpers

const char* ColourHex(Colour c) {
  switch (c) {  // Okabe & Ito (2008)
    case Colour::kBlack: return "#000000";
    case Colour::kOrange: return "#E69F00";
    case Colour::kSkyBlue: return "#56B4E9";
    case Colour::kBluishGreen: return "#009E73";
    case Colour::kYellow: return "#F0E442";
    case Colour::kBlue: return "#0072B2";
    case Colour::kVermilion: return "#D55E00";
    case Colour::kReddishPurple: return "#CC79A7";
    case Colour::kGrey: return "#808080";
  }
  return "#000000";
}

Colour SeriesColour(std::size_t index) {
  static constexpr Colour kCycle[] = {Colour::kBlue,   Colour::kVermilion, Colour::kBluishGreen, Colour::kReddishPurple,
                                      Colour::kOrange, Colour::kSkyBlue,   Colour::kBlack,       Colour::kYellow};
  return kCycle[index % (sizeof(kCycle) / sizeof(kCycle[0]))];
}

Dash SeriesDash(std::size_t index) {
  static constexpr Dash kCycle[] = {Dash::kSolid, Dash::kDashed, Dash::kDotted, Dash::kDashDot};
  return kCycle[index % 4];
}

std::string XmlEscape(std::string_view text) {
  std::string out;
  out.reserve(text.size());
  const auto* s = reinterpret_cast<const unsigned char*>(text.data());
  const std::size_t n = text.size();
  for (std::size_t i = 0; i < n;) {
    const unsigned char c = s[i];
    if (c < 0x80) {
      switch (c) {
        case '&': out += "&amp;"; break;
        case '<': out += "&lt;"; break;
        case '>': out += "&gt;"; break;
        case '"': out += "&quot;"; break;
        case '\'': out += "&#39;"; break;
        default:
          // XML 1.0 allows no other control characters, not even as references.
          if (c >= 0x20 || c == '\t' || c == '\n' || c == '\r') out += static_cast<char>(c);
          else out += "\xEF\xBF\xBD";
      }
      ++i;
      continue;
    }
    // Copy a well-formed UTF-8 sequence; replace anything else by U+FFFD.
    std::size_t len = 0;
    std::uint32_t cp = 0;
    if ((c & 0xE0u) == 0xC0u) len = 2, cp = c & 0x1Fu;
    else if ((c & 0xF0u) == 0xE0u) len = 3, cp = c & 0x0Fu;
    else if ((c & 0xF8u) == 0xF0u) len = 4, cp = c & 0x07u;
    bool ok = len > 0 && i + len <= n;
    for (std::size_t k = 1; ok && k < len; ++k) {
      ok = (s[i + k] & 0xC0u) == 0x80u;
      cp = (cp << 6) | (s[i + k] & 0x3Fu);
    }
    static constexpr std::uint32_t kMinForLength[] = {0, 0, 0x80, 0x800, 0x10000};
    ok = ok && cp >= kMinForLength[len] && cp <= 0x10FFFF && !(cp >= 0xD800 && cp <= 0xDFFF) && cp != 0xFFFE && cp != 0xFFFF;
    if (ok) {
      out.append(text.substr(i, len));
      i += len;
    } else {
      out += "\xEF\xBF\xBD";
      ++i;
    }
  }
  return out;
}

std::vector<double> NiceTicks(double lo, double hi, int target) {
  if (!std::isfinite(lo) || !std::isfinite(hi)) return {};
  if (lo > hi) std::swap(lo, hi);
  if (lo == hi) return {lo};
  std::vector<double> ticks;
  // A tight range can hold a single multiple of the coarse step: ask for more ticks until two fit.
  for (int n = std::max(2, target); n <= 4 * std::max(2, target) && ticks.size() < 2; ++n) {
    ticks.clear();
    const double range = NiceNumber(hi - lo, false);
    const double step = NiceNumber(range / (n - 1), true);
    const double first = std::ceil(lo / step - kSnap);
    for (double k = first; k * step <= hi + kSnap * step; k += 1.0) {
      const double v = k * step;
      ticks.push_back(std::fabs(v) < kSnap * step ? 0.0 : v);
    }
  }
  return ticks;
}

std::vector<double> LogTicks(double lo, double hi) {
  if (!(lo > 0.0) || !std::isfinite(lo) || !std::isfinite(hi) || hi < lo) return NiceTicks(lo, hi);
  const int e0 = static_cast<int>(std::ceil(std::log10(lo) - kSnap));
  const int e1 = static_cast<int>(std::floor(std::log10(hi) + kSnap));
  std::vector<double> ticks;
  if (e1 - e0 + 1 >= 3) {
    const int count = e1 - e0 + 1;
    const int stride = (count + 7) / 8;
    // Keep the labelled exponents multiples of the stride, so 10^0 stays when it is in range.
    int start = e0;
    while (((start % stride) + stride) % stride != 0) ++start;
    for (int e = start; e <= e1; e += stride) ticks.push_back(std::pow(10.0, e));
    return ticks;
  }
  auto multiples = [&](std::initializer_list<int> ms) {
    std::vector<double> out;
    for (int e = e0 - 1; e <= e1 + 1; ++e) {
      for (int m : ms) {
        const double v = m * std::pow(10.0, e);
        if (v >= lo * (1.0 - kSnap) && v <= hi * (1.0 + kSnap)) out.push_back(v);
      }
    }
    return out;
  };
  ticks = multiples({1, 2, 5});
  if (ticks.size() >= 2) return ticks;
  ticks = multiples({1, 2, 3, 4, 5, 6, 7, 8, 9});
  if (ticks.size() >= 2) return ticks;
  return NiceTicks(lo, hi);
}

std::vector<std::string> TickLabels(const std::vector<double>& ticks, Scale scale) {
  std::vector<std::string> labels;
  if (ticks.empty()) return labels;
  if (scale == Scale::kLog) {
    bool all_powers = true, extreme = false;
    for (double t : ticks) {
      int e = 0;
      if (!IsPowerOfTen(t, &e)) all_powers = false;
      else if (e < -2 || e > 3) extreme = true;
    }
    for (double t : ticks) {
      int e = 0;
      if (all_powers && extreme && IsPowerOfTen(t, &e)) labels.push_back(e == 0 ? "1" : e == 1 ? "10" : "10" + Superscript(e));
      else labels.push_back(fmt::format("{:g}", t));
    }
    return labels;
  }
  if (ticks.size() == 1) return {fmt::format("{:g}", ticks[0])};
  double step = 0.0;
  for (std::size_t i = 1; i < ticks.size(); ++i) step = std::max(step, ticks[i] - ticks[i - 1]);
  double magnitude = 0.0;
  for (double t : ticks) magnitude = std::max(magnitude, std::fabs(t));
  if (step > 0.0 && (magnitude >= 1e6 || step < 1e-4)) {
    for (double t : ticks) labels.push_back(fmt::format("{:.3g}", t));
    return labels;
  }
  const int decimals = step > 0.0 ? std::max(0, -static_cast<int>(std::floor(std::log10(step) + kSnap))) : 3;
  for (double t : ticks) {
    std::string s = fmt::format("{:.{}f}", t, decimals);
    if (s.find_first_not_of("-0.") == std::string::npos && s[0] == '-') s.erase(0, 1);  // no "-0"
    labels.push_back(s);
  }
  return labels;
}

Bins Histogram(const std::vector<double>& values, int bins) {
  std::vector<double> v;
  for (double x : values) if (std::isfinite(x)) v.push_back(x);
  if (bins <= 0) bins = std::clamp(static_cast<int>(std::ceil(std::sqrt(static_cast<double>(v.size())))), 5, 30);
  Bins out;
  double lo = 0.0, hi = 1.0;
  if (!v.empty()) {
    lo = *std::min_element(v.begin(), v.end());
    hi = *std::max_element(v.begin(), v.end());
  }
  if (!(hi > lo)) lo -= 0.5, hi += 0.5;
  out.edges.resize(static_cast<std::size_t>(bins) + 1);
  for (int i = 0; i <= bins; ++i) out.edges[static_cast<std::size_t>(i)] = lo + (hi - lo) * i / bins;
  out.edges.back() = hi;
  out.counts.assign(static_cast<std::size_t>(bins), 0);
  for (double x : v) {
    int b = static_cast<int>((x - lo) / (hi - lo) * bins);
    b = std::clamp(b, 0, bins - 1);
    // Settle rounding against the edges themselves, as numpy does.
    while (b > 0 && x < out.edges[static_cast<std::size_t>(b)]) --b;
    while (b < bins - 1 && x >= out.edges[static_cast<std::size_t>(b) + 1]) ++b;
    ++out.counts[static_cast<std::size_t>(b)];
  }
  return out;
}

// ---------------------------------------------------------------- line chart

std::string RenderLineChart(const LineChart& c, const std::string& id, const Size& size) {
  std::vector<double> xs, ys;
  bool any = false;
  for (const auto& l : c.lines) {
    for (std::size_t i = 0; i < std::min(l.x.size(), l.y.size()); ++i) {
      const bool ok = std::isfinite(l.x[i]) && std::isfinite(l.y[i]) && (c.y.scale == Scale::kLinear || l.y[i] > 0.0) &&
                      (c.x.scale == Scale::kLinear || l.x[i] > 0.0);
      if (!ok) continue;
      xs.push_back(l.x[i]);
      ys.push_back(l.y[i]);
      any = true;
    }
  }
  for (const auto& w : c.windows) xs.push_back(w.from), xs.push_back(w.to);
  for (const auto& l : c.levels) ys.push_back(l.y);

  std::vector<LegendItem> legend;
  for (const auto& l : c.lines) legend.push_back({l.name, Swatch::kLine, l.colour, l.dash, Marker::kCircle, 1.0});
  AddLevelLegend(c.levels, legend);
  for (const auto& w : c.windows) legend.push_back({w.name, Swatch::kBox, w.colour, Dash::kSolid, Marker::kCircle, 0.3});

  std::vector<double> yticks;
  std::vector<std::string> ylabels;
  const Frame f = MakeFrame(size, c.x, ResolveRange(c.x, xs), c.y, ResolveRange(c.y, ys), legend, &yticks, &ylabels);
  std::string out = Open(id, c.title, f);
  for (const auto& w : c.windows) {
    if (!f.x.Drawable(w.from) || !f.x.Drawable(w.to)) continue;
    const double a = f.x(std::min(w.from, w.to)), b = f.x(std::max(w.from, w.to));
    out += fmt::format(
        "<rect class=\"window\" data-name=\"{}\" data-from=\"{}\" data-to=\"{}\" x=\"{}\" y=\"{}\" width=\"{}\" height=\"{}\" "
        "fill=\"{}\" fill-opacity=\"0.3\"/>",
        XmlEscape(w.name), Exact(w.from), Exact(w.to), F(a), F(f.top), F(std::max(b - a, 1.0)), F(f.bottom - f.top),
        ColourHex(w.colour));
  }
  out += Axes(f, c.x, c.y, yticks, ylabels);
  if (!any) out += NothingToDraw(f);
  for (const auto& l : c.lines) {
    const std::size_t n = std::min(l.x.size(), l.y.size());
    std::size_t drawn = 0;
    for (std::size_t i = 0; i < n; ++i) drawn += f.x.Drawable(l.x[i]) && f.y.Drawable(l.y[i]);
    out += fmt::format("<g class=\"series\" data-name=\"{}\" data-points=\"{}\" fill=\"none\" stroke=\"{}\" stroke-width=\"{}\"{}>",
                       XmlEscape(l.name), drawn, ColourHex(l.colour), F(l.width), DashAttr(l.dash));
    std::string segment;
    std::size_t in_segment = 0;
    double lone_x = 0, lone_y = 0;
    auto flush = [&] {
      if (in_segment == 1) {
        out += fmt::format("<circle cx=\"{}\" cy=\"{}\" r=\"2.5\" fill=\"{}\" stroke=\"none\"/>", F(lone_x), F(lone_y),
                           ColourHex(l.colour));
      } else if (in_segment > 1) {
        out += "<polyline points=\"" + segment + "\"/>";
      }
      segment.clear();
      in_segment = 0;
    };
    for (std::size_t i = 0; i < n; ++i) {
      if (!f.x.Drawable(l.x[i]) || !f.y.Drawable(l.y[i])) {
        flush();
        continue;
      }
      lone_x = f.x(l.x[i]);
      lone_y = f.y(l.y[i]);
      segment += fmt::format("{}{},{}", in_segment ? " " : "", F(lone_x), F(lone_y));
      ++in_segment;
    }
    flush();
    // Few points: show where the samples are (snapshots), not only the joining segments.
    if (drawn > 1 && drawn <= 60) {
      for (std::size_t i = 0; i < n; ++i) {
        if (!f.x.Drawable(l.x[i]) || !f.y.Drawable(l.y[i])) continue;
        out += fmt::format("<circle cx=\"{}\" cy=\"{}\" r=\"2\" fill=\"{}\" stroke=\"none\"/>", F(f.x(l.x[i])), F(f.y(l.y[i])),
                           ColourHex(l.colour));
      }
    }
    out += "</g>";
  }
  out += Levels(f, c.levels);
  out += RenderLegend(legend, 10.0, 8.0, f.width - 20.0);
  return out + "</svg>";
}

// ---------------------------------------------------------------- scatter chart

std::string RenderScatterChart(const ScatterChart& c, const std::string& id, const Size& size) {
  std::vector<double> xs, ys;
  double max_size = 0.0;
  for (const auto& s : c.sets) {
    for (std::size_t i = 0; i < std::min(s.x.size(), s.y.size()); ++i) {
      xs.push_back(s.x[i]);
      ys.push_back(s.y[i]);
    }
    if (s.radius <= 0.0) {
      for (double v : s.size) if (std::isfinite(v)) max_size = std::max(max_size, std::fabs(v));
    }
  }
  const bool any = !xs.empty();
  if (c.reference_circle) {
    xs.push_back(-*c.reference_circle), xs.push_back(*c.reference_circle);
    ys.push_back(-*c.reference_circle), ys.push_back(*c.reference_circle);
  }
  std::vector<LegendItem> legend;
  for (const auto& s : c.sets) legend.push_back({s.name, Swatch::kMarker, s.colour, Dash::kSolid, s.marker, s.opacity});

  std::vector<double> yticks;
  std::vector<std::string> ylabels;
  Frame f = MakeFrame(size, c.x, ResolveRange(c.x, xs), c.y, ResolveRange(c.y, ys), legend, &yticks, &ylabels);
  if (c.equal_aspect) EqualAspect(f);
  std::string out = Open(id, c.title, f);
  out += Axes(f, c.x, c.y, yticks, ylabels);
  if (!any) out += NothingToDraw(f);
  if (c.reference_circle && c.x.scale == Scale::kLinear && c.y.scale == Scale::kLinear) {
    const double r = *c.reference_circle;
    out += fmt::format("<ellipse class=\"reference\" cx=\"{}\" cy=\"{}\" rx=\"{}\" ry=\"{}\" fill=\"none\" stroke=\"{}\" "
                       "stroke-width=\"1\" stroke-dasharray=\"4 3\"/>",
                       F(f.x(0.0)), F(f.y(0.0)), F(std::fabs(f.x(r) - f.x(0.0))), F(std::fabs(f.y(r) - f.y(0.0))),
                       ColourHex(Colour::kGrey));
  }
  for (const auto& s : c.sets) {
    const std::size_t n = std::min(s.x.size(), s.y.size());
    out += fmt::format("<g class=\"series\" data-name=\"{}\" data-points=\"{}\">", XmlEscape(s.name), n);
    for (std::size_t i = 0; i < n; ++i) {
      if (!f.x.Drawable(s.x[i]) || !f.y.Drawable(s.y[i])) continue;
      const double px = f.x(s.x[i]), py = f.y(s.y[i]);
      if (s.ray_from_origin && f.x.Drawable(0.0) && f.y.Drawable(0.0)) {
        out += fmt::format("<line x1=\"{}\" y1=\"{}\" x2=\"{}\" y2=\"{}\" stroke=\"{}\" stroke-width=\"1.5\"/>", F(f.x(0.0)),
                           F(f.y(0.0)), F(px), F(py), ColourHex(s.colour));
      }
      double r = 5.0;
      if (s.radius > 0.0) r = s.radius;
      else if (i < s.size.size() && max_size > 0.0 && std::isfinite(s.size[i])) r = 2.0 + 7.0 * std::sqrt(std::fabs(s.size[i]) / max_size);
      out += MarkerShape(s.marker, px, py, r, s.colour, s.opacity, "");
    }
    out += "</g>";
  }
  out += RenderLegend(legend, 10.0, 8.0, f.width - 20.0);
  return out + "</svg>";
}

// ---------------------------------------------------------------- bar chart

std::string RenderBarChart(const BarChart& c, const std::string& id, const Size& size) {
  std::vector<double> ys = c.values;
  for (const auto& l : c.levels) ys.push_back(l.y);
  const std::size_t n = std::min(c.categories.size(), c.values.size());
  std::vector<LegendItem> legend;
  if (!c.series_name.empty()) legend.push_back({c.series_name, Swatch::kBox, c.colour, Dash::kSolid, Marker::kCircle, 0.85});
  AddLevelLegend(c.levels, legend);

  Axis xa = c.x;
  xa.scale = Scale::kLinear;
  std::vector<double> yticks;
  std::vector<std::string> ylabels;
  const Frame f = MakeFrame(size, xa, Range{0.0, static_cast<double>(std::max<std::size_t>(n, 1))}, c.y,
                            ResolveRange(c.y, ys, /*floor_zero=*/true), legend, &yticks, &ylabels);
  std::vector<double> xticks;
  std::vector<std::string> xlabels;
  for (std::size_t i = 0; i < n; ++i) {
    xticks.push_back(static_cast<double>(i) + 0.5);
    xlabels.push_back(c.categories[i]);
  }
  std::string out = Open(id, c.title, f);
  out += Axes(f, xa, c.y, yticks, ylabels, xticks, xlabels.empty() ? std::vector<std::string>{} : xlabels);
  if (n == 0) out += NothingToDraw(f);
  const double band = (f.right - f.left) / static_cast<double>(std::max<std::size_t>(n, 1));
  const double base = c.y.scale == Scale::kLog ? f.bottom : f.y(0.0);
  out += fmt::format("<g class=\"series\" data-name=\"{}\" data-points=\"{}\">", XmlEscape(c.series_name), n);
  for (std::size_t i = 0; i < n; ++i) {
    if (!f.y.Drawable(c.values[i])) continue;
    const double top = f.y(c.values[i]);
    const double x = f.left + band * (static_cast<double>(i) + 0.2);
    out += fmt::format(
        "<rect class=\"bar\" data-category=\"{}\" data-value=\"{}\" x=\"{}\" y=\"{}\" width=\"{}\" height=\"{}\" fill=\"{}\" "
        "fill-opacity=\"0.85\"/>",
        XmlEscape(c.categories[i]), Exact(c.values[i]), F(x), F(std::min(top, base)), F(0.6 * band), F(std::max(std::fabs(base - top), 0.5)),
        ColourHex(c.colour));
  }
  out += "</g>";
  out += Levels(f, c.levels);
  out += RenderLegend(legend, 10.0, 8.0, f.width - 20.0);
  return out + "</svg>";
}

// ---------------------------------------------------------------- histogram

std::string RenderHistogram(const HistogramChart& c, const std::string& id, const Size& size) {
  const Bins bins = Histogram(c.values, c.bins);
  std::size_t finite = 0;
  for (double v : c.values) finite += std::isfinite(v);
  std::vector<double> xs = bins.edges;
  for (const auto& m : c.marks) xs.push_back(m.x);
  std::vector<double> ys(bins.counts.begin(), bins.counts.end());

  std::vector<LegendItem> legend;
  if (!c.series_name.empty()) legend.push_back({c.series_name, Swatch::kBox, c.colour, Dash::kSolid, Marker::kCircle, 0.85});
  for (const auto& m : c.marks) legend.push_back({m.name, Swatch::kLine, m.colour, m.dash, Marker::kCircle, 1.0});

  Axis xa = c.x, ya = c.y;
  xa.scale = Scale::kLinear;
  ya.scale = Scale::kLinear;
  std::vector<double> yticks;
  std::vector<std::string> ylabels;
  Frame f = MakeFrame(size, xa, ResolveRange(xa, xs), ya, ResolveRange(ya, ys, /*floor_zero=*/true), legend, &yticks, &ylabels);
  // Counts are whole numbers: drop fractional ticks.
  std::vector<double> whole;
  std::vector<std::string> whole_labels;
  for (std::size_t i = 0; i < yticks.size(); ++i) {
    if (yticks[i] == std::floor(yticks[i])) {
      whole.push_back(yticks[i]);
      whole_labels.push_back(fmt::format("{}", static_cast<long long>(yticks[i])));
    }
  }
  std::string out = Open(id, c.title, f);
  out += Axes(f, xa, ya, whole, whole_labels);
  if (finite == 0) out += NothingToDraw(f);
  out += fmt::format("<g class=\"series\" data-name=\"{}\" data-points=\"{}\" fill=\"{}\" fill-opacity=\"0.85\" stroke=\"#ffffff\" "
                     "stroke-width=\"0.5\">",
                     XmlEscape(c.series_name), finite, ColourHex(c.colour));
  if (finite > 0) {
    for (std::size_t b = 0; b < bins.counts.size(); ++b) {
      const double x0 = f.x(bins.edges[b]), x1 = f.x(bins.edges[b + 1]);
      const double top = f.y(bins.counts[b]);
      out += fmt::format("<rect class=\"bar\" data-from=\"{}\" data-to=\"{}\" data-count=\"{}\" x=\"{}\" y=\"{}\" width=\"{}\" "
                         "height=\"{}\"/>",
                         Exact(bins.edges[b]), Exact(bins.edges[b + 1]), bins.counts[b], F(x0), F(top), F(std::max(x1 - x0, 0.8)),
                         F(f.bottom - top));
    }
  }
  out += "</g>";
  for (const auto& m : c.marks) {
    if (!std::isfinite(m.x)) continue;
    const double px = f.x(m.x);
    out += fmt::format(
        "<line class=\"mark\" data-name=\"{}\" data-value=\"{}\" x1=\"{}\" y1=\"{}\" x2=\"{}\" y2=\"{}\" stroke=\"{}\" "
        "stroke-width=\"2.5\"{}/>",
        XmlEscape(m.name), Exact(m.x), F(px), F(f.top), F(px), F(f.bottom), ColourHex(m.colour), DashAttr(m.dash));
  }
  out += RenderLegend(legend, 10.0, 8.0, f.width - 20.0);
  return out + "</svg>";
}

}  // namespace plaudit::report::svg
