#include "recipes/sample_writers.h"

#include <algorithm>
#include <cmath>
#include <cstdio>

#include "engine/atomic_file.h"
#include "engine/error.h"
#include "recipes/data_sources.h"
#include "recipes/pictures.h"

namespace spar {

bool has_pictures(const Recipe& r, const Shape& sample_shape) {
  return sample_shape.rank() != 1 || data_source_of(r).endless() || r.data.picture_width > 0;
}

void write_samples_table(const Tensor<float>& samples, const std::string& path) {
  std::string text;
  const int64_t n = samples.shape()[0], width = samples.element_count() / std::max<int64_t>(1, n);
  char buf[32];
  for (int64_t i = 0; i < n; ++i)
    for (int64_t j = 0; j < width; ++j) {
      std::snprintf(buf, sizeof buf, "%.6g", static_cast<double>(samples.data()[i * width + j]));
      text += buf;
      text += j + 1 < width ? "," : "\n";
    }
  write_file_atomically(path, text.data(), text.size());
}

void write_samples_picture(const Recipe& r, const Tensor<float>& samples, int64_t columns,
                           const std::string& path) {
  const DataSourceInfo& source = data_source_of(r);
  if (source.endless()) {
    const Mixture m = source.mixture();
    double extent = 0;
    for (const auto& [x, y] : m.means) extent = std::max({extent, std::abs(x), std::abs(y)});
    write_png(path, scatter_picture(samples, m.means, extent * 1.5, 512));
    return;
  }
  Tensor<float> images = samples;
  // Small images are enlarged (pixels repeated) to at least 64 pixels a side, to be seen.
  int64_t zoom = samples.shape().rank() == 4 ? std::max<int64_t>(1, 64 / samples.shape()[3]) : 1;
  if (samples.shape().rank() == 2) {  // table rows, drawn as pictures when asked
    const int64_t features = samples.shape()[1];
    const int64_t w = r.data.picture_width;
    if (w <= 0 || features % w != 0)
      raise(ErrorKind::kBadRecipe, "data.picture_width: " + std::to_string(w) +
                                       " does not divide the " + std::to_string(features) +
                                       " features; samples of tables need a picture width");
    images = samples.reshape({samples.shape()[0], 1, features / w, w});
    zoom = std::max<int64_t>(1, 64 / w);
  }
  write_png(path, tile_pictures(images, columns, 2, zoom));
}

int64_t grid_columns(int64_t n, int64_t classes) {
  if (classes > 0 && classes <= 16) return classes;
  return std::max<int64_t>(1, static_cast<int64_t>(std::ceil(std::sqrt(static_cast<double>(n)))));
}

}  // namespace spar
