// IDX files as datasets (recipes/datasets.h): Fashion-MNIST's test split and small files.
#include <algorithm>
#include <cmath>
#include <cstdint>
#include <string>
#include <vector>

#include "recipes/datasets.h"
#include "tests/support.h"

namespace spar {
namespace {

using testing::error_kind_of;
using testing::require_bad_input;
using testing::ScratchDir;
using testing::write_bytes;

const std::string kFashionDir = "/usr/share/datasets/fashion-mnist/";

// Xiao et al. 2017 (docs/references.md): the test split is 10,000 28×28 grayscale images, ten
// classes of 1,000; the label names in order.
const std::vector<std::string> kFashionNames = {"T-shirt/top", "Trouser",   "Pullover", "Dress",
                                                "Coat",        "Sandal",    "Shirt",    "Sneaker",
                                                "Bag",         "Ankle boot"};

TEST_CASE("Fashion-MNIST's test split: 10,000 images [1, 28, 28], 1,000 per class, in [-1, 1]",
          "[datasets]") {
  const Dataset d = load_idx_dataset(kFashionDir + "t10k-images-idx3-ubyte.gz",
                                     kFashionDir + "t10k-labels-idx1-ubyte.gz", kFashionNames);
  REQUIRE(d.samples.shape() == Shape({10000, 1, 28, 28}));
  CHECK(d.sample_shape() == Shape({1, 28, 28}));
  CHECK(d.class_names == kFashionNames);
  REQUIRE(d.labels.size() == 10000);
  std::vector<int64_t> per_class(10, 0);
  for (int64_t y : d.labels) {
    REQUIRE(y >= 0);
    REQUIRE(y < 10);
    ++per_class[static_cast<size_t>(y)];
  }
  CHECK(per_class == std::vector<int64_t>(10, 1000));
  // Bytes v become v / 127.5 − 1: within [−1, 1], both ends reached (the images use the byte
  // range from 0 to 255), every value on the 8-bit grid.
  const float* v = d.samples.data();
  float low = v[0], high = v[0];
  bool on_grid = true;
  for (int64_t i = 0; i < d.samples.element_count(); ++i) {
    low = std::min(low, v[i]);
    high = std::max(high, v[i]);
    const double level = (static_cast<double>(v[i]) + 1.0) * 127.5;
    on_grid = on_grid && std::abs(level - std::round(level)) < 1e-4;
  }
  CHECK(low == -1.0f);
  CHECK(high == 1.0f);
  CHECK(on_grid);

  const Dataset plain = load_idx_dataset(kFashionDir + "t10k-images-idx3-ubyte.gz",
                                         kFashionDir + "t10k-labels-idx1-ubyte.gz");
  CHECK(plain.class_names ==
        std::vector<std::string>{"0", "1", "2", "3", "4", "5", "6", "7", "8", "9"});
  CHECK(plain.labels == d.labels);
}

// An IDX file per LeCun's MNIST page: 00 00, type, rank, big-endian extents, data.
std::string idx_file(unsigned char type, const std::vector<uint32_t>& extents,
                     const std::vector<unsigned char>& data) {
  std::string b = {'\0', '\0', static_cast<char>(type), static_cast<char>(extents.size())};
  for (uint32_t e : extents)
    for (int shift = 24; shift >= 0; shift -= 8) b.push_back(static_cast<char>(e >> shift));
  b.append(data.begin(), data.end());
  return b;
}

TEST_CASE("small IDX files: exact values and labels, mismatches name the file", "[datasets]") {
  ScratchDir dir;
  const std::string images =
      write_bytes(dir.file("x.idx"), idx_file(0x08, {3, 1, 2}, {0, 255, 51, 204, 127, 128}));
  const std::string labels = write_bytes(dir.file("y.idx"), idx_file(0x08, {3}, {2, 0, 2}));
  const Dataset d = load_idx_dataset(images, labels);
  REQUIRE(d.samples.shape() == Shape({3, 1, 1, 2}));
  // v / 127.5 − 1, as floats: −1, 1, −0.6, 0.6, −1/255, 1/255.
  const std::vector<double> want = {-1, 1, -0.6, 0.6, -1.0 / 255, 1.0 / 255};
  for (size_t i = 0; i < want.size(); ++i)
    CHECK(d.samples.data()[i] == Approx(want[i]).margin(1e-7));
  CHECK(d.labels == std::vector<int64_t>{2, 0, 2});
  CHECK(d.class_names == std::vector<std::string>{"0", "1", "2"});  // class 1 has no images
  CHECK(load_idx_dataset(images, "").labels.empty());

  const std::string two = write_bytes(dir.file("two.idx"), idx_file(0x08, {2}, {0, 1}));
  require_bad_input([&] { load_idx_dataset(images, two); }, two);
  const std::string negative =
      write_bytes(dir.file("negative.idx"), idx_file(0x09, {3}, {0, 0xff, 1}));  // −1
  require_bad_input([&] { load_idx_dataset(images, negative); }, negative);
  require_bad_input([&] { load_idx_dataset(images, labels, {"only", "two"}); }, labels);
  const std::string shorts = write_bytes(dir.file("shorts.idx"), idx_file(0x0B, {1, 1, 1}, {0, 7}));
  require_bad_input([&] { load_idx_dataset(shorts, ""); }, shorts);
  const std::string flat =
      write_bytes(dir.file("flat.idx"), idx_file(0x08, {3, 2}, {1, 2, 3, 4, 5, 6}));
  require_bad_input([&] { load_idx_dataset(flat, ""); }, flat);
  CHECK(error_kind_of([&] { load_idx_dataset(images, "", {"a"}); }) == ErrorKind::kBadArgument);
}

}  // namespace
}  // namespace spar
