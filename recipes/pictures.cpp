#include "recipes/pictures.h"

#include <stb/stb_image_write.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <cstring>

#include "engine/error.h"

namespace spar {

uint8_t pixel_byte(float v) {
  if (!(v > -1.0f)) return 0;  // also NaN
  if (v >= 1.0f) return 255;
  return static_cast<uint8_t>(std::floor((static_cast<double>(v) + 1.0) * 127.5 + 0.5));
}

Picture tile_pictures(const Tensor<float>& images, int64_t columns, int64_t gap, int64_t zoom) {
  const Shape& s = images.shape();
  if (!images.has_value() || s.rank() != 4 || s[0] < 1 || (s[1] != 1 && s[1] != 3) || s[2] < 1 ||
      s[3] < 1)
    raise(ErrorKind::kBadShape,
          "tile_pictures: images must be [N, 1 or 3, H, W], got " +
              (images.has_value() ? s.str() : std::string("a tensor that holds no value")));
  if (columns < 1 || gap < 0 || zoom < 1)
    raise(ErrorKind::kBadArgument, "tile_pictures: columns " + std::to_string(columns) + ", gap " +
                                       std::to_string(gap) + ", zoom " + std::to_string(zoom) +
                                       " (need columns >= 1, gap >= 0, zoom >= 1)");
  const int64_t n = s[0], c = s[1], h = s[2], w = s[3];
  const int64_t cols = std::min(n, columns), rows = (n + columns - 1) / columns;
  const int64_t tile_w = w * zoom, tile_h = h * zoom;
  Picture p;
  p.width = cols * tile_w + (cols + 1) * gap;
  p.height = rows * tile_h + (rows + 1) * gap;
  p.channels = c;
  p.pixels.assign(static_cast<size_t>(p.width * p.height * c), kTileBackground);
  const float* data = images.data();
  for (int64_t i = 0; i < n; ++i) {
    const int64_t left = gap + (i % columns) * (tile_w + gap);
    const int64_t top = gap + (i / columns) * (tile_h + gap);
    const float* image = data + i * c * h * w;
    for (int64_t y = 0; y < tile_h; ++y) {
      uint8_t* row = p.pixels.data() + ((top + y) * p.width + left) * c;
      for (int64_t x = 0; x < tile_w; ++x)
        for (int64_t k = 0; k < c; ++k)
          row[x * c + k] = pixel_byte(image[(k * h + y / zoom) * w + x / zoom]);
    }
  }
  return p;
}

namespace {

struct Rgb {
  uint8_t r, g, b;
};

constexpr Rgb kPlotBackground = {250, 249, 245};
constexpr Rgb kPlotAxis = {200, 200, 196};
constexpr Rgb kPlotInk = {25, 35, 60};
constexpr Rgb kPlotMark = {215, 45, 30};
constexpr double kInkOpacity = 0.55;  // overlapping dots darken towards the ink

void blend(Picture& p, int64_t x, int64_t y, Rgb colour, double opacity) {
  if (x < 0 || y < 0 || x >= p.width || y >= p.height) return;
  uint8_t* px = p.pixels.data() + (y * p.width + x) * 3;
  const uint8_t target[3] = {colour.r, colour.g, colour.b};
  for (int k = 0; k < 3; ++k)
    px[k] = static_cast<uint8_t>(std::lround(px[k] + (target[k] - px[k]) * opacity));
}

}  // namespace

Picture scatter_picture(const Tensor<float>& points,
                        const std::vector<std::pair<double, double>>& marks, double half_extent,
                        int64_t side) {
  if (!points.has_value() || points.rank() != 2 || points.dim(1) != 2)
    raise(ErrorKind::kBadShape,
          "scatter_picture: points must be [N, 2], got " +
              (points.has_value() ? points.shape().str()
                                  : std::string("a tensor that holds no value")));
  if (!std::isfinite(half_extent) || half_extent <= 0 || side < 16 || side > 8192)
    raise(ErrorKind::kBadArgument, "scatter_picture: half extent " + std::to_string(half_extent) +
                                       ", side " + std::to_string(side) +
                                       " (need a finite half extent > 0 and 16 <= side <= 8192)");
  Picture p;
  p.width = p.height = side;
  p.channels = 3;
  p.pixels.resize(static_cast<size_t>(side * side * 3));
  for (size_t i = 0; i < p.pixels.size(); i += 3) {
    p.pixels[i] = kPlotBackground.r;
    p.pixels[i + 1] = kPlotBackground.g;
    p.pixels[i + 2] = kPlotBackground.b;
  }
  // Plot coordinates to pixel coordinates; false when outside the range or not finite.
  const double scale = (side - 1) / (2 * half_extent);
  auto locate = [&](double x, double y, int64_t* px, int64_t* py) {
    if (!(std::abs(x) <= half_extent && std::abs(y) <= half_extent)) return false;
    *px = std::lround((x + half_extent) * scale);
    *py = std::lround((half_extent - y) * scale);
    return true;
  };
  int64_t ox = 0, oy = 0;
  locate(0, 0, &ox, &oy);
  for (int64_t t = 0; t < side; ++t) {
    blend(p, ox, t, kPlotAxis, 1.0);
    blend(p, t, oy, kPlotAxis, 1.0);
  }
  // A dot is the centre pixel and its four neighbours, scaled up for large plots.
  const int64_t dot = std::max<int64_t>(1, side / 320);
  const float* xy = points.data();
  for (int64_t i = 0; i < points.dim(0); ++i) {
    int64_t px, py;
    if (!locate(xy[2 * i], xy[2 * i + 1], &px, &py)) continue;
    for (int64_t dy = -dot; dy <= dot; ++dy)
      for (int64_t dx = -dot; dx <= dot; ++dx)
        if (dx * dx + dy * dy <= dot * dot) blend(p, px + dx, py + dy, kPlotInk, kInkOpacity);
  }
  // Rings: pixels whose distance from the mark is within 0.8 of the radius.
  const double radius = std::max(4.0, side / 56.0);
  const int64_t reach = static_cast<int64_t>(std::ceil(radius + 1));
  for (const auto& m : marks) {
    int64_t mx, my;
    if (!locate(m.first, m.second, &mx, &my)) continue;
    for (int64_t dy = -reach; dy <= reach; ++dy)
      for (int64_t dx = -reach; dx <= reach; ++dx)
        if (std::abs(std::hypot(double(dx), double(dy)) - radius) <= 0.8)
          blend(p, mx + dx, my + dy, kPlotMark, 1.0);
  }
  return p;
}

std::vector<uint8_t> encode_png(const Picture& picture) {
  const int64_t limit = int64_t{1} << 24;
  if ((picture.channels != 1 && picture.channels != 3) || picture.width < 1 || picture.height < 1 ||
      picture.width > limit || picture.height > limit ||
      picture.pixels.size() !=
          static_cast<size_t>(picture.width * picture.height * picture.channels))
    raise(ErrorKind::kBadArgument,
          "encode_png: a " + std::to_string(picture.width) + " x " +
              std::to_string(picture.height) + " picture with " + std::to_string(picture.channels) +
              " channels and " + std::to_string(picture.pixels.size()) +
              " bytes (need 1 or 3 channels, sides 1 to 2^24, width * height * channels bytes)");
  std::vector<uint8_t> out;
  auto sink = [](void* context, void* data, int size) {
    auto* bytes = static_cast<std::vector<uint8_t>*>(context);
    const uint8_t* begin = static_cast<const uint8_t*>(data);
    bytes->insert(bytes->end(), begin, begin + size);
  };
  const int ok = stbi_write_png_to_func(sink, &out, static_cast<int>(picture.width),
                                        static_cast<int>(picture.height),
                                        static_cast<int>(picture.channels), picture.pixels.data(),
                                        static_cast<int>(picture.width * picture.channels));
  if (!ok || out.empty())
    raise(ErrorKind::kBadArgument, "encode_png: the PNG writer refused a " +
                                       std::to_string(picture.width) + " x " +
                                       std::to_string(picture.height) + " picture");
  return out;
}

void write_png(const std::string& path, const Picture& picture) {
  const std::vector<uint8_t> bytes = encode_png(picture);
  write_file_atomically(path, bytes.data(), bytes.size());
}

}  // namespace spar
