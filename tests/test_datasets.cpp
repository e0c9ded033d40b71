// recipes/datasets.h: the DatasetSource's epochs and exact resume, and the three loaders on
// open data (Fashion-MNIST, the digits table) and on small files written here by independent
// encoders (stb_image_write, a PNG palette encoder following the PNG specification, zlib).
#include <stb/stb_image_write.h>
#include <zlib.h>

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <fstream>
#include <functional>
#include <numeric>
#include <string>
#include <vector>

#include "engine/archive.h"
#include "recipes/datasets.h"
#include "tests/support.h"

namespace spar {
namespace {

using testing::error_kind_of;
using testing::same_bits;
using testing::ScratchDir;

const std::string kFashionDir = "/usr/share/datasets/fashion-mnist/";
const std::string kDigits = "/usr/lib/python3/dist-packages/sklearn/datasets/data/digits.csv.gz";

std::string write_bytes(const std::string& path, const std::string& bytes) {
  std::ofstream out(path, std::ios::binary);
  out.write(bytes.data(), static_cast<std::streamsize>(bytes.size()));
  REQUIRE(out.good());
  return path;
}

std::string write_gzip(const std::string& path, const std::string& bytes) {
  gzFile f = gzopen(path.c_str(), "wb");
  REQUIRE(f != nullptr);
  REQUIRE(gzwrite(f, bytes.data(), static_cast<unsigned>(bytes.size())) ==
          static_cast<int>(bytes.size()));
  REQUIRE(gzclose(f) == Z_OK);
  return path;
}

// `load` raises kBadInputFile in one line whose message contains `culprit` (a path, or
// "<path>:<line>:" for tables).
void require_bad_input(const std::function<void()>& load, const std::string& culprit) {
  std::string message;
  CHECK(error_kind_of(load, &message) == ErrorKind::kBadInputFile);
  INFO("message: " << message);
  CHECK(message.find(culprit) != std::string::npos);
  CHECK(message.find('\n') == std::string::npos);
}

// ---- DatasetSource -------------------------------------------------------------------------

// n samples [2]; sample i is (i/64, −i/64) (exact in float), labelled i % 3.
Dataset numbered(int64_t n) {
  Dataset d;
  std::vector<float> v;
  for (int64_t i = 0; i < n; ++i) {
    v.push_back(static_cast<float>(i) / 64.0f);
    v.push_back(-static_cast<float>(i) / 64.0f);
    d.labels.push_back(i % 3);
  }
  d.samples = Tensor<float>::from_values(Shape{n, 2}, v);
  d.class_names = {"a", "b", "c"};
  d.origin = "numbered";
  return d;
}

// The sample numbers in a batch of numbered(), checking that each row moved whole and that
// each label is its sample's.
std::vector<int64_t> ids_of(const Batch& b) {
  std::vector<int64_t> ids;
  const int64_t n = b.samples.dim(0);
  REQUIRE(static_cast<int64_t>(b.labels.size()) == n);
  for (int64_t r = 0; r < n; ++r) {
    const float first = b.samples.at({r, 0});
    const int64_t id = std::lround(first * 64.0f);
    CHECK(b.samples.at({r, 1}) == -first);
    CHECK(b.labels[static_cast<size_t>(r)] == id % 3);
    ids.push_back(id);
  }
  return ids;
}

std::vector<int64_t> draw_ids(DatasetSource& source, int64_t batches, int64_t batch) {
  std::vector<int64_t> ids;
  for (int64_t k = 0; k < batches; ++k) {
    const Batch b = source.next_batch(batch);
    REQUIRE(b.samples.shape() == Shape({batch, 2}));
    const std::vector<int64_t> more = ids_of(b);
    ids.insert(ids.end(), more.begin(), more.end());
  }
  return ids;
}

bool is_permutation_of_first(const std::vector<int64_t>& ids, size_t begin, int64_t n) {
  std::vector<int64_t> epoch(ids.begin() + static_cast<std::ptrdiff_t>(begin),
                             ids.begin() + static_cast<std::ptrdiff_t>(begin + n));
  std::sort(epoch.begin(), epoch.end());
  std::vector<int64_t> all(static_cast<size_t>(n));
  std::iota(all.begin(), all.end(), 0);
  return epoch == all;
}

// The contract in datasets.h: an epoch visits every sample once; the order is reshuffled
// every epoch; a batch crossing an epoch's end continues into the next.
TEST_CASE("each epoch serves every sample once, batches cross epoch ends, labels follow",
          "[datasets]") {
  DatasetSource source(numbered(10), 7);
  CHECK(source.sample_shape() == Shape({2}));
  CHECK(source.classes() == 3);
  // Batches of 3 over 10 samples: batch 4 holds the last sample of epoch 0 and the first two
  // of epoch 1, and so on.
  const std::vector<int64_t> ids = draw_ids(source, 17, 3);
  for (size_t e = 0; e < 5; ++e) {
    INFO("epoch " << e);
    CHECK(is_permutation_of_first(ids, 10 * e, 10));
  }
  const std::vector<int64_t> epoch0(ids.begin(), ids.begin() + 10),
      epoch1(ids.begin() + 10, ids.begin() + 20);
  CHECK(epoch0 != epoch1);  // a fixed order would repeat; equal by chance with p = 1/10!

  // One batch larger than the data spans three epochs.
  DatasetSource wide(numbered(10), 7);
  const std::vector<int64_t> big = ids_of(wide.next_batch(25));
  CHECK(is_permutation_of_first(big, 0, 10));
  CHECK(is_permutation_of_first(big, 10, 10));
  CHECK(std::vector<int64_t>(big.begin(), big.begin() + 25) ==
        std::vector<int64_t>(ids.begin(), ids.begin() + 25));  // same seed, same order
}

TEST_CASE("the same seed serves the same batches, another seed other ones", "[datasets]") {
  DatasetSource a(numbered(10), 11), b(numbered(10), 11), c(numbered(10), 12);
  bool differs = false;
  for (int k = 0; k < 8; ++k) {
    const Batch x = a.next_batch(4), y = b.next_batch(4), z = c.next_batch(4);
    CHECK(same_bits(x.samples, y.samples));
    CHECK(x.labels == y.labels);
    differs = differs || !same_bits(x.samples, z.samples);
  }
  CHECK(differs);
}

// Fisher–Yates gives every permutation with probability 1/n! (Knuth, TAOCP vol. 2, 3.4.2,
// Algorithm P; from memory), so each sample lands at each position with probability 1/n.
// Counts over T epochs, Pearson's X² = Σ (O − E)² / E with E = T/n: for a sum of uniform
// permutation matrices (n − 1)/n · X² follows χ² with (n − 1)² degrees of freedom (checked by a
// numpy simulation: 2,000 replicates of n = 4, T = 3,000 gave mean 8.92, variance 17.9). The
// bar is scipy.stats.chi2.ppf(0.999, 9) = 27.877. Sattolo's variant (a swap partner below i
// instead of up to i) never leaves a sample in place and fails by far.
TEST_CASE("epoch orders are uniform: each sample at each position 1/n of the time", "[datasets]") {
  const int64_t n = 4, epochs = 3000;
  DatasetSource source(numbered(n), 2024);
  std::vector<double> count(static_cast<size_t>(n * n), 0.0);
  for (int64_t e = 0; e < epochs; ++e) {
    const std::vector<int64_t> ids = ids_of(source.next_batch(n));
    for (int64_t p = 0; p < n; ++p) count[static_cast<size_t>(p * n + ids[p])] += 1;
  }
  const double expected = static_cast<double>(epochs) / n;
  double x2 = 0;
  for (double o : count) x2 += (o - expected) * (o - expected) / expected;
  const double scaled = x2 * (n - 1) / n;
  INFO("scaled X² = " << scaled);
  CHECK(scaled < 27.877);
}

Archive round_trip(const Archive& a) {
  return Archive::from_bytes(a.to_bytes(), "round trip");
}

// The contract in datasets.h: the position is (epoch, offset) and the order depends on the seed
// and the epoch alone, so a restored source serves the batches the original would have.
TEST_CASE("save after k batches, load into a new source: the same following batches",
          "[datasets]") {
  // 10 samples, batches of 4: after 3 batches the position is inside epoch 1, after 5 it is
  // exactly at the end of epoch 1 (offset 10).
  for (int k : {0, 1, 3, 5}) {
    INFO("saved after " << k << " batches");
    DatasetSource original(numbered(10), 99);
    for (int i = 0; i < k; ++i) original.next_batch(4);
    Archive archive;
    original.save(archive, "data");
    DatasetSource resumed(numbered(10), 99);
    resumed.next_batch(3);  // a position of its own, to be replaced
    resumed.load(round_trip(archive), "data");
    for (int i = 0; i < 6; ++i) {
      const Batch x = original.next_batch(4), y = resumed.next_batch(4);
      CHECK(same_bits(x.samples, y.samples));
      CHECK(x.labels == y.labels);
    }
  }
}

TEST_CASE("a source refuses a tiny dataset and a position that does not fit", "[datasets]") {
  std::string message;
  CHECK(error_kind_of([] { DatasetSource(numbered(1), 1); }, &message) == ErrorKind::kBadInputFile);
  CHECK(message.find("numbered") != std::string::npos);

  DatasetSource source(numbered(10), 1);
  Archive bad;
  bad.put_int("data.samples", 10);
  bad.put_int("data.epoch", 0);
  bad.put_int("data.offset", 11);
  CHECK(error_kind_of([&] { source.load(bad, "data"); }) == ErrorKind::kCorruptCheckpoint);
  CHECK(error_kind_of([&] { source.load(Archive(), "data"); }) == ErrorKind::kCorruptCheckpoint);
  // A position saved for other data (here: 12 samples, not 10) is refused, naming both.
  Archive other;
  DatasetSource(numbered(12), 1).save(other, "data");
  CHECK(error_kind_of([&] { source.load(other, "data"); }, &message) ==
        ErrorKind::kCorruptCheckpoint);
  CHECK(message.find("12 samples") != std::string::npos);
  // Labels that do not match the samples are refused.
  Dataset mislabelled = numbered(10);
  mislabelled.labels.assign(9, 0);
  mislabelled.class_names = {"a"};
  CHECK(error_kind_of([&] { DatasetSource(mislabelled, 1); }) == ErrorKind::kBadArgument);
}

// ---- image folders -------------------------------------------------------------------------

using Rgba = std::vector<unsigned char>;  // one pixel, 1 to 4 channels

std::vector<unsigned char> solid(int w, int h, const Rgba& pixel) {
  std::vector<unsigned char> data;
  for (int i = 0; i < w * h; ++i) data.insert(data.end(), pixel.begin(), pixel.end());
  return data;
}

void write_png(const std::string& path, int w, int h, const Rgba& pixel) {
  const int comp = static_cast<int>(pixel.size());
  REQUIRE(stbi_write_png(path.c_str(), w, h, comp, solid(w, h, pixel).data(), w * comp) != 0);
}

// An 8-bit palette PNG (colour type 3) written from the PNG specification (W3C PNG, 2nd ed.,
// ISO/IEC 15948): signature; chunks of length, type, data and CRC-32 over type and data
// (zlib's crc32 is the specification's CRC); IHDR, PLTE, IDAT (a zlib stream of the rows, each
// led by filter byte 0), IEND. stb_image_write has no palette mode.
std::string palette_png(uint32_t w, uint32_t h, const std::vector<Rgba>& palette,
                        const std::vector<unsigned char>& indices) {
  std::string out("\x89PNG\r\n\x1a\n", 8);
  auto be32 = [](std::string& s, uint32_t v) {
    for (int shift = 24; shift >= 0; shift -= 8) s.push_back(static_cast<char>(v >> shift));
  };
  auto chunk = [&](const char* type, const std::string& data) {
    be32(out, static_cast<uint32_t>(data.size()));
    const std::string body = std::string(type, 4) + data;
    out += body;
    be32(out, static_cast<uint32_t>(
                  ::crc32(0, reinterpret_cast<const Bytef*>(body.data()), body.size())));
  };
  std::string ihdr;
  be32(ihdr, w);
  be32(ihdr, h);
  ihdr += std::string("\x08\x03\x00\x00\x00", 5);  // depth 8, palette, deflate, filter 0, none
  chunk("IHDR", ihdr);
  std::string plte;
  for (const Rgba& c : palette) plte += std::string(c.begin(), c.end());
  chunk("PLTE", plte);
  std::string raw;
  for (uint32_t y = 0; y < h; ++y) {
    raw.push_back('\0');
    raw.append(indices.begin() + y * w, indices.begin() + (y + 1) * w);
  }
  std::vector<Bytef> packed(compressBound(raw.size()));
  uLongf packed_size = packed.size();
  REQUIRE(compress(packed.data(), &packed_size, reinterpret_cast<const Bytef*>(raw.data()),
                   raw.size()) == Z_OK);
  chunk("IDAT", std::string(packed.begin(), packed.begin() + packed_size));
  chunk("IEND", "");
  return out;
}

// Every value of sample i, channel c within `tolerance` of the 8-bit level v / 127.5 − 1.
void check_solid(const Dataset& d, int64_t i, const std::vector<double>& levels, double tolerance) {
  const int64_t s = d.samples.dim(2);
  REQUIRE(d.samples.dim(1) == static_cast<int64_t>(levels.size()));
  for (int64_t c = 0; c < d.samples.dim(1); ++c) {
    const double want = levels[static_cast<size_t>(c)] / 127.5 - 1.0;
    double worst = 0;
    for (int64_t y = 0; y < s; ++y)
      for (int64_t x = 0; x < s; ++x)
        worst = std::max(worst, std::abs(d.samples.at({i, c, y, x}) - want));
    INFO("sample " << i << " channel " << c << ": worst |error| " << worst << " against level "
                   << levels[static_cast<size_t>(c)]);
    CHECK(worst <= tolerance);
  }
}

// ITU-R BT.601 luma (common practice): Y = 0.299 R + 0.587 G + 0.114 B.
double luma(double r, double g, double b) {
  return 0.299 * r + 0.587 * g + 0.114 * b;
}

// A solid image resampled by a filter whose weights sum to one stays solid up to float
// rounding of 8-bit levels: a thousandth of a level is far inside any real error (half a
// level, 0.5/127.5, is what a wrong rounding or channel weight would cost).
constexpr double kExact = 0.001 / 127.5;
// A flat 8×8 block is coded by its DC coefficient alone; quality 95 quantises it finely, and
// the YCbCr round trip may cost a level per channel (common practice). One level is allowed
// (measured: this colour comes back exactly).
constexpr double kJpeg = 1.0 / 127.5;

TEST_CASE("an image folder with class sub-folders: every mode and size, sorted, exact colours",
          "[datasets]") {
  ScratchDir dir;
  const std::string root = dir.folder("pictures");
  // Class "zebra" is made first: the classes must still come out sorted.
  write_png(dir.file("pictures/zebra/d.png"), 40, 30, {255, 0, 128, 7});  // RGBA
  const std::vector<unsigned char> jpeg = solid(32, 32, {90, 160, 220});
  REQUIRE(stbi_write_jpg(dir.file("pictures/zebra/e.JPG").c_str(), 32, 32, 3, jpeg.data(), 95));
  const std::vector<unsigned char> bmp = solid(17, 50, {30, 60, 90});
  REQUIRE(stbi_write_bmp(dir.file("pictures/zebra/f.bmp").c_str(), 17, 50, 3, bmp.data()));
  write_bytes(dir.file("pictures/zebra/g.png"), palette_png(20, 20, {{200, 200, 200}, {12, 34, 56}},
                                                            std::vector<unsigned char>(400, 1)));
  write_bytes(dir.file("pictures/zebra/readme.txt"), "not an image");
  write_bytes(dir.file("pictures/zebra/.hidden.png"), "not an image either, but hidden");
  write_png(dir.file("pictures/apple/a.png"), 40, 30, {200});          // gray
  write_png(dir.file("pictures/apple/b.PNG"), 17, 50, {100, 128});     // gray + alpha
  write_png(dir.file("pictures/apple/c.png"), 32, 32, {10, 200, 60});  // RGB
  const std::vector<unsigned char> small = solid(16, 16, {1, 2, 3});
  REQUIRE(stbi_write_bmp(dir.file("pictures/apple/deeper/h.bmp").c_str(), 16, 16, 3,
                         small.data()));  // beneath the class folder; already 16 × 16

  SECTION("RGB") {
    const Dataset d = load_image_folder(root, {16, 3});
    REQUIRE(d.samples.shape() == Shape({8, 3, 16, 16}));
    CHECK(d.class_names == std::vector<std::string>{"apple", "zebra"});
    CHECK(d.labels == std::vector<int64_t>{0, 0, 0, 0, 1, 1, 1, 1});
    CHECK(d.sample_shape() == Shape({3, 16, 16}));
    // Sorted paths: apple/a.png, apple/b.PNG, apple/c.png, apple/deeper/h.bmp, zebra/d.png,
    // zebra/e.JPG, zebra/f.bmp, zebra/g.png.
    check_solid(d, 0, {200, 200, 200}, kExact);
    check_solid(d, 1, {100, 100, 100}, kExact);  // alpha 128 dropped, not composited
    check_solid(d, 2, {10, 200, 60}, kExact);
    check_solid(d, 3, {1, 2, 3}, kExact);
    check_solid(d, 4, {255, 0, 128}, kExact);
    check_solid(d, 5, {90, 160, 220}, kJpeg);
    check_solid(d, 6, {30, 60, 90}, kExact);
    check_solid(d, 7, {12, 34, 56}, kExact);  // palette entry 1
  }
  SECTION("grayscale by BT.601 luma") {
    const Dataset d = load_image_folder(root, {16, 1});
    REQUIRE(d.samples.shape() == Shape({8, 1, 16, 16}));
    check_solid(d, 0, {200}, kExact);
    check_solid(d, 1, {100}, kExact);
    // stb's own conversion ((77 R + 150 G + 29 B) >> 8) would give 126 here, 1.2 levels off.
    check_solid(d, 2, {luma(10, 200, 60)}, kExact);
    check_solid(d, 3, {luma(1, 2, 3)}, kExact);
    check_solid(d, 4, {luma(255, 0, 128)}, kExact);
    check_solid(d, 5, {luma(90, 160, 220)}, kJpeg);
    check_solid(d, 6, {luma(30, 60, 90)}, kExact);
    check_solid(d, 7, {luma(12, 34, 56)}, kExact);
  }
}

// Models of the two resampling filters (common practice), for a crop of `side` pixels that is
// black before pixel `edge` and white from it on, resampled to `size`; each gives the white
// fraction of output pixel j.
// Box filter (shrinking): the area average over the footprint [j, j + 1) · side / size.
double box_white(int64_t j, int side, int size, int edge) {
  const double a = static_cast<double>(j) * side / size,
               b = static_cast<double>(j + 1) * side / size;
  return std::clamp((b - std::max(a, static_cast<double>(edge))) / (b - a), 0.0, 1.0);
}
// Triangle filter (enlarging): linear interpolation between the two nearest pixel centres at
// (j + 0.5) · side / size − 0.5, held constant beyond the first and last centres.
double triangle_white(int64_t j, int side, int size, int edge) {
  const double u = std::clamp((static_cast<double>(j) + 0.5) * side / size - 0.5, 0.0, side - 1.0);
  const int i0 = static_cast<int>(std::floor(u)), i1 = std::min(i0 + 1, side - 1);
  const double t = u - i0;
  return (1 - t) * (i0 >= edge ? 1.0 : 0.0) + t * (i1 >= edge ? 1.0 : 0.0);
}

// Sample i is constant along the edge and follows `white` across it (as 2 · white − 1).
void check_edge(const Dataset& d, int64_t i, bool vertical_edge,
                const std::function<double(int64_t)>& white) {
  const int64_t s = d.samples.dim(2);
  for (int64_t a = 0; a < s; ++a) {  // a: across the edge; b: along it
    const double want = 2 * white(a) - 1;
    double worst = 0;
    for (int64_t b = 0; b < s; ++b) {
      const float v = vertical_edge ? d.samples.at({i, 0, b, a}) : d.samples.at({i, 0, a, b});
      worst = std::max(worst, std::abs(v - want));
    }
    INFO("sample " << i << ", " << a << " across the edge: want " << want << ", worst |error| "
                   << worst);
    CHECK(worst <= kExact);
  }
}

// A black/white edge away from the centre tells a centre crop from a corner crop, and a mirror
// image from the right one.
TEST_CASE("loose images: unlabelled, a black/white edge lands where the centre crop puts it",
          "[datasets]") {
  ScratchDir dir;
  const std::string root = dir.folder("loose");
  // 40 × 30, black where x < 15: the centre square is x in [5, 35), black before its column
  // 10, shrunk to 16 (the edge at 5.33; a left-aligned crop would put it at 8).
  std::vector<unsigned char> wide(40 * 30);
  for (int y = 0; y < 30; ++y)
    for (int x = 0; x < 40; ++x) wide[static_cast<size_t>(y * 40 + x)] = x < 15 ? 0 : 255;
  REQUIRE(stbi_write_png(dir.file("loose/p1.png").c_str(), 40, 30, 1, wide.data(), 40));
  // 8 × 12, black where y < 5: the centre square is y in [2, 10), black before its row 3,
  // enlarged to 16 (the edge at 6; a top-aligned crop would put it at 10).
  std::vector<unsigned char> tall(8 * 12);
  for (int y = 0; y < 12; ++y)
    for (int x = 0; x < 8; ++x) tall[static_cast<size_t>(y * 8 + x)] = y < 5 ? 0 : 255;
  REQUIRE(stbi_write_png(dir.file("loose/p2.png").c_str(), 8, 12, 1, tall.data(), 8));
  write_bytes(dir.file("loose/notes.csv"), "1,2,3\n");

  const Dataset d = load_image_folder(root, {16, 1});
  REQUIRE(d.samples.shape() == Shape({2, 1, 16, 16}));
  CHECK(d.labels.empty());
  CHECK(d.class_names.empty());
  CHECK(d.classes() == 0);
  check_edge(d, 0, true, [](int64_t j) { return box_white(j, 30, 16, 10); });
  check_edge(d, 1, false, [](int64_t j) { return triangle_white(j, 8, 16, 3); });
}

TEST_CASE("image folder errors name the folder or file at fault", "[datasets]") {
  ScratchDir dir;
  const std::string missing = dir.file("no-such-folder");
  require_bad_input([&] { load_image_folder(missing, {}); }, missing);

  const std::string plain_file = write_bytes(dir.file("a-file.png"), "x");
  require_bad_input([&] { load_image_folder(plain_file, {}); }, plain_file);

  const std::string empty = dir.folder("empty");
  write_bytes(dir.file("empty/readme.txt"), "no images here");
  require_bad_input([&] { load_image_folder(empty, {}); }, empty);

  // Random bytes behind a .png name (a fixed-seed generator, for a fixed test).
  const std::string corrupt = dir.folder("corrupt");
  write_png(dir.file("corrupt/good.png"), 8, 8, {50});
  std::string noise;
  Rng rng(5, 5);
  for (int i = 0; i < 300; ++i) noise.push_back(static_cast<char>(rng.next_u32()));
  const std::string bad_png = write_bytes(dir.file("corrupt/noise.png"), noise);
  require_bad_input([&] { load_image_folder(corrupt, {}); }, bad_png);

  // A PNG whose header declares a width of 0.
  const std::string zero = dir.folder("zero");
  const std::string zero_png =
      write_bytes(dir.file("zero/flat.png"), palette_png(0, 4, {{1, 2, 3}}, {}));
  require_bad_input([&] { load_image_folder(zero, {}); }, zero_png);

  const std::string mixed = dir.folder("mixed");
  write_png(dir.file("mixed/loose.png"), 8, 8, {50});
  write_png(dir.file("mixed/cats/c.png"), 8, 8, {50});
  require_bad_input([&] { load_image_folder(mixed, {}); }, mixed);

  const std::string hollow = dir.folder("hollow");
  write_png(dir.file("hollow/cats/c.png"), 8, 8, {50});
  const std::string no_dogs = dir.folder("hollow/dogs");
  require_bad_input([&] { load_image_folder(hollow, {}); }, no_dogs);

  const std::string fine = dir.folder("fine");
  write_png(dir.file("fine/a.png"), 8, 8, {50});
  CHECK(error_kind_of([&] { load_image_folder(fine, {16, 2}); }) == ErrorKind::kBadArgument);
  CHECK(error_kind_of([&] { load_image_folder(fine, {0, 3}); }) == ErrorKind::kBadArgument);
}

// Little-endian bytes of v, n of them (BMP headers).
std::string le_bytes(uint64_t v, int n) {
  std::string s;
  for (int i = 0; i < n; ++i) s.push_back(static_cast<char>((v >> (8 * i)) & 0xFF));
  return s;
}

// A 54-byte BMP header (BITMAPINFOHEADER, 24 bits per pixel, no pixel data) claiming w × h.
std::string bmp_header(uint32_t w, uint32_t h) {
  return "BM" + le_bytes(54, 4) + le_bytes(0, 4) + le_bytes(54, 4) + le_bytes(40, 4) +
         le_bytes(w, 4) + le_bytes(h, 4) + le_bytes(1, 2) + le_bytes(24, 2) + le_bytes(0, 4) +
         le_bytes(0, 4) + le_bytes(2835, 4) + le_bytes(2835, 4) + le_bytes(0, 4) + le_bytes(0, 4);
}

TEST_CASE("hostile image files are refused from their first bytes, before decoding", "[datasets]") {
  ScratchDir dir;
  auto alone = [&](const std::string& name, const std::string& bytes) {
    const std::string folder = dir.folder("alone-" + name);
    return write_bytes(folder + "/" + name, bytes);
  };
  auto folder_of = [](const std::string& file) { return file.substr(0, file.rfind('/')); };

  // Regression: a Radiance HDR file named .png made the decoder loop forever. Files are
  // identified by their magic bytes (PNG 89 50 4e 47 0d 0a 1a 0a, JPEG ff d8 ff, BMP "BM").
  const std::string hdr = alone(
      "sky.png", "#?RADIANCE\nFORMAT=32-bit_rle_rgbe\n\n-Y 2 +X 2\n" + std::string(16, '\x02'));
  std::string message;
  CHECK(error_kind_of([&] { load_image_folder(folder_of(hdr), {}); }, &message) ==
        ErrorKind::kBadInputFile);
  CHECK(message == hdr + ": not a PNG, JPEG or BMP image (it starts with 23 3f 52 41 44 49 41 4e)");

  // Regression: a 54-byte BMP header claiming 16384 × 16384 took 3.9 GB; a PNG claiming
  // 20000 × 20000 (only its IHDR chunk, PNG specification §11.2.2) took 5.1 GB.
  const std::string bmp = alone("big.bmp", bmp_header(16384, 16384));
  require_bad_input(
      [&] { load_image_folder(folder_of(bmp), {}); },
      bmp + ": 16384x16384 pixels, more than the limit of 40000000 (data.pixel_limit)");
  std::string ihdr = "IHDR";
  for (uint32_t v : {20000u, 20000u})
    for (int b = 3; b >= 0; --b) ihdr.push_back(static_cast<char>((v >> (8 * b)) & 0xFF));
  ihdr += std::string("\x08\x00\x00\x00\x00", 5);  // 8-bit gray, deflate, no interlace
  const uint32_t crc = static_cast<uint32_t>(
      ::crc32(0, reinterpret_cast<const Bytef*>(ihdr.data()), static_cast<uInt>(ihdr.size())));
  std::string png = "\x89PNG\r\n\x1a\n" + std::string("\0\0\0\x0d", 4) + ihdr;
  for (int b = 3; b >= 0; --b) png.push_back(static_cast<char>((crc >> (8 * b)) & 0xFF));
  const std::string big_png = alone("big.png", png);
  require_bad_input([&] { load_image_folder(folder_of(big_png), {}); },
                    big_png + ": 20000x20000 pixels, more than the limit");

  // Found by fuzzing: a 54-byte BMP claiming 3 × 8,323,074 pixels (under the limit) was
  // decoded at full size from zeros read past its end. 24-bit rows of 3 pixels take 12 bytes.
  const std::string short_bmp = alone("short.bmp", bmp_header(3, 8323074));
  require_bad_input([&] { load_image_folder(folder_of(short_bmp), {}); },
                    short_bmp + ": truncated: its header claims 3x8323074 uncompressed pixels, " +
                        std::to_string(54 + 12 * 8323074) + " bytes, but the file holds 54");

  // The limit is adjustable: an 8 × 8 image passes a limit of 64 pixels, not one of 63.
  const std::string small = alone("small.png", "");
  write_png(small, 8, 8, {50});
  ImageFolderOptions tight;
  tight.size = 8;
  tight.pixel_limit = 64;
  CHECK(load_image_folder(folder_of(small), tight).samples.shape() == Shape{1, 3, 8, 8});
  tight.pixel_limit = 63;
  require_bad_input([&] { load_image_folder(folder_of(small), tight); },
                    small + ": 8x8 pixels, more than the limit of 63");

  // Regression: a DHT segment whose 16 code counts add up to more than 256 made the JPEG
  // decoder's table builder write past its arrays (ITU-T T.81 B.2.4.2: at most 256 codes).
  const std::string good_jpeg = alone("good.jpg", "");
  const std::vector<unsigned char> grey(16 * 16 * 3, 128);
  REQUIRE(stbi_write_jpg(good_jpeg.c_str(), 16, 16, 3, grey.data(), 90));
  std::ifstream in(good_jpeg, std::ios::binary);
  const std::string jpeg((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
  const auto* jp = reinterpret_cast<const unsigned char*>(jpeg.data());
  CHECK(image_format_of(jp, jpeg.size()) == "JPEG");
  CHECK(check_jpeg_huffman_tables(jp, jpeg.size()).empty());  // a real encoder's tables pass
  std::string dht = "\xff\xc4" + std::string("\x00\x13", 2) + std::string(1, '\0') +
                    std::string(16, '\xff');  // 16 × 255 = 4,080 codes
  const std::string hostile = jpeg.substr(0, 2) + dht + jpeg.substr(2);
  const std::string bad_jpeg = alone("tables.jpg", hostile);
  require_bad_input([&] { load_image_folder(folder_of(bad_jpeg), {}); },
                    bad_jpeg +
                        ": damaged JPEG: a Huffman table (DHT segment at byte 2) declares "
                        "4080 codes, more than the 256 a table can hold");
  // Found by fuzzing: the decoder skips stray bytes between segments, so a table behind one
  // must be checked too.
  const std::string behind =
      jpeg.substr(0, 2) + std::string("\xff\xe0\x00\x03\x00a", 6) + dht + jpeg.substr(2);
  const std::string stray_jpeg = alone("stray.jpg", behind);
  require_bad_input([&] { load_image_folder(folder_of(stray_jpeg), {}); },
                    stray_jpeg +
                        ": damaged JPEG: a Huffman table (DHT segment at byte 8) declares "
                        "4080 codes");
}

// ---- IDX ----------------------------------------------------------------------------------

// Xiao et al. 2017 (docs/references.md): the test split is 10,000 28×28 grayscale images, ten classes
// of 1,000; the label names in order.
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

// ---- tables --------------------------------------------------------------------------------

// The digits table (docs/references.md): 1,797 rows of 64 pixel values 0 to 16, then the label of
// 10 classes. tests/reference/check_table.py compares every value with numpy.loadtxt.
TEST_CASE("the digits table: 1,797 samples of 64 features, 10 classes", "[datasets]") {
  TableOptions options;
  options.label_column = -1;
  options.low = 0;
  options.high = 16;
  const Dataset d = load_table(kDigits, options);
  REQUIRE(d.samples.shape() == Shape({1797, 64}));
  CHECK(d.class_names ==
        std::vector<std::string>{"0", "1", "2", "3", "4", "5", "6", "7", "8", "9"});
  REQUIRE(d.labels.size() == 1797);
  std::vector<int64_t> per_class(10, 0);
  for (int64_t y : d.labels) ++per_class[static_cast<size_t>(y)];
  for (int64_t c : per_class) CHECK(c > 0);
  const auto [low, high] = std::minmax_element(d.samples.data(), d.samples.data() + 1797 * 64);
  CHECK(*low == -1.0f);  // values 0 and 16 both occur
  CHECK(*high == 1.0f);

  // The table's own range is 0..16, so the default (low == high) gives the same samples;
  // the label counted from the front gives the same labels.
  TableOptions own;
  own.label_column = 64;
  const Dataset same = load_table(kDigits, own);
  CHECK(same_bits(same.samples, d.samples));
  CHECK(same.labels == d.labels);
}

TEST_CASE("small tables: scaling, label columns, header, blanks, CRLF, gzip", "[datasets]") {
  ScratchDir dir;
  const std::string text = "1, 2,0\n3,4.5,1\r\n\n-1,+0.25 ,2\n";
  const std::string plain = write_bytes(dir.file("t.csv"), text);
  TableOptions options;
  options.label_column = -1;
  const Dataset d = load_table(plain, options);
  REQUIRE(d.samples.shape() == Shape({3, 2}));
  CHECK(d.labels == std::vector<int64_t>{0, 1, 2});
  CHECK(d.class_names == std::vector<std::string>{"0", "1", "2"});
  // Own range [−1, 4.5]: v ↦ 2 (v + 1) / 5.5 − 1.
  const std::vector<double> raw = {1, 2, 3, 4.5, -1, 0.25};
  for (size_t i = 0; i < raw.size(); ++i)
    CHECK(d.samples.data()[i] == Approx(2 * (raw[i] + 1) / 5.5 - 1).margin(1e-7));

  const std::string gz = write_gzip(dir.file("t.csv.gz"), text);
  const Dataset z = load_table(gz, options);
  CHECK(same_bits(z.samples, d.samples));
  CHECK(z.labels == d.labels);

  TableOptions first;
  first.label_column = 0;
  first.low = -2;
  first.high = 6;
  // [−2, 6] ↦ [−1, 1]: 2 ↦ 0, 6 ↦ 1, −2 ↦ −1, 4 ↦ 0.5 (all exact in binary).
  const Dataset f = load_table(write_bytes(dir.file("f.csv"), "1,2,6\n0,-2,4\n"), first);
  REQUIRE(f.samples.shape() == Shape({2, 2}));
  CHECK(f.labels == std::vector<int64_t>{1, 0});
  CHECK(f.samples.to_vector() == std::vector<float>{0.0f, 1.0f, -1.0f, 0.5f});

  TableOptions unlabelled;
  unlabelled.low = 0;
  unlabelled.high = 10;
  unlabelled.header = true;
  const Dataset u =
      load_table(write_bytes(dir.file("u.csv"), "width,height\n5,10\n0,2.5\n"), unlabelled);
  CHECK(u.samples.to_vector() == std::vector<float>{0.0f, 1.0f, -1.0f, -0.5f});
  CHECK(u.labels.empty());
  CHECK(u.classes() == 0);
}

TEST_CASE("tables at the ends of the double range scale without overflow", "[datasets]") {
  // Regression: ±1e308 made the range 2e308 = inf and put NaN into the samples. Expected
  // values from the formula 2 (v − low) / (high − low) − 1 worked out by hand.
  ScratchDir dir;
  const Dataset own = load_table(
      write_bytes(dir.file("wide.csv"), "-1e308,0\n1e308,5e307\n-1.7976931348623157e308,1\n"),
      TableOptions{});
  const std::vector<float> v = own.samples.to_vector();
  REQUIRE(v.size() == 6);
  for (float x : v) CHECK(std::isfinite(x));
  // The table's own range is [−DBL_MAX, 1e308]: −DBL_MAX ↦ −1, 1e308 ↦ 1.
  CHECK(v[4] == -1.0f);
  CHECK(v[2] == 1.0f);
  const double low = -1.7976931348623157e308, high = 1e308;
  CHECK(v[1] == Approx(2 * (0 / 2 - low / 2) / (high / 2 - low / 2) - 1).margin(1e-7));
  TableOptions given;
  given.low = -1e308;
  given.high = 1e308;
  const Dataset fixed =
      load_table(write_bytes(dir.file("given.csv"), "-1e308,0,1e308,5e307\n"), given);
  CHECK(fixed.samples.to_vector() == std::vector<float>{-1.0f, 0.0f, 1.0f, 0.5f});
}

TEST_CASE("table errors name the file and line", "[datasets]") {
  ScratchDir dir;
  TableOptions labelled;
  labelled.label_column = -1;
  auto bad = [&](const std::string& name, const std::string& text, const std::string& at,
                 const TableOptions& options) {
    const std::string path = write_bytes(dir.file(name), text);
    INFO(name);
    require_bad_input([&] { load_table(path, options); }, path + at);
  };
  bad("ragged.csv", "1,2,0\n3,4,1\n5,1\n", ":3:", labelled);
  bad("cell.csv", "1,2,0\n3,x4,1\n", ":2:", labelled);
  bad("empty_cell.csv", "1,,0\n", ":1:", labelled);
  bad("infinite.csv", "1,inf,0\n", ":1:", labelled);
  bad("negative.csv", "1,2,0\n3,4,-1\n", ":2:", labelled);
  bad("fraction.csv", "1,2,0.5\n", ":1:", labelled);
  bad("header.csv", "a,b,label\n1,2,0\n", ":1:", labelled);  // a header not declared
  bad("empty.csv", "", ": ", labelled);
  bad("only_blank.csv", "\n \n", ": ", labelled);
  bad("constant.csv", "3,3,0\n3,3,1\n", ": ", labelled);  // own range empty
  TableOptions header_only = labelled;
  header_only.header = true;
  bad("header_only.csv", "a,b,label\n", ": ", header_only);
  TableOptions ranged = labelled;
  ranged.low = 0;
  ranged.high = 16;
  bad("outside.csv", "1,2,0\n1,17,0\n", ":2:", ranged);
  TableOptions far = labelled;
  far.label_column = 3;
  bad("column.csv", "1,2,0\n", ": ", far);

  const std::string missing = dir.file("missing.csv");
  require_bad_input([&] { load_table(missing, labelled); }, missing);
  // A gzip file cut short of its end marker and checksum.
  std::string rows;
  for (int i = 0; i < 2000; ++i) rows += std::to_string(i) + "," + std::to_string(i % 7) + "\n";
  const std::string whole = write_gzip(dir.file("whole.csv.gz"), rows);
  std::ifstream in(whole, std::ios::binary);
  const std::string bytes((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
  const std::string cut = write_bytes(dir.file("cut.csv.gz"), bytes.substr(0, bytes.size() / 2));
  require_bad_input([&] { load_table(cut, labelled); }, cut);

  TableOptions reversed;
  reversed.low = 2;
  reversed.high = 1;
  CHECK(error_kind_of([&] { load_table(missing, reversed); }) == ErrorKind::kBadArgument);
}

}  // namespace
}  // namespace spar
