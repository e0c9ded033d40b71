// The procedural fabric swatches (recipes/swatches.h): the dataset's shape, range, labels and
// determinism, and structural checks that fail if a family is drawn as something else.
#include <algorithm>
#include <catch2/catch.hpp>
#include <cmath>
#include <set>
#include <vector>

#include "engine/parallel.h"
#include "recipes/swatches.h"
#include "support.h"

using namespace spar;
using spar::testing::error_kind_of;
using spar::testing::same_bits;

namespace {

// The brightness of swatch i, the plain mean of its three channels, row-major.
std::vector<double> brightness(const Dataset& d, int64_t i) {
  const int64_t size = d.samples.dim(3), plane = size * size;
  const float* s = d.samples.data() + i * 3 * plane;
  std::vector<double> out(static_cast<size_t>(plane));
  for (int64_t k = 0; k < plane; ++k) out[k] = (s[k] + s[plane + k] + s[2 * plane + k]) / 3.0;
  return out;
}

// Mean |b(x + dx, y + dy) − b(x, y)| over the pixels where both lie in the swatch.
double shift_difference(const std::vector<double>& b, int64_t size, int64_t dx, int64_t dy) {
  double sum = 0;
  int64_t n = 0;
  for (int64_t y = std::max<int64_t>(0, -dy); y < size - std::max<int64_t>(0, dy); ++y)
    for (int64_t x = std::max<int64_t>(0, -dx); x < size - std::max<int64_t>(0, dx); ++x) {
      sum += std::abs(b[(y + dy) * size + x + dx] - b[y * size + x]);
      ++n;
    }
  return sum / n;
}

double deviation(const std::vector<double>& b) {
  double mean = 0, square = 0;
  for (double v : b) mean += v / b.size();
  for (double v : b) square += (v - mean) * (v - mean) / b.size();
  return std::sqrt(square);
}

// Repeats both ways with one period P: shifting by P changes little, shifting by P/2 (which
// swaps the two colours of a check or of a houndstooth's 4-and-4 order) changes much more.
bool periodic_both_ways(const std::vector<double>& b, int64_t size) {
  for (int64_t p = 4; p <= size - 8; p += 2) {
    const bool across = shift_difference(b, size, p, 0) < 0.5 * shift_difference(b, size, p / 2, 0);
    const bool down = shift_difference(b, size, 0, p) < 0.5 * shift_difference(b, size, 0, p / 2);
    if (across && down) return true;
  }
  return false;
}

// Stripes: the column means vary far more than the row means, or the other way round (each
// row crosses the same bands, so along the bands only the texture varies, and averaging a
// whole row or column evens that out). Checks have both vary alike.
bool one_way(const std::vector<double>& b, int64_t size) {
  std::vector<double> columns(size, 0.0), rows(size, 0.0);
  for (int64_t y = 0; y < size; ++y)
    for (int64_t x = 0; x < size; ++x) {
      columns[x] += b[y * size + x] / size;
      rows[y] += b[y * size + x] / size;
    }
  const double across = deviation(columns), down = deviation(rows);
  return std::max(across, down) > std::sqrt(10.0) * std::min(across, down);  // variances 10×
}

// Some diagonal step (s pixels across and s up or down, s = 1, 2 or 4: one thread of any
// width the generator uses) changes much less than a step of s across or down: diagonal ribs.
bool diagonal(const std::vector<double>& b, int64_t size) {
  for (int64_t s : {1, 2, 4}) {
    const double straight =
        std::min(shift_difference(b, size, s, 0), shift_difference(b, size, 0, s));
    for (int64_t sign : {-1, 1})
      if (shift_difference(b, size, s, sign * s) < 0.5 * straight) return true;
  }
  return false;
}

int64_t family(const std::string& name) {
  const auto& names = swatch_families();
  return std::find(names.begin(), names.end(), name) - names.begin();
}

}  // namespace

TEST_CASE("swatches come as [count, 3, size, size] in [-1, 1] with balanced labels", "[swatches]") {
  const std::vector<std::string> expected = {"plain", "stripes",     "checks",      "plaid",
                                             "twill", "herringbone", "houndstooth", "dots"};
  CHECK(swatch_families() == expected);
  for (int64_t size : {16, 28, 32, 64}) {
    INFO("size " << size);
    SwatchOptions o;
    o.count = 100;
    o.size = size;
    const Dataset d = make_swatches(o);
    CHECK(d.samples.shape() == Shape{100, 3, size, size});
    CHECK(d.class_names == expected);
    CHECK(d.classes() == 8);
    REQUIRE(d.labels.size() == 100);
    std::vector<int64_t> per_class(8, 0);
    for (int64_t label : d.labels) {
      REQUIRE(label >= 0);
      REQUIRE(label < 8);
      ++per_class[label];
    }
    // 100 = 12 · 8 + 4: four classes get 13, four get 12.
    CHECK(*std::min_element(per_class.begin(), per_class.end()) == 12);
    CHECK(*std::max_element(per_class.begin(), per_class.end()) == 13);
    const float* v = d.samples.data();
    int64_t outside = 0;
    for (int64_t k = 0; k < d.samples.element_count(); ++k) outside += !(v[k] >= -1 && v[k] <= 1);
    CHECK(outside == 0);  // also catches NaN
  }
}

TEST_CASE("swatches are deterministic: same options same bits, another seed other bits",
          "[swatches]") {
  SwatchOptions o;
  o.count = 40;
  const Dataset a = make_swatches(o), b = make_swatches(o);
  CHECK(same_bits(a.samples, b.samples));
  CHECK(a.labels == b.labels);
  // Swatch i does not depend on how many are made.
  o.count = 17;
  CHECK(same_bits(make_swatches(o).samples, a.samples.leading_slice(0, 17)));
  // Nor on the thread count.
  const int threads = thread_count();
  set_thread_count(1);
  o.count = 40;
  const Dataset one_thread = make_swatches(o);
  set_thread_count(threads);
  CHECK(same_bits(one_thread.samples, a.samples));
  o.seed = 2;
  const Dataset c = make_swatches(o);
  CHECK(c.labels == a.labels);
  // With another seed every swatch differs.
  const int64_t plane = 3 * 32 * 32;
  for (int64_t i = 0; i < 40; ++i)
    CHECK_FALSE(std::equal(a.samples.data() + i * plane, a.samples.data() + (i + 1) * plane,
                           c.samples.data() + i * plane));
}

TEST_CASE("each family has the structure that defines it", "[swatches]") {
  SwatchOptions o;
  o.count = 8 * 60;
  o.seed = 7;
  for (int64_t size : {28, 32, 64}) {
    o.size = size;
    const Dataset d = make_swatches(o);
    std::vector<double> spread(8, 0.0);
    for (int64_t i = 0; i < o.count; ++i) {
      const std::vector<double> b = brightness(d, i);
      const int64_t f = d.labels[i];
      const std::string& name = d.class_names[f];
      INFO("size " << size << ", swatch " << i << " (" << name << ")");
      spread[f] += deviation(b) / (o.count / 8);
      // Stripes change across the bands only; checks change both ways.
      if (f == family("stripes")) {
        CHECK(one_way(b, size));
        CHECK_FALSE(periodic_both_ways(b, size));
        CHECK_FALSE(diagonal(b, size));
      }
      if (f == family("checks") || f == family("houndstooth")) {
        CHECK(periodic_both_ways(b, size));
        CHECK_FALSE(one_way(b, size));
      }
      if (f == family("twill")) CHECK(diagonal(b, size));
    }
    // Plain cloth is one colour: its brightness varies far less than any patterned family's.
    for (int64_t f = 1; f < 8; ++f) {
      INFO("size " << size << ": plain " << spread[0] << ", " << d.class_names[f] << " "
                   << spread[f]);
      CHECK(spread[0] < 0.5 * spread[f]);
    }
  }
}

TEST_CASE("make_swatches refuses counts and sizes it cannot make", "[swatches]") {
  std::string message;
  CHECK(error_kind_of([] { make_swatches({0, 32, 1}); }, &message) == ErrorKind::kBadArgument);
  CHECK(message.find("count 0") != std::string::npos);
  CHECK(error_kind_of([] { make_swatches({10, 8, 1}); }, &message) == ErrorKind::kBadArgument);
  CHECK(message.find("size 8") != std::string::npos);
  CHECK(error_kind_of([] { make_swatches({10, 1024, 1}); }) == ErrorKind::kBadArgument);
}
