// Picture: an 8-bit raster image held in memory, the two layouts spar draws for people to
// look at (a grid of generated images, a scatter plot of generated 2-D points), PNG encoding
// through stb's writer, written atomically (write_file_atomically, engine/atomic_file.h).
//
// Pixel values: images in [−1, 1] (the generator's tanh range) map to bytes by
// round((v + 1) · 127.5), clamped to 0..255, halves rounded up; NaN is drawn as 0.
//
// Thread safety: pure functions over values; a Picture is a plain value type. Two threads of
// one process must not write the same path at the same time (see write_file_atomically).
#pragma once

#include <cstddef>
#include <cstdint>
#include <string>
#include <utility>
#include <vector>

#include "engine/atomic_file.h"  // write_file_atomically
#include "engine/tensor.h"

namespace spar {

struct Picture {
  int64_t width = 0, height = 0;
  int64_t channels = 0;         // 1 (gray) or 3 (RGB)
  std::vector<uint8_t> pixels;  // row-major, channels interleaved:
                                // (x, y, c) is at (y · width + x) · channels + c

  uint8_t at(int64_t x, int64_t y, int64_t c = 0) const {
    return pixels[static_cast<size_t>((y * width + x) * channels + c)];
  }
};

// The byte for an image value v in [−1, 1] (see the top of this file).
uint8_t pixel_byte(float v);

// The gray level of the background between and around tiles.
constexpr uint8_t kTileBackground = 96;

// Lays out images [N, C, H, W] (C = 1 or 3) in a grid read left to right, top to bottom:
// min(N, columns) columns, ceil(N / columns) rows, each image enlarged `zoom` times by
// repeating pixels, with `gap` pixels of kTileBackground between tiles and around the edge.
// So the picture is columns' · (W · zoom) + (columns' + 1) · gap wide (columns' the number
// of columns used) and rows · (H · zoom) + (rows + 1) · gap high, with C channels. Cells
// past the last image stay background.
// Raises kBadShape naming the shape unless it is [N ≥ 1, 1 or 3, H ≥ 1, W ≥ 1], and
// kBadArgument unless columns ≥ 1, gap ≥ 0 and zoom ≥ 1.
Picture tile_pictures(const Tensor<float>& images, int64_t columns, int64_t gap = 2,
                      int64_t zoom = 1);

// A side × side RGB plot of 2-D points [N, 2] (x right, y up, both over
// [−half_extent, half_extent]) on a light background with the axes through the origin: each
// point is a small dark dot (overlapping dots darken, so density shows), and each of `marks`
// (mixture means, say) is a small red ring drawn over the dots. Points and marks outside the
// range or not finite are left out. Point (x, y) lands on pixel
// column round((x + h) / 2h · (side − 1)), row round((h − y) / 2h · (side − 1)).
// Raises kBadShape unless points is [N, 2] (N may be 0), kBadArgument unless half_extent is
// finite and > 0 and 16 ≤ side ≤ 8192.
Picture scatter_picture(const Tensor<float>& points,
                        const std::vector<std::pair<double, double>>& marks, double half_extent,
                        int64_t side);

// The PNG file of a picture (8 bits per channel, gray or RGB, non-interlaced), encoded by
// stb's PNG writer. Raises kBadArgument unless channels is 1 or 3, width and height are 1 to
// 2^24 and pixels holds width · height · channels bytes.
std::vector<uint8_t> encode_png(const Picture& picture);

// encode_png written atomically to `path` (write_file_atomically). Raises kBadArgument as
// encode_png does, kIo naming the path when the file cannot be written.
void write_png(const std::string& path, const Picture& picture);

}  // namespace spar
