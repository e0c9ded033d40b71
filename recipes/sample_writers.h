// Writing generated samples as people look at them: a grid picture of images, table rows
// drawn as pictures, a scatter plot of 2-D points over the mixture's means, or numbers in a
// CSV file. The run folder's pictures (recipes/run_folder.h) and `spar sample` both use these.
//
// Thread safety: pure functions; each writes its file atomically.
#pragma once

#include <string>

#include "engine/tensor.h"
#include "recipes/recipe.h"

namespace spar {

// Whether samples of this recipe's data are drawn as pictures: images, 2-D mixtures, and
// tables with a data.picture_width. Other tables' samples are written as CSV instead.
bool has_pictures(const Recipe& recipe, const Shape& sample_shape);
// Samples [n, ...] as CSV: one row per sample, its values in row-major order ("%.6g").
void write_samples_table(const Tensor<float>& samples, const std::string& path);
// A picture of samples [n, ...] (PNG at `path`) with `columns` cells per row of the grid.
void write_samples_picture(const Recipe& recipe, const Tensor<float>& samples, int64_t columns,
                           const std::string& path);
// Columns of a sample grid: one per class for a conditional generator with at most 16
// classes (so each column is a class; `classes` 0 otherwise), else about square.
int64_t grid_columns(int64_t n, int64_t classes);

}  // namespace spar
