// Pictures (recipes/pictures.h): the grid arithmetic and pixel mapping stated in the header,
// scatter plots, and PNG files. The PNG bytes are decoded independently by
// tests/reference/check_png.py (ctest reference_png); here only the signature is checked.
#include <unistd.h>

#include <catch2/catch.hpp>
#include <cmath>
#include <cstdio>
#include <fstream>
#include <iterator>
#include <limits>

#include "recipes/pictures.h"
#include "support.h"

using namespace spar;
using spar::testing::error_kind_of;

namespace {

Tensor<float> ramp(int64_t n, int64_t c, int64_t h, int64_t w) {
  std::vector<float> v(static_cast<size_t>(n * c * h * w));
  for (size_t i = 0; i < v.size(); ++i) v[i] = -1.0f + 2.0f * static_cast<float>(i % 11) / 10;
  return Tensor<float>::from_values({n, c, h, w}, v);
}

std::string scratch_path(const std::string& name) {
  return "/tmp/spar-test-pictures-" + std::to_string(::getpid()) + "-" + name;
}

}  // namespace

TEST_CASE("the tile grid has the size the layout rule gives", "[pictures]") {
  // width = cols·W·zoom + (cols + 1)·gap, height = rows·H·zoom + (rows + 1)·gap, with
  // cols = min(N, columns) and rows = ceil(N / columns), counted by hand below.
  struct Case {
    int64_t n, c, h, w, columns, gap, zoom, width, height;
  };
  const Case cases[] = {
      {5, 1, 4, 6, 3, 2, 1, 3 * 6 + 4 * 2, 2 * 4 + 3 * 2},  // 3 + 2 tiles
      {6, 3, 4, 6, 3, 2, 1, 26, 14},                        // exactly 2 full rows
      {7, 3, 4, 6, 3, 0, 1, 18, 12},                        // no gap, 3 rows
      {2, 1, 8, 8, 10, 1, 3, 2 * 24 + 3, 24 + 2},           // fewer images than columns
      {1, 1, 1, 1, 1, 5, 1, 11, 11},
  };
  for (const Case& t : cases) {
    INFO("N " << t.n << ", columns " << t.columns << ", gap " << t.gap << ", zoom " << t.zoom);
    const Picture p = tile_pictures(ramp(t.n, t.c, t.h, t.w), t.columns, t.gap, t.zoom);
    CHECK(p.width == t.width);
    CHECK(p.height == t.height);
    CHECK(p.channels == t.c);
    CHECK(p.pixels.size() == static_cast<size_t>(t.width * t.height * t.c));
  }
}

TEST_CASE("image values map linearly from [-1, 1] to 0..255, clamped", "[pictures]") {
  // The affine map b = round((v + 1)·255/2), halves up: −1 → 0, 1 → 255, 0 → 127.5 → 128.
  CHECK(pixel_byte(-1.0f) == 0);
  CHECK(pixel_byte(1.0f) == 255);
  CHECK(pixel_byte(0.0f) == 128);
  CHECK(pixel_byte(0.5f) == 191);  // 191.25
  CHECK(pixel_byte(-0.5f) == 64);  // 63.75
  CHECK(pixel_byte(3.0f) == 255);  // clamped
  CHECK(pixel_byte(-7.0f) == 0);
  CHECK(pixel_byte(std::numeric_limits<float>::infinity()) == 255);
  CHECK(pixel_byte(-std::numeric_limits<float>::infinity()) == 0);
  CHECK(pixel_byte(std::nanf("")) == 0);
  for (int b = 0; b <= 255; ++b) {  // each byte's own value in [−1, 1] maps back to it
    INFO("byte " << b);
    CHECK(pixel_byte(static_cast<float>(b / 127.5 - 1)) == b);
  }
}

TEST_CASE("each image lands in its cell, zoomed by repetition, channels interleaved",
          "[pictures]") {
  // Two RGB 2×3 images (H 2, W 3) in 2 columns, gap 1, zoom 2.
  const int64_t h = 2, w = 3, gap = 1, zoom = 2;
  std::vector<float> v(2 * 3 * h * w);
  for (size_t i = 0; i < v.size(); ++i) v[i] = static_cast<float>(i) / 36.0f * 2 - 1;
  const Tensor<float> images = Tensor<float>::from_values({2, 3, h, w}, v);
  const Picture p = tile_pictures(images, 2, gap, zoom);
  for (int64_t n = 0; n < 2; ++n)
    for (int64_t y = 0; y < h * zoom; ++y)
      for (int64_t x = 0; x < w * zoom; ++x)
        for (int64_t c = 0; c < 3; ++c) {
          const int64_t px = gap + n * (w * zoom + gap) + x, py = gap + y;
          INFO("image " << n << " x " << x << " y " << y << " channel " << c);
          CHECK(p.at(px, py, c) == pixel_byte(images.at({n, c, y / zoom, x / zoom})));
        }
  // The edge, the gap between the tiles and the corners are background.
  for (int64_t c = 0; c < 3; ++c) {
    CHECK(p.at(0, 0, c) == kTileBackground);
    CHECK(p.at(gap + w * zoom, gap + 1, c) == kTileBackground);
    CHECK(p.at(p.width - 1, p.height - 1, c) == kTileBackground);
  }
}

TEST_CASE("tile_pictures rejects what it cannot lay out", "[pictures]") {
  CHECK(error_kind_of([] { tile_pictures(ramp(2, 2, 4, 4), 2); }) == ErrorKind::kBadShape);
  CHECK(error_kind_of([] {
          tile_pictures(Tensor<float>::zeros({2, 16}), 2);
        }) == ErrorKind::kBadShape);
  CHECK(error_kind_of([] { tile_pictures(Tensor<float>(), 2); }) == ErrorKind::kBadShape);
  CHECK(error_kind_of([] { tile_pictures(ramp(2, 1, 4, 4), 0); }) == ErrorKind::kBadArgument);
  CHECK(error_kind_of([] { tile_pictures(ramp(2, 1, 4, 4), 2, -1); }) == ErrorKind::kBadArgument);
  CHECK(error_kind_of([] { tile_pictures(ramp(2, 1, 4, 4), 2, 2, 0); }) == ErrorKind::kBadArgument);
}

TEST_CASE("a scatter plot puts a dark dot where a point is and a ring round each mark",
          "[pictures]") {
  // side 101, half extent 2: pixel = round((x + 2) / 4 · 100), row = round((2 − y) / 4 · 100).
  const Tensor<float> points = Tensor<float>::from_values({2, 2}, {1.0f, -1.0f, 5.0f, 0.0f});
  const Picture empty = scatter_picture(Tensor<float>::zeros({0, 2}), {}, 2.0, 101);
  const Picture p = scatter_picture(points, {{-1.0, 1.0}}, 2.0, 101);
  REQUIRE(p.width == 101);
  REQUIRE(p.height == 101);
  REQUIRE(p.channels == 3);
  auto luma = [](const Picture& q, int64_t x, int64_t y) {
    return (q.at(x, y, 0) + q.at(x, y, 1) + q.at(x, y, 2)) / 3.0;
  };
  // (1, −1) → column 75, row 75: much darker than the background there.
  CHECK(luma(p, 75, 75) < luma(empty, 75, 75) - 60);
  // Away from the point and the axes nothing changed; the point at x = 5 is off the plot.
  CHECK(luma(p, 90, 20) == luma(empty, 90, 20));
  CHECK(p.pixels.size() == empty.pixels.size());
  size_t changed = 0;
  for (size_t i = 0; i < p.pixels.size(); ++i) changed += p.pixels[i] != empty.pixels[i];
  // The mark (−1, 1) → (25, 25): reddish pixels on a ring around it, its centre untouched.
  CHECK(p.at(25, 25, 0) == empty.at(25, 25, 0));
  int reddish = 0;
  for (int64_t y = 15; y <= 35; ++y)
    for (int64_t x = 15; x <= 35; ++x)
      reddish += p.at(x, y, 0) > 150 && p.at(x, y, 1) < 100 && p.at(x, y, 2) < 100;
  CHECK(reddish >= 12);
  // Only the dot and the ring changed anything.
  CHECK(changed < 3 * (5 + 60));
  CHECK(error_kind_of([] {
          scatter_picture(Tensor<float>::zeros({4, 3}), {}, 1, 64);
        }) == ErrorKind::kBadShape);
  CHECK(error_kind_of([] {
          scatter_picture(Tensor<float>::zeros({4, 2}), {}, 0, 64);
        }) == ErrorKind::kBadArgument);
  CHECK(error_kind_of([] {
          scatter_picture(Tensor<float>::zeros({4, 2}), {}, 1, 8);
        }) == ErrorKind::kBadArgument);
}

TEST_CASE("write_png writes a PNG file in place and names the path when it cannot", "[pictures]") {
  const std::string path = scratch_path("grid.png");
  write_png(path, tile_pictures(ramp(3, 3, 5, 7), 2));
  std::ifstream in(path, std::ios::binary);
  const std::string bytes((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
  // The 8-byte signature of the PNG Specification (W3C, Second Edition), then the length 13
  // and type of the IHDR chunk that must come first (sections 5.2 and 5.6, from memory).
  const std::string signature = "\x89PNG\r\n\x1a\n";
  CHECK(bytes.compare(0, 8, signature) == 0);
  CHECK(bytes.compare(8, 8, std::string("\0\0\0\x0dIHDR", 8)) == 0);
  std::remove(path.c_str());

  std::string message;
  const std::string bad = "/nonexistent-folder-for-spar/grid.png";
  CHECK(error_kind_of([&] { write_png(bad, tile_pictures(ramp(1, 1, 2, 2), 1)); }, &message) ==
        ErrorKind::kIo);
  CHECK(message.find(bad) != std::string::npos);
  Picture wrong;
  wrong.width = 2;
  wrong.height = 2;
  wrong.channels = 3;
  wrong.pixels.resize(11);
  CHECK(error_kind_of([&] { encode_png(wrong); }) == ErrorKind::kBadArgument);
  wrong.pixels.resize(12);
  wrong.channels = 2;  // gray + alpha is not offered
  CHECK(error_kind_of([&] { encode_png(wrong); }) == ErrorKind::kBadArgument);
}
