#include "recipes/plots.h"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <limits>

#include "engine/error.h"
#include "recipes/pictures.h"

namespace spar {

AxisTicks round_ticks(double low, double high, int most) {
  const double kLargest = 1e300;
  if (!(std::abs(low) <= kLargest && std::abs(high) <= kLargest && low <= high) || most < 1) {
    char message[160];
    std::snprintf(message, sizeof message,
                  "round_ticks: range [%g, %g] with at most %d intervals (need finite low <= "
                  "high of magnitude <= 1e300, at least 1 interval)",
                  low, high, most);
    raise(ErrorKind::kBadArgument, message);
  }
  if (low == high) {
    const double d = low == 0 ? 1.0 : std::abs(low) * 0.1;
    low -= d;
    high += d;
  }
  // Start one decade below the step that would give exactly `most` intervals and take the
  // first 1-2-5 step that needs no more than `most`. The slack of 1e-9 steps keeps values
  // that are multiples up to rounding (0.3 / 0.1) from adding an interval.
  const double ideal = high / most - low / most;
  int exponent = static_cast<int>(std::floor(std::log10(ideal))) - 1;
  const int kMantissas[3] = {1, 2, 5};
  AxisTicks t;
  for (;; ++exponent) {
    for (int m : kMantissas) {
      const double step = m * std::pow(10.0, exponent);
      const double first = std::floor(low / step + 1e-9);
      const double last = std::ceil(high / step - 1e-9);
      if (last - first > most) continue;
      t.step = step;
      t.low = first * step;
      t.high = last * step;
      t.decimals = std::max(0, -exponent);
      for (double k = first; k <= last; ++k) t.values.push_back(k == 0 ? 0.0 : k * step);
      return t;
    }
  }
}

namespace {

constexpr double kWidth = 820, kPanelHeight = 300;
constexpr double kLeft = 84, kRight = 620;  // the plot area's horizontal extent
constexpr double kTop = 40, kBottom = 244;  // ... and vertical, within a panel
constexpr double kLegendLeft = 640;
// One colour per series, cycled: chosen to stay apart from each other and from the grey axes.
const char* const kColours[] = {"#1f5fa8", "#d9601a", "#2e8b3e", "#a23aa8",
                                "#c7243a", "#178a8a", "#7a5a22", "#5d5d66"};

// Text as XML character data: the five special characters escaped, control characters other
// than tab, newline and carriage return dropped (XML 1.0 forbids them), and bytes that are not
// part of well-formed UTF-8 replaced by '?'.
std::string escape(const std::string& text) {
  std::string out;
  const size_t n = text.size();
  for (size_t i = 0; i < n;) {
    const unsigned char c = static_cast<unsigned char>(text[i]);
    if (c < 0x80) {
      switch (c) {
        case '&':
          out += "&amp;";
          break;
        case '<':
          out += "&lt;";
          break;
        case '>':
          out += "&gt;";
          break;
        case '"':
          out += "&quot;";
          break;
        case '\'':
          out += "&apos;";
          break;
        default:
          if (c >= 0x20 || c == '\t' || c == '\n' || c == '\r') out += static_cast<char>(c);
      }
      ++i;
      continue;
    }
    // Lead byte: the sequence length and the smallest code point it may encode.
    size_t length = 0;
    uint32_t code = 0, smallest = 0;
    if ((c & 0xE0) == 0xC0)
      length = 2, code = c & 0x1F, smallest = 0x80;
    else if ((c & 0xF0) == 0xE0)
      length = 3, code = c & 0x0F, smallest = 0x800;
    else if ((c & 0xF8) == 0xF0)
      length = 4, code = c & 0x07, smallest = 0x10000;
    bool ok = length > 0 && i + length <= n;
    for (size_t k = 1; ok && k < length; ++k) {
      const unsigned char d = static_cast<unsigned char>(text[i + k]);
      ok = (d & 0xC0) == 0x80;
      code = (code << 6) | (d & 0x3F);
    }
    ok = ok && code >= smallest && code <= 0x10FFFF && !(code >= 0xD800 && code <= 0xDFFF) &&
         code != 0xFFFE && code != 0xFFFF;
    if (ok) {
      out.append(text, i, length);
      i += length;
    } else {
      out += '?';
      ++i;
    }
  }
  return out;
}

std::string number(double v, int decimals) {
  char buffer[64];
  if (v != 0 && (std::abs(v) >= 1e7 || std::abs(v) < 1e-5))
    std::snprintf(buffer, sizeof buffer, "%g", v);
  else
    std::snprintf(buffer, sizeof buffer, "%.*f", decimals, v);
  return buffer;
}

std::string coordinate(double v) {
  char buffer[32];
  std::snprintf(buffer, sizeof buffer, "%.2f", v);
  return buffer;
}

bool finite_point(const PlotSeries& s, size_t i) {
  return std::isfinite(s.x[i]) && std::isfinite(s.y[i]);
}

// The smallest and largest finite values, or false when there are none.
struct Extent {
  double low = std::numeric_limits<double>::infinity();
  double high = -std::numeric_limits<double>::infinity();
  bool any() const { return low <= high; }
  void add(double v) {
    low = std::min(low, v);
    high = std::max(high, v);
  }
};

std::string text_element(const char* role, double x, double y, const std::string& anchor,
                         const std::string& text, const std::string& extra = "") {
  return std::string("<text class=\"") + role + "\" x=\"" + coordinate(x) + "\" y=\"" +
         coordinate(y) + "\" text-anchor=\"" + anchor + "\"" + extra + ">" + escape(text) +
         "</text>\n";
}

std::string line(double x1, double y1, double x2, double y2, const std::string& style) {
  return "<line x1=\"" + coordinate(x1) + "\" y1=\"" + coordinate(y1) + "\" x2=\"" +
         coordinate(x2) + "\" y2=\"" + coordinate(y2) + "\" " + style + "/>\n";
}

}  // namespace

std::string line_chart_svg(const std::vector<PlotPanel>& panels, const std::string& x_label) {
  if (panels.empty()) raise(ErrorKind::kBadArgument, "line_chart_svg: no panels to draw");
  Extent x_extent;
  for (const PlotPanel& panel : panels)
    for (const PlotSeries& s : panel.series) {
      if (s.x.size() != s.y.size())
        raise(ErrorKind::kBadArgument, "line_chart_svg: panel '" + panel.title + "', series '" +
                                           s.name + "': " + std::to_string(s.x.size()) +
                                           " x values but " + std::to_string(s.y.size()) +
                                           " y values");
      for (size_t i = 0; i < s.x.size(); ++i)
        if (finite_point(s, i)) x_extent.add(s.x[i]);
    }
  const AxisTicks xt =
      x_extent.any() ? round_ticks(x_extent.low, x_extent.high, 8) : round_ticks(0, 1, 8);
  auto to_x = [&](double x) {
    return kLeft + (x - xt.low) / (xt.high - xt.low) * (kRight - kLeft);
  };

  const double height = kPanelHeight * static_cast<double>(panels.size());
  std::string svg;
  svg += "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n";
  svg += "<svg xmlns=\"http://www.w3.org/2000/svg\" version=\"1.1\" width=\"" + number(kWidth, 0) +
         "\" height=\"" + number(height, 0) + "\" viewBox=\"0 0 " + number(kWidth, 0) + " " +
         number(height, 0) + "\" font-family=\"sans-serif\" font-size=\"12\">\n";
  svg += "<rect x=\"0\" y=\"0\" width=\"" + number(kWidth, 0) + "\" height=\"" + number(height, 0) +
         "\" fill=\"#ffffff\"/>\n";

  for (size_t p = 0; p < panels.size(); ++p) {
    const PlotPanel& panel = panels[p];
    const double top = kPanelHeight * static_cast<double>(p);
    const double area_top = top + kTop, area_bottom = top + kBottom;
    Extent y_extent;
    for (const PlotSeries& s : panel.series)
      for (size_t i = 0; i < s.x.size(); ++i)
        if (finite_point(s, i)) y_extent.add(s.y[i]);
    const AxisTicks yt =
        y_extent.any() ? round_ticks(y_extent.low, y_extent.high, 6) : round_ticks(0, 1, 6);
    auto to_y = [&](double y) {
      return area_bottom - (y - yt.low) / (yt.high - yt.low) * (area_bottom - area_top);
    };

    svg += "<g class=\"panel\">\n";
    svg += text_element("title", (kLeft + kRight) / 2, top + 24, "middle", panel.title,
                        " font-size=\"15\" font-weight=\"bold\"");
    // Grid, ticks and their labels.
    const std::string grid = "stroke=\"#e4e4e4\" stroke-width=\"1\"";
    const std::string tick = "stroke=\"#666666\" stroke-width=\"1\"";
    for (double v : xt.values) {
      const double x = to_x(v);
      svg += line(x, area_top, x, area_bottom, grid);
      svg += line(x, area_bottom, x, area_bottom + 5, tick);
      svg += text_element("x-tick", x, area_bottom + 19, "middle", number(v, xt.decimals));
    }
    for (double v : yt.values) {
      const double y = to_y(v);
      svg += line(kLeft, y, kRight, y, grid);
      svg += line(kLeft - 5, y, kLeft, y, tick);
      svg += text_element("y-tick", kLeft - 8, y, "end", number(v, yt.decimals),
                          " dominant-baseline=\"middle\"");
    }
    svg += "<rect class=\"frame\" x=\"" + coordinate(kLeft) + "\" y=\"" + coordinate(area_top) +
           "\" width=\"" + coordinate(kRight - kLeft) + "\" height=\"" +
           coordinate(area_bottom - area_top) +
           "\" fill=\"none\" stroke=\"#666666\" stroke-width=\"1\"/>\n";
    svg += text_element("x-label", (kLeft + kRight) / 2, area_bottom + 40, "middle", x_label);
    const double label_y = (area_top + area_bottom) / 2;
    svg += text_element("y-label", 18, label_y, "middle", panel.y_label,
                        " transform=\"rotate(-90 18 " + coordinate(label_y) + ")\"");

    // The series: one polyline per run of finite points, a dot for a run of one point.
    for (size_t k = 0; k < panel.series.size(); ++k) {
      const PlotSeries& s = panel.series[k];
      const std::string colour = kColours[k % (sizeof kColours / sizeof kColours[0])];
      const std::string role = "class=\"series-" + std::to_string(k) + "\" ";
      size_t i = 0;
      while (i < s.x.size()) {
        if (!finite_point(s, i)) {
          ++i;
          continue;
        }
        size_t end = i;
        while (end < s.x.size() && finite_point(s, end)) ++end;
        if (end - i == 1) {
          svg += "<circle " + role + "cx=\"" + coordinate(to_x(s.x[i])) + "\" cy=\"" +
                 coordinate(to_y(s.y[i])) + "\" r=\"2.5\" fill=\"" + colour + "\"/>\n";
        } else {
          svg += "<polyline " + role + "fill=\"none\" stroke=\"" + colour +
                 "\" stroke-width=\"1.5\" stroke-linejoin=\"round\" points=\"";
          for (size_t j = i; j < end; ++j) {
            if (j > i) svg += ' ';
            svg += coordinate(to_x(s.x[j])) + "," + coordinate(to_y(s.y[j]));
          }
          svg += "\"/>\n";
        }
        i = end;
      }
      // Legend entry.
      const double ly = area_top + 10 + 20 * static_cast<double>(k);
      svg += line(kLegendLeft, ly, kLegendLeft + 24, ly,
                  "stroke=\"" + colour + "\" stroke-width=\"2.5\"");
      svg += text_element("legend", kLegendLeft + 32, ly + 4, "start", s.name);
    }
    svg += "</g>\n";
  }
  svg += "</svg>\n";
  return svg;
}

void write_svg(const std::string& path, const std::string& text) {
  write_file_atomically(path, text.data(), text.size());
}

}  // namespace spar
