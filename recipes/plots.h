// Line charts as SVG text, written by our own small writer: panels stacked vertically, each
// with its axes, tick labels at round numbers, a legend and one colour per series. Used for
// the curves of a training run (losses, critic outputs over generator steps).
//
// The text is a standalone SVG 1.1 document (valid XML; titles, labels and series names are
// escaped). Points whose x or y is not finite are left out and break the line there; a point
// with no finite neighbour is drawn as a small dot, so a series of one point shows. Elements
// carry class attributes naming their role ("panel", "title", "frame", "x-tick", "y-tick",
// "x-label", "y-label", "legend", and "series-K" for the lines and dots of the K-th series
// of a panel), so that scripts and tests can find them.
//
// Thread safety: pure functions over values.
#pragma once

#include <string>
#include <vector>

namespace spar {

struct PlotSeries {
  std::string name;       // shown in the legend
  std::vector<double> x;  // x[i], y[i] is one point; the two must have equal lengths
  std::vector<double> y;
};

struct PlotPanel {
  std::string title;    // above the panel
  std::string y_label;  // beside the vertical axis
  std::vector<PlotSeries> series;
};

// Axis ticks at round numbers: multiples of a step 1, 2 or 5 times a power of ten.
struct AxisTicks {
  double low = 0, high = 1;    // the axis range: multiples of step covering the data
  double step = 1;             // 1, 2 or 5 · 10^k
  std::vector<double> values;  // low, low + step, ..., high
  int decimals = 0;            // digits after the point that print every value exactly
};

// Ticks for data in [low, high]: the smallest 1-2-5 step giving at most `most` intervals
// (most ≥ 1), the axis extended outwards to multiples of it. A range of zero width is widened
// to ±1 around 0, or to ±10% of |low| elsewhere. Raises kBadArgument unless
// low ≤ high, both are finite with magnitude at most 1e300, and most ≥ 1.
AxisTicks round_ticks(double low, double high, int most = 6);

// The chart as SVG text: the panels top to bottom, each 820 × 300 pixels, all with `x_label`
// under their horizontal axis and the legend at their right. The x range is shared by all
// panels (so their steps line up); each panel has its own y range. A panel without any
// finite point shows empty axes over [0, 1]. Raises kBadArgument naming the panel and series
// when x and y differ in length, or when there are no panels.
std::string line_chart_svg(const std::vector<PlotPanel>& panels, const std::string& x_label);

// Writes SVG text to `path` atomically (write_file_atomically, engine/atomic_file.h);
// raises kIo naming the path on failure.
void write_svg(const std::string& path, const std::string& text);

}  // namespace spar
