// The HTML report and its SVG charts: ticks against hand-worked nice numbers, well-formed XML
// (a small checker here, and Python's xml.dom.minidom when /usr/bin/python3 is there), one SVG
// per chart, nothing fetched from elsewhere, and the numbers shown equal to the JSON report's.
#include <sys/wait.h>

#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <map>
#include <memory>
#include <set>
#include <stdexcept>
#include <string>
#include <vector>

#include <catch2/catch.hpp>
#include <fmt/format.h>

#include "plaudit/audit/audit.h"
#include "plaudit/report/direction_map.h"
#include "plaudit/report/html_report.h"
#include "plaudit/report/json_report.h"
#include "plaudit/report/svg_plot.h"
#include "plaudit/train/teacher.h"
#include "plaudit/train/trainer.h"
#include "support/temp_dir.h"

namespace {

namespace svg = plaudit::report::svg;
using nlohmann::json;
using plaudit::testing::TempDir;

// ---------------------------------------------------------------- a small XML checker

// Enough of XML 1.0 to check well-formedness of what the report writes and to read it back:
// an optional declaration, comments, a DOCTYPE without an internal subset, elements with
// quoted unique attributes, the five predefined entities and character references, CDATA.
// Anything else (mismatched or unclosed tags, bare '&' or '<', text after the root) throws.
struct Node {
  std::string name;
  std::map<std::string, std::string> attrs;
  std::vector<std::unique_ptr<Node>> children;
  std::string text;  // this element's own character data, entities decoded

  std::string Attr(const std::string& key) const {
    const auto it = attrs.find(key);
    return it == attrs.end() ? std::string() : it->second;
  }
  bool HasClass(const std::string& c) const {
    const std::string all = " " + Attr("class") + " ";
    return all.find(" " + c + " ") != std::string::npos;
  }
  std::string AllText() const {
    std::string out = text;
    for (const auto& c : children) out += c->AllText();
    return out;
  }
  void FindAll(const std::string& tag, std::vector<const Node*>& out) const {
    for (const auto& c : children) {
      if (c->name == tag) out.push_back(c.get());
      c->FindAll(tag, out);
    }
  }
  std::vector<const Node*> All(const std::string& tag) const {
    std::vector<const Node*> out;
    FindAll(tag, out);
    return out;
  }
};

class XmlReader {
 public:
  explicit XmlReader(const std::string& s) : s_(s) {}

  std::unique_ptr<Node> Document() {
    if (s_.compare(0, 5, "<?xml") == 0) Skip("?>");
    std::unique_ptr<Node> root;
    while (true) {
      SkipSpace();
      if (pos_ >= s_.size()) break;
      if (Starts("<!--")) {
        Skip("-->");
      } else if (Starts("<!DOCTYPE")) {
        if (root) Fail("DOCTYPE after the root element");
        const std::size_t end = s_.find('>', pos_);
        if (end == std::string::npos || s_.substr(pos_, end - pos_).find('[') != std::string::npos) Fail("bad DOCTYPE");
        pos_ = end + 1;
      } else if (Starts("<")) {
        if (root) Fail("a second root element");
        root = Element();
      } else {
        Fail("text outside the root element");
      }
    }
    if (!root) Fail("no root element");
    return root;
  }

 private:
  [[noreturn]] void Fail(const std::string& why) const {
    throw std::runtime_error(fmt::format("XML not well-formed at byte {}: {} near '{}'", pos_, why, s_.substr(pos_, 40)));
  }
  bool Starts(const char* p) const { return s_.compare(pos_, std::char_traits<char>::length(p), p) == 0; }
  void Skip(const char* until) {
    const std::size_t end = s_.find(until, pos_);
    if (end == std::string::npos) Fail(std::string("missing ") + until);
    pos_ = end + std::char_traits<char>::length(until);
  }
  void SkipSpace() {
    while (pos_ < s_.size() && std::isspace(static_cast<unsigned char>(s_[pos_]))) ++pos_;
  }
  static bool NameChar(char c) {
    return std::isalnum(static_cast<unsigned char>(c)) || c == '-' || c == '_' || c == ':' || c == '.' ||
           (static_cast<unsigned char>(c) & 0x80u);
  }
  std::string Name() {
    const std::size_t start = pos_;
    if (pos_ >= s_.size() || std::isdigit(static_cast<unsigned char>(s_[pos_])) || s_[pos_] == '-' || s_[pos_] == '.') Fail("bad name");
    while (pos_ < s_.size() && NameChar(s_[pos_])) ++pos_;
    if (pos_ == start) Fail("empty name");
    return s_.substr(start, pos_ - start);
  }
  // Entity or character reference at pos_ ('&'), appended decoded.
  void Reference(std::string& out) {
    const std::size_t end = s_.find(';', pos_);
    if (end == std::string::npos || end - pos_ > 12) Fail("bare '&'");
    const std::string ref = s_.substr(pos_ + 1, end - pos_ - 1);
    pos_ = end + 1;
    static const std::map<std::string, std::string> kNamed = {
        {"amp", "&"}, {"lt", "<"}, {"gt", ">"}, {"quot", "\""}, {"apos", "'"}};
    if (const auto it = kNamed.find(ref); it != kNamed.end()) {
      out += it->second;
      return;
    }
    if (ref.size() < 2 || ref[0] != '#') Fail("undefined entity &" + ref + ";");
    const bool hex = ref[1] == 'x';
    const std::string digits = ref.substr(hex ? 2 : 1);
    if (digits.empty() || digits.find_first_not_of(hex ? "0123456789abcdefABCDEF" : "0123456789") != std::string::npos) {
      Fail("bad character reference");
    }
    const unsigned long cp = std::stoul(digits, nullptr, hex ? 16 : 10);
    if (cp == 0 || (cp < 0x20 && cp != 0x9 && cp != 0xA && cp != 0xD) || cp > 0x10FFFF) Fail("character not allowed in XML");
    if (cp < 0x80) {
      out += static_cast<char>(cp);
    } else if (cp < 0x800) {
      out += static_cast<char>(0xC0 | (cp >> 6));
      out += static_cast<char>(0x80 | (cp & 0x3F));
    } else if (cp < 0x10000) {
      out += static_cast<char>(0xE0 | (cp >> 12));
      out += static_cast<char>(0x80 | ((cp >> 6) & 0x3F));
      out += static_cast<char>(0x80 | (cp & 0x3F));
    } else {
      out += static_cast<char>(0xF0 | (cp >> 18));
      out += static_cast<char>(0x80 | ((cp >> 12) & 0x3F));
      out += static_cast<char>(0x80 | ((cp >> 6) & 0x3F));
      out += static_cast<char>(0x80 | (cp & 0x3F));
    }
  }
  void CheckChar(unsigned char c) const {
    if (c < 0x20 && c != '\t' && c != '\n' && c != '\r') Fail("control character");
  }
  std::unique_ptr<Node> Element() {
    ++pos_;  // '<'
    auto node = std::make_unique<Node>();
    node->name = Name();
    while (true) {
      const std::size_t before = pos_;
      SkipSpace();
      if (Starts("/>")) {
        pos_ += 2;
        return node;
      }
      if (Starts(">")) {
        ++pos_;
        break;
      }
      if (pos_ == before) Fail("attributes must be separated by space");
      const std::string key = Name();
      SkipSpace();
      if (!Starts("=")) Fail("attribute without '='");
      ++pos_;
      SkipSpace();
      if (pos_ >= s_.size() || (s_[pos_] != '"' && s_[pos_] != '\'')) Fail("unquoted attribute value");
      const char quote = s_[pos_++];
      std::string value;
      while (pos_ < s_.size() && s_[pos_] != quote) {
        if (s_[pos_] == '<') Fail("'<' in an attribute value");
        if (s_[pos_] == '&') {
          Reference(value);
          continue;
        }
        CheckChar(static_cast<unsigned char>(s_[pos_]));
        value += s_[pos_++];
      }
      if (pos_ >= s_.size()) Fail("unterminated attribute value");
      ++pos_;
      if (!node->attrs.emplace(key, value).second) Fail("duplicate attribute " + key);
    }
    while (true) {
      if (pos_ >= s_.size()) Fail("unclosed <" + node->name + ">");
      if (Starts("</")) {
        pos_ += 2;
        const std::string closing = Name();
        if (closing != node->name) Fail("</" + closing + "> closes <" + node->name + ">");
        SkipSpace();
        if (!Starts(">")) Fail("bad end tag");
        ++pos_;
        return node;
      }
      if (Starts("<!--")) {
        Skip("-->");
      } else if (Starts("<![CDATA[")) {
        const std::size_t start = pos_ + 9;
        Skip("]]>");
        node->text += s_.substr(start, pos_ - 3 - start);
      } else if (Starts("<")) {
        node->children.push_back(Element());
      } else if (s_[pos_] == '&') {
        Reference(node->text);
      } else {
        if (Starts("]]>")) Fail("']]>' in text");
        CheckChar(static_cast<unsigned char>(s_[pos_]));
        node->text += s_[pos_++];
      }
    }
  }

  const std::string& s_;
  std::size_t pos_ = 0;
};

std::unique_ptr<Node> ParseXml(const std::string& text) { return XmlReader(text).Document(); }

const Node* ByAttr(const std::vector<const Node*>& nodes, const std::string& key, const std::string& value) {
  for (const Node* n : nodes) if (n->Attr(key) == value) return n;
  return nullptr;
}

int Status(int raw) { return WIFEXITED(raw) ? WEXITSTATUS(raw) : -1; }

// xml.dom.minidom parses the file: an XML parser that is not ours (expat, via Python).
void CheckWithMinidom(const std::filesystem::path& file) {
  if (!std::filesystem::exists("/usr/bin/python3")) {
    WARN("skipped: /usr/bin/python3 not found, so the page was not parsed by xml.dom.minidom");
    return;
  }
  const std::string cmd = fmt::format("/usr/bin/python3 -c 'import sys, xml.dom.minidom; xml.dom.minidom.parse(sys.argv[1])' '{}'",
                                      file.string());
  REQUIRE(Status(std::system(cmd.c_str())) == 0);
}

// ---------------------------------------------------------------- tick and bin rules

// Expected ticks below were worked by hand from Heckbert's rule ("Nice numbers for graph
// labels", Graphics Gems, 1990): range = nice(hi - lo, ceiling), step = nice(range / (n - 1), rounded).
TEST_CASE("svg: linear ticks follow Heckbert's nice numbers", "[html]") {
  // 0..7.3: range nice(7.3) = 10, step nice(10 / 4 = 2.5) = 2 -> 0, 2, 4, 6.
  const auto a = svg::NiceTicks(0.0, 7.3, 5);
  REQUIRE(a.size() == 4);
  for (std::size_t i = 0; i < a.size(); ++i) CHECK(a[i] == Approx(2.0 * static_cast<double>(i)).margin(1e-12));
  // 0.013..0.087: range nice(0.074) = 0.1, step nice(0.025) = 0.02 -> 0.02 .. 0.08.
  const auto b = svg::NiceTicks(0.013, 0.087, 5);
  REQUIRE(b.size() == 4);
  for (std::size_t i = 0; i < b.size(); ++i) CHECK(b[i] == Approx(0.02 * static_cast<double>(i + 1)).margin(1e-15));
  // -3.7..12.1: range nice(15.8) = 20, step nice(5) = 5 -> 0, 5, 10 (the multiples of 5 in range).
  const auto c = svg::NiceTicks(-3.7, 12.1, 5);
  REQUIRE(c.size() == 3);
  CHECK(c[0] == 0.0);
  CHECK(c[1] == Approx(5.0));
  CHECK(c[2] == Approx(10.0));
  // -1.08..1.08 asking for 3: step nice(nice(2.16) / 2 = 2.5) = 2 leaves only 0 inside; asking
  // for 4 gives step nice(5 / 3) = 2 again, for 5 step nice(1.25) = 1 -> -1, 0, 1.
  CHECK(svg::NiceTicks(-1.08, 1.08, 3) == std::vector<double>{-1.0, 0.0, 1.0});
  CHECK(svg::NiceTicks(2.0, 2.0) == std::vector<double>{2.0});
  CHECK(svg::NiceTicks(std::nan(""), 1.0).empty());

  CHECK(svg::TickLabels(a, svg::Scale::kLinear) == std::vector<std::string>{"0", "2", "4", "6"});
  CHECK(svg::TickLabels(b, svg::Scale::kLinear) == std::vector<std::string>{"0.02", "0.04", "0.06", "0.08"});
}

TEST_CASE("svg: log ticks are decades, thinned or subdivided", "[html]") {
  // 1e-5..3: the powers of ten inside are 1e-5 .. 1e0.
  const auto a = svg::LogTicks(1e-5, 3.0);
  REQUIRE(a.size() == 6);
  for (std::size_t i = 0; i < a.size(); ++i) CHECK(a[i] == Approx(std::pow(10.0, -5.0 + static_cast<double>(i))));
  CHECK(svg::TickLabels(a, svg::Scale::kLog) ==
        std::vector<std::string>{"10\u207B\u2075", "10\u207B\u2074", "10\u207B\u00B3", "10\u207B\u00B2", "10\u207B\u00B9", "1"});
  // 16 decades: every second one, keeping even exponents (10^-12 .. 10^2).
  const auto b = svg::LogTicks(1e-12, 1e3);
  REQUIRE(b.size() == 8);
  CHECK(b.front() == Approx(1e-12));
  CHECK(b.back() == Approx(1e2));
  // Fewer than three powers inside 0.04..0.7: the 1-2-5 multiples 0.05, 0.1, 0.2, 0.5.
  const auto e = svg::LogTicks(0.04, 0.7);
  REQUIRE(e.size() == 4);
  CHECK(e[0] == Approx(0.05));
  CHECK(e[3] == Approx(0.5));
  CHECK(svg::TickLabels(e, svg::Scale::kLog) == std::vector<std::string>{"0.05", "0.1", "0.2", "0.5"});
  // No power of ten inside 0.15..0.8: the 1-2-5 multiples 0.2 and 0.5.
  const auto c = svg::LogTicks(0.15, 0.8);
  REQUIRE(c.size() == 2);
  CHECK(c[0] == Approx(0.2));
  CHECK(c[1] == Approx(0.5));
  // Not even two of those inside 0.3..0.5: the multiples 3, 4, 5 of 0.1.
  const auto d = svg::LogTicks(0.3, 0.5);
  REQUIRE(d.size() == 3);
  CHECK(d[1] == Approx(0.4));
  CHECK(svg::TickLabels({0.1, 1.0, 10.0}, svg::Scale::kLog) == std::vector<std::string>{"0.1", "1", "10"});
}

TEST_CASE("svg: histogram bins as numpy.histogram defines them", "[html]") {
  // numpy.histogram: equal bins over [min, max], all half-open but the last. Worked by hand:
  // 0..9 in 5 bins of width 1.8 -> two values per bin.
  std::vector<double> v;
  for (int i = 0; i < 10; ++i) v.push_back(i);
  const svg::Bins a = svg::Histogram(v, 5);
  CHECK(a.counts == std::vector<int>{2, 2, 2, 2, 2});
  REQUIRE(a.edges.size() == 6);
  CHECK(a.edges[1] == Approx(1.8));
  CHECK(a.edges[5] == 9.0);
  // [1, 2, 1] in 3 bins over [1, 2]: edges 1, 4/3, 5/3, 2; the 2 falls in the closed last bin.
  const svg::Bins b = svg::Histogram({1.0, 2.0, 1.0}, 3);
  CHECK(b.counts == std::vector<int>{2, 0, 1});
  CHECK(b.edges[1] == Approx(4.0 / 3.0));
  // The square-root rule: 100 values -> 10 bins.
  CHECK(svg::Histogram(std::vector<double>(100, 0.0), 0).counts.size() == 10);
}

TEST_CASE("svg: XML escaping", "[html]") {
  CHECK(svg::XmlEscape("a<b & \"c\" 'd'>") == "a&lt;b &amp; &quot;c&quot; &#39;d&#39;&gt;");
  CHECK(svg::XmlEscape("caf\xC3\xA9 \xE2\x86\x92") == "caf\xC3\xA9 \xE2\x86\x92");  // UTF-8 passes
  CHECK(svg::XmlEscape(std::string("x\x01y")) == "x\xEF\xBF\xBDy");  // XML forbids U+0001 even as a reference
  CHECK(svg::XmlEscape("bad \xFF byte") == "bad \xEF\xBF\xBD byte");
  CHECK(svg::XmlEscape("\xC0\xAF") == "\xEF\xBF\xBD\xEF\xBF\xBD");  // an overlong '/' is not UTF-8
}

// ---------------------------------------------------------------- charts on their own

std::vector<std::string> TickTexts(const Node& chart) {
  std::vector<std::string> out;
  for (const Node* g : chart.All("g")) {
    if (!g->HasClass("tick-labels")) continue;
    for (const Node* t : g->All("text")) out.push_back(t->AllText());
  }
  return out;
}

TEST_CASE("svg: a log line chart parses, labels its decades and escapes names", "[html]") {
  svg::LineChart c;
  c.title = "t < u";
  c.x = {"step", "updates", svg::Scale::kLinear, {}, {}};
  c.y = {"loss", "nats", svg::Scale::kLog, {}, {}};
  svg::Line line;
  line.name = "a<b & \"c\"";
  line.x = {0, 1, 2, 3, 4, 5};
  line.y = {3.0, 0.1, std::nan(""), 1e-3, 1e-4, 1e-5};  // the NaN breaks the line in two
  c.lines.push_back(line);
  c.levels.push_back({"L0", 2.0, svg::Colour::kBlack, svg::Dash::kDashed});
  c.windows.push_back({"tail", 3.0, 5.0, svg::Colour::kSkyBlue});
  const auto root = ParseXml(svg::RenderLineChart(c, "x1"));
  CHECK(root->name == "svg");
  CHECK(root->Attr("data-chart") == "x1");
  CHECK(root->All("title").at(0)->AllText() == "t < u");
  const std::vector<std::string> ticks = TickTexts(*root);
  for (const char* want : {"10\u207B\u2075", "10\u207B\u00B3", "1"}) {
    CHECK(std::find(ticks.begin(), ticks.end(), want) != ticks.end());
  }
  const auto series = ByAttr(root->All("g"), "data-name", "a<b & \"c\"");
  REQUIRE(series != nullptr);
  CHECK(series->Attr("data-points") == "5");
  CHECK(series->All("polyline").size() == 2);
  const Node* level = ByAttr(root->All("line"), "data-name", "L0");
  REQUIRE(level != nullptr);
  CHECK(std::stod(level->Attr("data-value")) == 2.0);
  bool legend_has_name = false;
  for (const Node* t : root->All("text")) legend_has_name |= t->AllText() == "a<b & \"c\"";
  CHECK(legend_has_name);
}

TEST_CASE("svg: scatter sizes, equal aspect, bars and an empty chart", "[html]") {
  svg::ScatterChart s;
  s.x = {"u", "", svg::Scale::kLinear, -1.0, 1.0};
  s.y = {"v", "", svg::Scale::kLinear, -1.0, 1.0};
  s.equal_aspect = true;
  svg::PointSet p;
  p.name = "pts";
  p.x = {0.5, -0.5};
  p.y = {0.0, 0.0};
  p.size = {1.0, 4.0};
  s.sets.push_back(p);
  const auto sc = ParseXml(svg::RenderScatterChart(s, "s", svg::Size{500, 300}));
  const Node* frame = nullptr;
  for (const Node* r : sc->All("rect")) if (r->HasClass("frame")) frame = r;
  REQUIRE(frame != nullptr);
  CHECK(std::stod(frame->Attr("width")) == Approx(std::stod(frame->Attr("height"))).margin(0.15));
  const auto circles = ByAttr(sc->All("g"), "data-name", "pts")->All("circle");
  REQUIRE(circles.size() == 2);
  // Area proportional to size: radius 2 + 7 sqrt(size / max) -> 5.5 and 9.
  CHECK(std::stod(circles[0]->Attr("r")) == Approx(5.5).margin(0.05));
  CHECK(std::stod(circles[1]->Attr("r")) == Approx(9.0).margin(0.05));

  svg::BarChart b;
  b.y = {"ratio", "", svg::Scale::kLog, {}, {}};
  b.categories = {"2", "3"};
  b.values = {1e-3, 0.5};
  b.levels.push_back({"threshold", 1e-2, svg::Colour::kBlack, svg::Dash::kDashDot});
  const auto bc = ParseXml(svg::RenderBarChart(b, "b"));
  std::vector<const Node*> bars;
  for (const Node* r : bc->All("rect")) if (r->HasClass("bar")) bars.push_back(r);
  REQUIRE(bars.size() == 2);
  CHECK(std::stod(bars[1]->Attr("height")) > std::stod(bars[0]->Attr("height")));
  CHECK(ByAttr(bc->All("line"), "data-name", "threshold") != nullptr);

  const auto empty = ParseXml(svg::RenderLineChart(svg::LineChart{}, "e"));
  bool says = false;
  for (const Node* t : empty->All("text")) says |= t->HasClass("empty");
  CHECK(says);
}

// ---------------------------------------------------------------- the page of a trained run

// A small student (two hidden layers of 8) on a planted ReLU teacher, with the audit's costly
// parts cut down so the cases run in seconds. Trained once; removed at exit.
struct TrainedRun {
  TempDir dir{"html"};
  std::filesystem::path run = dir / "run";
  plaudit::audit::AuditOptions options;

  TrainedRun() {
    plaudit::train::TeacherOptions teacher;
    teacher.dim = 4;
    teacher.width = 4;
    teacher.rows = 400;
    teacher.seed = 11;
    plaudit::train::TrainOptions train;
    train.widths = {8, 8};
    train.steps = 300;
    train.save_every = 20;
    train.seed = 5;
    plaudit::train::Train(plaudit::train::MakeTeacherData(teacher).data, train, run);
    options.residual_fit.features = 128;
    options.residual_fit.permutations = 99;
    options.residual_fit.new_neurons = 2;
    options.support_spread.probes = 3000;
    options.support_spread.null_replicas = 8;
  }
};

const TrainedRun& SmallRun() {
  static const TrainedRun made;
  return made;
}

// The number a cell shows, read back: must be the JSON value to the 4 significant digits shown.
void CheckShown(const Node& cell, const json& value) {
  if (value.is_null()) {
    CHECK(cell.Attr("data-value").empty());
    return;
  }
  const double v = value.get<double>();
  CHECK(std::stod(cell.Attr("data-value")) == v);  // exact: both are round-trip renderings of one double
  CHECK(std::stod(cell.AllText()) == Approx(v).epsilon(5e-4));
}

const Node* Cell(const Node& row, const std::string& field) {
  return ByAttr(row.All("td"), "data-field", field);
}

TEST_CASE("html: the page of a trained run is well-formed, self-contained and shows the JSON report's numbers", "[html]") {
  const TrainedRun& t = SmallRun();
  const plaudit::io::RunDir run(t.run);
  const plaudit::audit::AuditReport report = plaudit::audit::RunAudit(run, t.options);
  for (const char* name : {"gradient-decay", "support-spread", "residual-fit", "loss-plateau"}) {
    const auto* c = report.Find(name);
    REQUIRE(c != nullptr);
    INFO(c->name << ": " << c->message);
    REQUIRE(c->ran());
  }
  plaudit::report::HtmlOptions html_options;
  html_options.directions = plaudit::report::DirectionMapForRun(run, report, t.options);
  REQUIRE(html_options.directions.has_value());
  const std::string page = plaudit::report::AuditReportToHtml(report, html_options);
  const json j = plaudit::report::AuditReportToJson(report);

  const auto file = t.dir / "report.html";
  plaudit::report::WriteFileAtomically(file, page);
  CHECK_FALSE(std::filesystem::exists(t.dir / "report.html.tmp"));
  CheckWithMinidom(file);
  const auto root = ParseXml(page);
  REQUIRE(root->name == "html");

  SECTION("nothing is fetched from elsewhere") {
    for (const char* banned : {"<script", "<link", "<img", "<iframe", "<object", "@import", "url(", " src=", " href="}) {
      INFO(banned);
      CHECK(page.find(banned) == std::string::npos);
    }
    // The only addresses are the two namespace names, which are never fetched.
    std::size_t http = 0;
    for (std::size_t at = page.find("http"); at != std::string::npos; at = page.find("http", at + 1)) ++http;
    std::size_t ns = 1;  // xhtml, once
    for (std::size_t at = page.find("xmlns=\"http://www.w3.org/2000/svg\""); at != std::string::npos;
         at = page.find("xmlns=\"http://www.w3.org/2000/svg\"", at + 1)) ++ns;
    CHECK(http == ns);
  }

  SECTION("one svg per chart, each with drawn data") {
    const auto figures = root->All("figure");
    const auto svgs = root->All("svg");
    CHECK(figures.size() == svgs.size());
    std::set<std::string> ids;
    for (const Node* f : figures) {
      const auto inner = f->All("svg");
      REQUIRE(inner.size() == 1);
      ids.insert(inner[0]->Attr("data-chart"));
      std::size_t shapes = 0;
      for (const Node* g : inner[0]->All("g")) {
        if (!g->HasClass("series")) continue;
        for (const char* tag : {"polyline", "circle", "rect", "polygon"}) shapes += g->All(tag).size();
      }
      INFO(inner[0]->Attr("data-chart"));
      CHECK(shapes > 0);
      CHECK(TickTexts(*inner[0]).size() >= 4);
      CHECK_FALSE(inner[0]->All("title").empty());
    }
    // The run has three layers: the deep-layer bars (issue: mean |corr| per hidden layer) are drawn.
    CHECK(ids == std::set<std::string>{"loss", "gradient", "gradient-layers", "gradient-decay-bars", "directions-first",
                                       "directions-last", "residual-null", "layer-degeneracy"});
  }

  SECTION("the banner and the checks table hold the JSON report's values") {
    const Node* banner = root->All("header").at(0);
    CHECK(banner->Attr("data-verdict") == j["verdict"].get<std::string>());
    CHECK(ByAttr(banner->All("span"), "data-field", "step")->AllText() == std::to_string(j["step"].get<long long>()));
    CHECK(banner->AllText().find(j["summary"].get<std::string>()) != std::string::npos);
    for (const char* field : {"last_loss", "baseline_loss", "last_loss_relative"}) {
      INFO(field);
      CheckShown(*ByAttr(banner->All("td"), "data-field", field), j[field]);
    }
    CHECK(std::stoll(ByAttr(banner->All("td"), "data-field", "rows_used")->Attr("data-value")) == j["rows"]["used"].get<long long>());
    CHECK(std::stoi(ByAttr(banner->All("td"), "data-field", "gradient_layer")->Attr("data-value")) == j["gradient_layer"].get<int>());

    const auto rows = root->All("tr");
    REQUIRE(j["checks"].size() == 7);
    for (const auto& c : j["checks"]) {
      const std::string name = c["name"].get<std::string>();
      INFO(name);
      const Node* row = ByAttr(rows, "data-check", name);
      REQUIRE(row != nullptr);
      CHECK(Cell(*row, "status")->AllText().find(c["status"].get<std::string>()) != std::string::npos);
      CheckShown(*Cell(*row, "statistic"), c["statistic"]);
      CheckShown(*Cell(*row, "threshold"), c["threshold"]);
      CheckShown(*Cell(*row, "p_value"), c.contains("p_value") ? c["p_value"] : json(nullptr));
    }
  }

  SECTION("the charts draw the JSON report's data") {
    auto chart = [&](const std::string& id) { return ByAttr(root->All("svg"), "data-chart", id); };
    auto check_of = [&](const std::string& name) {
      for (const auto& c : j["checks"]) if (c["name"] == name) return c;
      return json();
    };
    const json plateau = check_of("loss-plateau"), decay = check_of("gradient-decay");
    const json fit = check_of("residual-fit"), spread = check_of("support-spread");

    const Node* loss = chart("loss");
    const Node* l0 = ByAttr(loss->All("line"), "class", "level");
    REQUIRE(l0 != nullptr);
    CHECK(std::stod(l0->Attr("data-value")) == j["baseline_loss"].get<double>());
    const Node* window = ByAttr(loss->All("rect"), "class", "window");
    REQUIRE(window != nullptr);
    CHECK(std::stod(window->Attr("data-from")) == plateau["detail"]["window_start_step"].get<double>());
    CHECK(std::stod(window->Attr("data-to")) == plateau["detail"]["window_end_step"].get<double>());
    CHECK(std::stoul(ByAttr(loss->All("g"), "class", "series")->Attr("data-points")) == report.loss_series.loss.size());

    const Node* grad = chart("gradient");
    CHECK(std::stoul(ByAttr(grad->All("g"), "data-name", "largest entry (sup)")->Attr("data-points")) ==
          decay["detail"]["sup"].size());
    const Node* threshold = ByAttr(grad->All("line"), "class", "level");
    REQUIRE(threshold != nullptr);
    CHECK(std::stod(threshold->Attr("data-value")) ==
          decay["detail"]["max_sup"].get<double>() * decay["detail"]["decay_ratio"].get<double>());
    // Every computed layer (2 and 3 of this three-layer network) has a curve and a bar.
    CHECK(chart("gradient-layers")->All("polyline").size() >= j["trajectory"]["points"][0]["gradient"].size());
    std::size_t bars = 0;
    for (const Node* r : chart("gradient-decay-bars")->All("rect")) bars += r->HasClass("bar");
    CHECK(bars == j["trajectory"]["points"][0]["gradient"].size());

    // One bar per hidden layer after the first, with the degeneracy threshold drawn.
    const json degeneracy = check_of("layer-degeneracy");
    std::size_t corr_bars = 0;
    for (const Node* r : chart("layer-degeneracy")->All("rect")) corr_bars += r->HasClass("bar");
    CHECK(corr_bars == degeneracy["detail"]["layers"].size());
    CHECK(std::stod(ByAttr(chart("layer-degeneracy")->All("line"), "data-name", "degeneracy threshold")->Attr("data-value")) ==
          degeneracy["threshold"].get<double>());

    const Node* null = chart("residual-null");
    long long counted = 0;
    for (const Node* r : null->All("rect")) if (r->HasClass("bar")) counted += std::stoll(r->Attr("data-count"));
    CHECK(counted == static_cast<long long>(fit["detail"]["null_eta_a"].size()));
    CHECK(std::stod(ByAttr(null->All("line"), "data-name", "observed, random features")->Attr("data-value")) ==
          fit["detail"]["eta_a"].get<double>());

    const Node* last = chart("directions-last");
    CHECK(std::stoul(ByAttr(last->All("g"), "data-name", "neuron (area: outgoing weight)")->Attr("data-points")) ==
          spread["detail"]["kept"].get<std::size_t>());
    CHECK(ByAttr(last->All("g"), "data-name", "largest empty cap (centre)") != nullptr);
    CHECK(ByAttr(last->All("g"), "data-name", "best new neuron") != nullptr);
  }
}

TEST_CASE("html: the direction map recomputed from the networks matches support-spread's own points", "[html]") {
  const TrainedRun& t = SmallRun();
  const plaudit::io::RunDir run(t.run);
  const plaudit::audit::AuditReport report = plaudit::audit::RunAudit(run, t.options);
  const auto map = plaudit::report::DirectionMapForRun(run, report, t.options);
  REQUIRE(map.has_value());
  const auto* spread = report.Find("support-spread");
  REQUIRE(spread != nullptr);
  REQUIRE(spread->ran());
  CHECK(map->dims == spread->detail["dims"].get<int>());
  CHECK(map->frame == spread->detail["frame"].get<std::string>());
  // Two computations of one quantity: the check's (projection inside support-spread) and the
  // map's (from the snapshots' networks). 400 audit rows < max_rows, so the frames are the same.
  for (const auto& [points, key] : {std::pair{&map->last, "points_2d"}, std::pair{&map->first, "points_2d_init"}}) {
    const json& expected = spread->detail[key];
    INFO(key);
    REQUIRE(points->x.size() == expected.size());
    for (std::size_t i = 0; i < expected.size(); ++i) {
      CHECK(points->x[i] == Approx(expected[i][0].get<double>()).margin(1e-9));
      CHECK(points->y[i] == Approx(expected[i][1].get<double>()).margin(1e-9));
    }
  }
  // Outgoing weights of the last network equal the check's outgoing_norm.
  const json& norms = spread->detail["outgoing_norm"];
  REQUIRE(map->last.weight.size() == norms.size());
  for (std::size_t i = 0; i < norms.size(); ++i) CHECK(map->last.weight[i] == Approx(norms[i].get<double>()).epsilon(1e-12));
  REQUIRE(map->empty_cap.has_value());
  CHECK(std::hypot((*map->empty_cap)[0], (*map->empty_cap)[1]) <= 1.0 + 1e-12);

  // Without the networks the page falls back to the detail's points, unmarked, and still parses.
  const auto root = ParseXml(plaudit::report::AuditReportToHtml(report));
  const Node* last = ByAttr(root->All("svg"), "data-chart", "directions-last");
  REQUIRE(last != nullptr);
  CHECK(ByAttr(last->All("g"), "data-name", "largest empty cap (centre)") == nullptr);
}

TEST_CASE("html: text from the run is escaped", "[html]") {
  plaudit::audit::AuditReport r;
  r.run = "runs/<a & b> \"q\" 'x'\x01";
  r.summary = "less < more & so on";
  r.checks.push_back(plaudit::checks::Skipped("loss-plateau", 0.01, "no <data> & nothing"));
  const std::string page = plaudit::report::AuditReportToHtml(r);
  const auto root = ParseXml(page);
  CHECK(root->All("title").at(0)->AllText().find("runs/<a & b> \"q\" 'x'\xEF\xBF\xBD") != std::string::npos);
  CHECK(root->AllText().find("less < more & so on") != std::string::npos);
  CHECK(root->AllText().find("No <data> & nothing.") != std::string::npos);  // the skip reason, as a sentence
  CHECK(root->All("svg").empty());  // no data: notes instead of empty charts
}

TEST_CASE("html: plaudit report and audit --html write the same page with the audit's exit code", "[html]") {
  const TrainedRun& t = SmallRun();
  const std::string flags = "--features 128 --permutations 99 --probes 3000";
  const auto a = t.dir / "audit.html", b = t.dir / "report.html", json_out = t.dir / "audit.json";
  const int audit_status = Status(std::system(
      fmt::format("'{}' audit '{}' {} --format json --html '{}' > '{}'", PLAUDIT_CLI, t.run.string(), flags, a.string(),
                  json_out.string()).c_str()));
  const json j = json::parse(plaudit::testing::ReadBytes(json_out));
  const auto verdict = plaudit::audit::VerdictFromString(j["verdict"].get<std::string>());
  REQUIRE(verdict.has_value());
  CHECK(audit_status == static_cast<int>(plaudit::audit::VerdictExitCode(*verdict)));
  const int report_status = Status(std::system(
      fmt::format("'{}' report '{}' {} -o '{}' > /dev/null", PLAUDIT_CLI, t.run.string(), flags, b.string()).c_str()));
  CHECK(report_status == audit_status);
  const std::string page = plaudit::testing::ReadBytes(b);
  CHECK(page == plaudit::testing::ReadBytes(a));
  CHECK_FALSE(std::filesystem::exists(t.dir / "report.html.tmp"));
  CHECK_NOTHROW(ParseXml(page));
  CHECK(ByAttr(ParseXml(page)->All("header"), "data-verdict", j["verdict"].get<std::string>()) != nullptr);

  // No output file named: a usage error; a directory that does not exist: bad output, named.
  CHECK(Status(std::system(fmt::format("'{}' report '{}' 2> /dev/null", PLAUDIT_CLI, t.run.string()).c_str())) == 64);
  const auto err = t.dir / "err.txt";
  CHECK(Status(std::system(fmt::format("'{}' report '{}' {} -o '{}' > /dev/null 2> '{}'", PLAUDIT_CLI, t.run.string(), flags,
                                       (t.dir / "no" / "such" / "r.html").string(), err.string())
                               .c_str())) == 65);
  CHECK(plaudit::testing::ReadBytes(err).find("r.html.tmp") != std::string::npos);
}

}  // namespace
