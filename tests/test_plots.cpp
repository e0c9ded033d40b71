// Line charts (recipes/plots.h): round tick steps, the SVG text's structure, non-finite
// values. tests/reference/check_svg.py (ctest reference_svg) parses a chart with python's XML
// parser and checks every vertex against the data.
#include <unistd.h>

#include <catch2/catch.hpp>
#include <cctype>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <fstream>
#include <iterator>
#include <limits>
#include <vector>

#include "engine/random.h"
#include "recipes/plots.h"
#include "support.h"

using namespace spar;
using spar::testing::error_kind_of;

namespace {

size_t count(const std::string& text, const std::string& what) {
  size_t n = 0;
  for (size_t at = text.find(what); at != std::string::npos; at = text.find(what, at + 1)) ++n;
  return n;
}

// Checks the markup the way an XML parser would at its simplest: every '<' opens a tag that
// closes with '>', start and end tags nest and match by name, there is one root element, and
// every '&' starts one of the five predefined entities (XML 1.0, sections 2.4 and 4.6).
// Returns an empty string or what is wrong.
std::string markup_problem(const std::string& svg) {
  std::vector<std::string> open;
  int roots = 0;
  for (size_t i = 0; i < svg.size(); ++i) {
    if (svg[i] == '&') {
      bool known = false;
      for (const char* e : {"&amp;", "&lt;", "&gt;", "&quot;", "&apos;"})
        known = known || svg.compare(i, std::strlen(e), e) == 0;
      if (!known) return "a bare '&' at byte " + std::to_string(i);
      continue;
    }
    if (svg[i] == '>') return "a bare '>' at byte " + std::to_string(i);
    if (svg[i] != '<') continue;
    const size_t end = svg.find('>', i);
    if (end == std::string::npos) return "an unclosed tag at byte " + std::to_string(i);
    const std::string tag = svg.substr(i + 1, end - i - 1);
    if (tag.find('<') != std::string::npos) return "'<' inside a tag at byte " + std::to_string(i);
    i = end;
    if (tag.empty()) return "an empty tag";
    if (tag[0] == '?') continue;  // the XML declaration
    if (tag[0] == '/') {
      if (open.empty() || open.back() != tag.substr(1))
        return "</" + tag.substr(1) + "> mismatched";
      open.pop_back();
      continue;
    }
    const std::string name = tag.substr(0, tag.find_first_of(" \n/"));
    if (open.empty()) ++roots;
    if (tag.back() != '/') open.push_back(name);
  }
  if (!open.empty()) return "<" + open.back() + "> never closed";
  if (roots != 1) return std::to_string(roots) + " root elements";
  return "";
}

std::vector<double> steps(int n, double scale) {
  std::vector<double> v;
  for (int i = 0; i < n; ++i) v.push_back(i * scale);
  return v;
}

}  // namespace

TEST_CASE("ticks step by 1, 2 or 5 times a power of ten: worked examples", "[plots]") {
  // Worked by hand from the rule in plots.h (the 1-2-5 series, common practice for scales).
  AxisTicks t = round_ticks(0, 1, 6);  // 0.1 would need 10 intervals, 0.2 needs 5
  CHECK(t.step == Approx(0.2));
  CHECK(t.low == 0);
  CHECK(t.high == Approx(1));
  CHECK(t.values.size() == 6);
  CHECK(t.decimals == 1);
  t = round_ticks(-3.7, 12.2, 6);  // 2 would need −4..14, 9 intervals; 5 needs −5..15, 4
  CHECK(t.step == Approx(5));
  CHECK(t.low == Approx(-5));
  CHECK(t.high == Approx(15));
  CHECK(t.decimals == 0);
  t = round_ticks(0.001, 0.0037, 6);  // 0.0002 needs 5..19, 14; 0.0005 needs 2..8, 6
  CHECK(t.step == Approx(0.0005));
  CHECK(t.low == Approx(0.001));
  CHECK(t.high == Approx(0.004));
  CHECK(t.decimals == 4);
  t = round_ticks(250, 250, 6);  // widened to 225..275; 5 needs 45..55, 10; 10 needs 22..28
  CHECK(t.step == Approx(10));
  CHECK(t.low == Approx(220));
  CHECK(t.high == Approx(280));
  t = round_ticks(0, 0, 6);  // widened to −1..1; 0.2 needs 10; 0.5 needs 4
  CHECK(t.step == Approx(0.5));
  CHECK(t.values.front() == Approx(-1));
  CHECK(t.values.back() == Approx(1));
  CHECK(t.values[2] == 0.0);
  CHECK_FALSE(std::signbit(t.values[2]));  // printed "0", not "-0"
}

TEST_CASE("ticks cover the data with the smallest 1-2-5 step that fits", "[plots]") {
  Rng rng(11, 0);
  for (int trial = 0; trial < 2000; ++trial) {
    const double exponent = rng.next_uniform() * 16 - 8;  // data from 1e-8 to 1e8 wide
    const double centre = (rng.next_uniform() * 2 - 1) * std::pow(10.0, exponent) * 3;
    const double width = std::pow(10.0, exponent) * rng.next_uniform();
    const double low = centre - width * rng.next_uniform(), high = low + width;
    const int most = 2 + static_cast<int>(rng.below(9));
    INFO("range [" << low << ", " << high << "], at most " << most << " intervals");
    const AxisTicks t = round_ticks(low, high, most);
    const double power = std::pow(10.0, std::floor(std::log10(t.step) + 1e-9));
    const double mantissa = t.step / power;
    CHECK((std::abs(mantissa - 1) < 1e-9 || std::abs(mantissa - 2) < 1e-9 ||
           std::abs(mantissa - 5) < 1e-9));
    CHECK(t.low <= low + 1e-12 * std::abs(low));
    CHECK(t.high >= high - 1e-12 * std::abs(high));
    const int intervals = static_cast<int>(t.values.size()) - 1;
    CHECK(intervals <= most);
    CHECK(intervals >= 1);
    // The next smaller 1-2-5 step needs more than `most` intervals.
    const double smaller = std::abs(mantissa - 1) < 1e-9   ? 0.5 * power
                           : std::abs(mantissa - 2) < 1e-9 ? power
                                                           : 2 * power;
    if (high > low)
      CHECK(std::ceil(high / smaller - 1e-9) - std::floor(low / smaller + 1e-9) > most);
    // Every value is a multiple of the step and prints exactly with `decimals` digits.
    for (double v : t.values) {
      CHECK(std::abs(v / t.step - std::round(v / t.step)) < 1e-6);
      if (std::abs(v) >= 1e-5 && std::abs(v) < 1e7) {
        char buffer[64];
        std::snprintf(buffer, sizeof buffer, "%.*f", t.decimals, v);
        CHECK(std::abs(std::strtod(buffer, nullptr) - v) <= 1e-9 * t.step);
      }
    }
  }
  CHECK(error_kind_of([] { round_ticks(2, 1); }) == ErrorKind::kBadArgument);
  CHECK(error_kind_of([] { round_ticks(0, std::nan("")); }) == ErrorKind::kBadArgument);
  CHECK(error_kind_of([] { round_ticks(0, INFINITY); }) == ErrorKind::kBadArgument);
  CHECK(error_kind_of([] { round_ticks(0, 1, 0); }) == ErrorKind::kBadArgument);
}

TEST_CASE("a chart is balanced markup with escaped text and no non-finite numbers", "[plots]") {
  std::vector<double> y = steps(10, 0.5);
  y[4] = std::nan("");
  y[7] = -INFINITY;
  const std::vector<PlotPanel> panels = {
      {"a<b & \"c\" 'd'", "loss > 0", {{"critic", steps(10, 1), y}, {"empty", {}, {}}}},
      {"bad \xff byte \x01", "score", {{"real", {3}, {0.25}}}},
  };
  const std::string svg = line_chart_svg(panels, "steps");
  INFO(svg);
  CHECK(markup_problem(svg).empty());
  CHECK(svg.find("a&lt;b &amp; &quot;c&quot; &apos;d&apos;") != std::string::npos);
  CHECK(svg.find("loss &gt; 0") != std::string::npos);
  CHECK(svg.find("bad ? byte ") != std::string::npos);  // invalid UTF-8 and control dropped
  CHECK(svg.find('\x01') == std::string::npos);
  // NaN at 4 and −∞ at 7 leave runs 0..3, 5..6 and 8..9: three lines; the lone point of
  // "real" is a dot.
  CHECK(count(svg, "<polyline") == 3);
  CHECK(count(svg, "<circle") == 1);
  CHECK(count(svg, "class=\"panel\"") == 2);
  CHECK(count(svg, "class=\"legend\"") == 3);  // the empty series is still named
  // No attribute value spells a non-finite number (any case: "nan", "-inf", "NaN", ...).
  for (size_t at = svg.find("=\""); at != std::string::npos; at = svg.find("=\"", at + 1)) {
    std::string value = svg.substr(at + 2, svg.find('"', at + 2) - at - 2);
    for (char& c : value) c = static_cast<char>(std::tolower(static_cast<unsigned char>(c)));
    INFO("attribute value " << value);
    CHECK(value.find("nan") == std::string::npos);
    CHECK(value.find("inf") == std::string::npos);
  }
  // The markup checker itself rejects what it should.
  CHECK_FALSE(markup_problem("<svg><g></svg></g>").empty());
  CHECK_FALSE(markup_problem("<svg>a & b</svg>").empty());
  CHECK_FALSE(markup_problem("<svg><text>a<b</text></svg>").empty());
}

TEST_CASE("panels without finite points still draw, mismatched series are refused", "[plots]") {
  const std::string svg = line_chart_svg(
      {{"nothing yet", "loss", {{"critic", {0, 1}, {std::nan(""), INFINITY}}}}}, "steps");
  CHECK(markup_problem(svg).empty());
  CHECK(count(svg, "<polyline") == 0);
  CHECK(count(svg, "class=\"x-tick\"") >= 2);
  std::string message;
  CHECK(error_kind_of(
            [] {
              line_chart_svg({{"p", "y", {{"broken", {1, 2, 3}, {1, 2}}}}}, "x");
            },
            &message) == ErrorKind::kBadArgument);
  CHECK(message.find("broken") != std::string::npos);
  CHECK(error_kind_of([] { line_chart_svg({}, "x"); }) == ErrorKind::kBadArgument);
}

TEST_CASE("write_svg writes the text to the file", "[plots]") {
  const std::string path = "/tmp/spar-test-plots-" + std::to_string(::getpid()) + ".svg";
  const std::string svg = line_chart_svg({{"losses", "loss", {{"a", {0, 1}, {1, 2}}}}}, "steps");
  write_svg(path, svg);
  std::ifstream in(path, std::ios::binary);
  CHECK(std::string((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>()) == svg);
  std::remove(path.c_str());
  CHECK(error_kind_of([&] { write_svg("/nonexistent-folder-for-spar/c.svg", svg); }) ==
        ErrorKind::kIo);
}
