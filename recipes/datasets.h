// Training data held in memory, the loaders that fill it, and the data source that serves
// it to the training loop in shuffled batches.
//
// Every loader returns a Dataset: samples scaled to [−1, 1] (the range of the generator's
// tanh output, as in DCGAN), optional integer class labels and the classes' names. Images
// are [N, C, H, W] with C = 1 (grayscale) or 3 (RGB), channel-major; tables are [N, F].
// Loaders raise kBadInputFile "<path>: <why>" in one line for data they cannot use (a
// missing path, an undecodable image, a ragged table), never a partial dataset.
//
// Thread safety: loaders are reentrant; a DatasetSource belongs to one thread at a time.
#pragma once

#include <climits>
#include <string>
#include <vector>

#include "engine/archive.h"
#include "engine/random.h"
#include "engine/tensor.h"
#include "recipes/image_files.h"

namespace spar {

struct Dataset {
  Tensor<float> samples;                 // [N, ...], values in [−1, 1]
  std::vector<int64_t> labels;           // N class indices, or empty when unlabelled
  std::vector<std::string> class_names;  // one per class, or empty when unlabelled
  std::string origin;                    // what it was made from, for logs ("folder ./x")

  int64_t size() const {
    return samples.has_value() && samples.shape().rank() > 0 ? samples.shape()[0] : 0;
  }
  int64_t classes() const { return static_cast<int64_t>(class_names.size()); }
  Shape sample_shape() const;  // the shape of one sample, samples.shape() without dim 0
};

// One batch for a training step: samples [n, ...] and, for labelled data, their n labels.
struct Batch {
  Tensor<float> samples;
  std::vector<int64_t> labels;
};

// Where training data comes from. next_batch advances a position that save/load carry, so a
// resumed run sees the same batches as one that never stopped.
class DataSource {
 public:
  virtual ~DataSource() = default;
  virtual Shape sample_shape() const = 0;
  virtual int64_t classes() const { return 0; }  // 0: unlabelled
  virtual Batch next_batch(int64_t n) = 0;
  virtual void save(Archive& archive, const std::string& prefix) const = 0;
  // Raises kCorruptCheckpoint when the archive lacks this source's records.
  virtual void load(const Archive& archive, const std::string& prefix) = 0;
};

// Serves a Dataset in epochs: each epoch visits every sample once in an order shuffled from
// (seed, epoch) alone (Fisher–Yates on Philox stream "data"), so the position is just
// (epoch, offset) and a restored source rebuilds the same order. A batch that crosses the
// end of an epoch continues into the next one.
class DatasetSource final : public DataSource {
 public:
  // Raises kBadInputFile naming the dataset's origin when it holds fewer than 2 samples.
  DatasetSource(Dataset data, uint64_t seed);
  Shape sample_shape() const override { return data_.sample_shape(); }
  int64_t classes() const override { return data_.classes(); }
  Batch next_batch(int64_t n) override;
  void save(Archive& archive, const std::string& prefix) const override;
  void load(const Archive& archive, const std::string& prefix) override;
  const Dataset& dataset() const { return data_; }

 private:
  void shuffle_for_epoch();
  Dataset data_;
  uint64_t seed_;
  int64_t epoch_ = 0, offset_ = 0;
  std::vector<int64_t> order_;
};

// ---- Loaders ----

// The most classes a loader accepts (labels 0 .. kMaxClasses − 1): a guard against a stray
// huge label asking for millions of class names.
constexpr int64_t kMaxClasses = 65536;

struct ImageLoadOptions {
  // Output side in pixels, 1 to 16384. The centre square of each image (its side the image's
  // shorter side; an odd excess leaves the extra column or row on the right or bottom) is
  // resampled to size × size: a box filter (area average) when shrinking, a triangle filter
  // (bilinear) when enlarging, neither of which overshoots; a square of the right size is
  // copied as it is. Resampling works on the stored 8-bit values (no gamma decoding).
  int64_t size = 32;
  // 1: grayscale, RGB images converted by ITU-R BT.601 luma 0.299 R + 0.587 G + 0.114 B;
  // 3: RGB, grayscale images repeated into all three channels. Alpha is dropped (colour
  // values are kept as stored, not composited onto a background). Default 3.
  int64_t channels = 3;
  // Images with more pixels than this are refused from their header, before they are
  // decoded (a few bytes can claim 20,000 × 20,000 pixels). Default 40 million.
  int64_t pixel_limit = kDefaultPixelLimit;
};
// Reads every PNG, JPEG or BMP file (by extension .png, .jpg, .jpeg, .bmp in any letter
// case; other files are ignored, as are entries whose name starts with '.'). Either the
// images lie directly in `folder` (unlabelled), or `folder` has sub-folders instead, each a
// class named after it, in byte-wise sorted order, holding the images anywhere beneath it.
// Images are taken in byte-wise sorted path order, so the result does not depend on the
// order the file system lists them in. Every mode stb decodes (gray, gray+alpha, RGB, RGBA,
// palette; 8 or 16 bits, which become 8) is converted. Values v in 0..255 become
// v / 127.5 − 1. Samples are [N, channels, size, size].
// Raises kBadArgument for a size or channel count out of range, and kBadInputFile naming
// the path for: a missing folder or one that is not a folder; no images; loose images beside
// class folders; a class folder without images; a file that is not PNG, JPEG or BMP by its
// first bytes, has more pixels than the limit, or does not decode (decode_image_file in
// recipes/image_files.h).
Dataset load_images(const std::string& folder, const ImageLoadOptions& options);

// An IDX file of unsigned bytes [N, H, W] (read_idx, plain or gzipped) as samples
// [N, 1, H, W] with values v / 127.5 − 1, optionally with an IDX label file (empty string:
// none) of N integers [N]. Classes are named by `class_names`, which then must name every
// label (labels < its size), or else "0".."K-1" with K = max label + 1.
// Raises kBadInputFile naming the file for another element type or rank, no images, a label
// count that differs from N, or a label that is negative, at least kMaxClasses, or beyond
// `class_names`; kBadArgument for class names given without a label file.
Dataset load_idx_dataset(const std::string& images, const std::string& labels,
                         std::vector<std::string> class_names = {});

struct TableOptions {
  // The column holding the class label (0-based; −1 counts from the end, as the digits table
  // has it last), or kNoLabel (the default) for an unlabelled table.
  static constexpr int64_t kNoLabel = INT64_MIN;
  int64_t label_column = kNoLabel;
  // Feature values map linearly from [low, high] to [−1, 1]; a value outside [low, high] is
  // an error. When low == high (the default, both 0) the table's own minimum and maximum over
  // all feature cells are used instead; a table whose feature cells all hold one value then
  // has no range to map and is an error (give low and high).
  double low = 0, high = 0;
  bool header = false;  // the first line names the columns: skip it. Default false.
};
// A numeric CSV table, plain or gzipped (detected from the content), one sample per line:
// cells separated by commas, no quoting, blanks around a cell ignored, each a finite decimal
// number (3, -0.5, +2, 1e-3; read the same in every locale). Blank lines are skipped; lines
// may end in \n or \r\n.
// Samples are [N, F] with F the non-label columns in file order. Labels must be integers
// 0 .. kMaxClasses − 1; classes are named "0".."K-1" with K = max label + 1.
// Raises kBadInputFile "<path>:<line>: <why>" for a row with another cell count than the
// first, a cell that is empty or not a finite number, a label that is not a non-negative
// integer, or a value outside [low, high]; "<path>: <why>" for a missing or unreadable file,
// damaged gzip data, a table without rows, a label column outside the table, or no feature
// column. Raises kBadArgument for low > high or non-finite bounds.
Dataset load_table(const std::string& path, const TableOptions& options);

}  // namespace spar
