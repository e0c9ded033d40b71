// recipes/idx.h: the IDX reader, on the packaged Fashion-MNIST files and on small files written
// here byte by byte (plain and gzipped), including every malformed case the reader names.
#include <unistd.h>
#include <zlib.h>

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <filesystem>
#include <fstream>
#include <string>
#include <vector>

#include "recipes/idx.h"
#include "tests/support.h"

namespace spar {
namespace {

using Bytes = std::vector<unsigned char>;
using testing::error_kind_of;
using testing::ScratchDir;

const std::string kFashionDir = "/usr/share/datasets/fashion-mnist/";

std::string write_plain(const std::string& path, const Bytes& bytes) {
  std::ofstream out(path, std::ios::binary);
  out.write(reinterpret_cast<const char*>(bytes.data()),
            static_cast<std::streamsize>(bytes.size()));
  REQUIRE(out.good());
  return path;
}

// Compressed through zlib's gzip writer.
std::string write_gzip(const std::string& path, const Bytes& bytes) {
  gzFile f = gzopen(path.c_str(), "wb");
  REQUIRE(f != nullptr);
  if (!bytes.empty())
    REQUIRE(gzwrite(f, bytes.data(), static_cast<unsigned>(bytes.size())) ==
            static_cast<int>(bytes.size()));
  REQUIRE(gzclose(f) == Z_OK);
  return path;
}

Bytes read_file(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  return Bytes(std::istreambuf_iterator<char>(in), std::istreambuf_iterator<char>());
}

// Header per the IDX description (LeCun's MNIST page): 00 00, type byte, rank byte, then each
// extent as 4 big-endian bytes; followed by `data` as given.
Bytes idx_file(unsigned char type, const std::vector<uint32_t>& extents, const Bytes& data) {
  Bytes b = {0, 0, type, static_cast<unsigned char>(extents.size())};
  for (uint32_t e : extents) {
    b.push_back(static_cast<unsigned char>(e >> 24));
    b.push_back(static_cast<unsigned char>(e >> 16));
    b.push_back(static_cast<unsigned char>(e >> 8));
    b.push_back(static_cast<unsigned char>(e));
  }
  b.insert(b.end(), data.begin(), data.end());
  return b;
}

// The error raised for `path` by `read`: kind kBadInputFile, one line, naming the file and,
// when `why` is given, containing it.
template <class Read>
void require_bad_file(const std::string& path, Read&& read, const std::string& why = "") {
  std::string message;
  CHECK(error_kind_of([&] { read(path); }, &message) == ErrorKind::kBadInputFile);
  INFO(message);
  CHECK(message.rfind(path + ": ", 0) == 0);
  CHECK(message.find(why) != std::string::npos);
  CHECK(message.find('\n') == std::string::npos);
}

void require_bad_idx(const std::string& path, const std::string& why = "") {
  require_bad_file(
      path, [](const std::string& p) { read_idx(p); }, why);
  require_bad_file(
      path, [](const std::string& p) { read_idx_integers(p); }, why);
}

// ---- the packaged Fashion-MNIST files ----------------------------------------------------

// Xiao et al. 2017: 60,000 training and 10,000 test images of 28×28 grayscale bytes, ten
// classes with 6,000 training and 1,000 test images each.
void check_fashion_split(const std::string& stem, int64_t images, int64_t per_class) {
  const IdxTensor x = read_idx(kFashionDir + stem + "-images-idx3-ubyte.gz");
  CHECK(x.type == IdxType::kUnsigned8);
  CHECK(x.extents == std::vector<int64_t>{images, 28, 28});
  REQUIRE(x.values.shape() == Shape({images, 28, 28}));
  const float* v = x.values.data();
  float low = v[0], high = v[0];
  bool whole = true;
  for (int64_t i = 0; i < x.values.element_count(); ++i) {
    low = std::min(low, v[i]);
    high = std::max(high, v[i]);
    whole = whole && v[i] == std::floor(v[i]);
  }
  CHECK(whole);
  CHECK(low == 0.0f);  // the byte range 0..255 is used from end to end
  CHECK(high == 255.0f);

  const IdxIntegers y = read_idx_integers(kFashionDir + stem + "-labels-idx1-ubyte.gz");
  CHECK(y.type == IdxType::kUnsigned8);
  CHECK(y.extents == std::vector<int64_t>{images});
  REQUIRE(static_cast<int64_t>(y.values.size()) == images);
  std::vector<int64_t> counts(10, 0);
  for (int64_t label : y.values) {
    REQUIRE(label >= 0);
    REQUIRE(label <= 9);
    ++counts[static_cast<size_t>(label)];
  }
  for (int c = 0; c < 10; ++c) {
    INFO("class " << c);
    CHECK(counts[static_cast<size_t>(c)] == per_class);
  }
  // "The released files are not sorted by label" (docs/references.md, Fashion-MNIST).
  CHECK_FALSE(std::is_sorted(y.values.begin(), y.values.end()));
}

TEST_CASE("idx: Fashion-MNIST training split, 60,000 images, 6,000 per class") {
  check_fashion_split("train", 60000, 6000);  // Xiao et al. 2017
}

TEST_CASE("idx: Fashion-MNIST test split, 10,000 images, 1,000 per class") {
  check_fashion_split("t10k", 10000, 1000);  // Xiao et al. 2017
}

TEST_CASE("idx: Fashion-MNIST first labels and pixel total") {
  const IdxIntegers y = read_idx_integers(kFashionDir + "train-labels-idx1-ubyte.gz");
  // First ten training labels 9 0 0 3 0 2 7 2 5 5 (from memory; also what
  // numpy.frombuffer(gzip.open(path).read()[8:], numpy.uint8)[:10] gives).
  CHECK(std::vector<int64_t>(y.values.begin(), y.values.begin() + 10) ==
        std::vector<int64_t>{9, 0, 0, 3, 0, 2, 7, 2, 5, 5});
  // Sum of all training pixels: numpy.frombuffer(gzip.open(path).read()[16:],
  // numpy.uint8).sum(dtype=numpy.int64) = 3431114169.
  const IdxTensor x = read_idx(kFashionDir + "train-images-idx3-ubyte.gz");
  int64_t total = 0;
  for (int64_t i = 0; i < x.values.element_count(); ++i)
    total += static_cast<int64_t>(x.values.data()[i]);
  CHECK(total == 3431114169);
}

// ---- every element type, big-endian, plain and gzipped ---------------------------------

struct TypeCase {
  const char* name;
  unsigned char type;
  Bytes data;                 // three elements, big-endian
  std::vector<double> exact;  // their values
  bool integral;
};

// Expected values follow from big-endian byte order (IDX) and, for floats, IEEE 754
// binary32/binary64 encodings.
std::vector<TypeCase> type_cases() {
  return {
      {"unsigned byte", 0x08, {0x00, 0x80, 0xff}, {0, 128, 255}, true},
      {"signed byte", 0x09, {0x80, 0xff, 0x7f}, {-128, -1, 127}, true},
      {"int16", 0x0B, {0x01, 0x02, 0xff, 0xfe, 0x80, 0x00}, {258, -2, -32768}, true},
      {"int32",
       0x0C,
       {0x01, 0x02, 0x03, 0x04, 0xff, 0xff, 0xff, 0xfe, 0x80, 0x00, 0x00, 0x00},
       {16909060, -2, -2147483648.0},
       true},
      // 1.5, -0.15625 (= -5/32) and 2^-126 (the smallest normal binary32).
      {"float32",
       0x0D,
       {0x3f, 0xc0, 0x00, 0x00, 0xbe, 0x20, 0x00, 0x00, 0x00, 0x80, 0x00, 0x00},
       {1.5, -0.15625, std::ldexp(1.0, -126)},
       false},
      // 2.5, -1/1024 and 1 + 2^-52 (which rounds to 1 as a float).
      {"float64",
       0x0E,
       {0x40, 0x04, 0, 0, 0,    0,    0, 0, 0xbf, 0x50, 0, 0,
        0,    0,    0, 0, 0x3f, 0xf0, 0, 0, 0,    0,    0, 0x01},
       {2.5, -1.0 / 1024, 1.0 + std::ldexp(1.0, -52)},
       false},
  };
}

TEST_CASE("idx: each element type decodes big-endian, plain and gzipped") {
  ScratchDir dir;
  for (const TypeCase& c : type_cases()) {
    for (bool gzip : {false, true}) {
      INFO(c.name << (gzip ? ", gzipped" : ", plain"));
      const Bytes file = idx_file(c.type, {3}, c.data);
      const std::string path = dir.file(std::string(c.name) + (gzip ? ".idx.gz" : ".idx"));
      gzip ? write_gzip(path, file) : write_plain(path, file);

      const IdxTensor t = read_idx(path);
      CHECK(static_cast<unsigned>(t.type) == c.type);
      CHECK(t.extents == std::vector<int64_t>{3});
      REQUIRE(t.values.shape() == Shape({3}));
      for (int i = 0; i < 3; ++i) CHECK(t.values.data()[i] == static_cast<float>(c.exact[i]));

      if (c.integral) {
        const IdxIntegers n = read_idx_integers(path);
        CHECK(n.extents == std::vector<int64_t>{3});
        REQUIRE(n.values.size() == 3);
        for (int i = 0; i < 3; ++i) CHECK(n.values[i] == static_cast<int64_t>(c.exact[i]));
      } else {
        require_bad_file(path, [](const std::string& p) { read_idx_integers(p); });
      }
    }
  }
  // 1 + 2^-52 is not a float: read_idx rounds it to the nearest, 1.
  CHECK(static_cast<float>(1.0 + std::ldexp(1.0, -52)) == 1.0f);
}

TEST_CASE("idx: int32 beyond 2^24 is exact as an integer, rounded as a float") {
  ScratchDir dir;
  // 0x01000001 = 16777217 = 2^24 + 1: the nearest float is 2^24 (round to even).
  const std::string path =
      write_plain(dir.file("big.idx"), idx_file(0x0C, {1}, {0x01, 0x00, 0x00, 0x01}));
  CHECK(read_idx_integers(path).values == std::vector<int64_t>{16777217});
  CHECK(read_idx(path).values.data()[0] == 16777216.0f);
}

TEST_CASE("idx: shapes are row-major, of rank 0 to kMaxRank, and may be empty") {
  ScratchDir dir;
  Bytes data;
  for (unsigned char k = 0; k < 24; ++k) data.push_back(k);
  const IdxTensor t = read_idx(write_gzip(dir.file("234.gz"), idx_file(0x08, {2, 3, 4}, data)));
  REQUIRE(t.values.shape() == Shape({2, 3, 4}));
  CHECK(t.values.at({1, 2, 3}) == 23.0f);
  CHECK(t.values.at({1, 0, 2}) == 14.0f);

  const IdxTensor scalar = read_idx(write_plain(dir.file("rank0"), idx_file(0x08, {}, {42})));
  CHECK(scalar.values.shape() == Shape{});
  CHECK(scalar.values.as_scalar() == 42.0f);

  const IdxTensor empty = read_idx(write_plain(dir.file("empty"), idx_file(0x0D, {5, 0, 7}, {})));
  CHECK(empty.values.shape() == Shape({5, 0, 7}));
  CHECK(empty.values.element_count() == 0);
  CHECK(
      read_idx_integers(write_gzip(dir.file("empty.gz"), idx_file(0x08, {0}, {}))).values.empty());

  // Seven dimensions: more than a tensor holds, but fine as integers.
  const std::string seven =
      write_plain(dir.file("rank7"), idx_file(0x08, {1, 1, 1, 1, 1, 1, 2}, {7, 8}));
  require_bad_file(seven, [](const std::string& p) { read_idx(p); });
  CHECK(read_idx_integers(seven).values == std::vector<int64_t>{7, 8});
}

// ---- malformed files: kBadInputFile naming the file ------------------------------------

TEST_CASE("idx: missing file, folder, empty file") {
  ScratchDir dir;
  require_bad_idx(dir.file("no-such-file.idx"), "cannot open: No such file or directory");
  require_bad_idx(dir.file(""), "not a regular file");  // the folder itself
  require_bad_idx(write_plain(dir.file("empty.idx"), {}), "empty file");
  require_bad_idx(write_gzip(dir.file("empty.gz"), {}), "empty file");
}

TEST_CASE("idx: a bad magic is not an IDX file") {
  ScratchDir dir;
  require_bad_idx(write_plain(dir.file("text"), {'h', 'e', 'l', 'l', 'o'}),
                  "not an IDX file: it starts with 68 65");
  require_bad_idx(write_plain(dir.file("one-byte"), {0x01}), "not an IDX file: it starts with 01,");
  Bytes shifted = idx_file(0x08, {1}, {5});
  shifted[1] = 0x08;  // 00 08 08 01 ...
  require_bad_idx(write_plain(dir.file("shifted"), shifted), "not an IDX file");
  require_bad_idx(write_gzip(dir.file("shifted.gz"), shifted), "not an IDX file");
}

TEST_CASE("idx: an unknown type byte") {
  ScratchDir dir;
  for (unsigned char type : {0x00, 0x07, 0x0A, 0x0F, 0xFF}) {
    INFO("type " << int(type));
    require_bad_idx(write_plain(dir.file("type"), idx_file(type, {1}, {0, 0, 0, 0, 0, 0, 0, 0})),
                    "unknown element type byte");
  }
}

TEST_CASE("idx: truncated header or data, plain and gzipped") {
  ScratchDir dir;
  const Bytes whole = idx_file(0x0B, {2, 3}, Bytes(12, 0x11));
  // Every proper prefix: cut inside the magic, the extents or the data.
  for (size_t keep = 1; keep < whole.size(); ++keep) {
    INFO("first " << keep << " of " << whole.size() << " bytes");
    const Bytes cut(whole.begin(), whole.begin() + static_cast<std::ptrdiff_t>(keep));
    require_bad_idx(write_plain(dir.file("cut"), cut), "truncated");
    require_bad_idx(write_gzip(dir.file("cut.gz"), cut), "truncated");
  }
}

TEST_CASE("idx: trailing bytes after the data, plain and gzipped") {
  ScratchDir dir;
  const Bytes longer = idx_file(0x08, {2, 2}, {1, 2, 3, 4, 5});
  require_bad_idx(write_plain(dir.file("long"), longer), "1 trailing bytes");
  require_bad_idx(write_gzip(dir.file("long.gz"), longer), "trailing bytes");
}

TEST_CASE("idx: an extents product past the engine's element limit") {
  ScratchDir dir;
  // (2^32−1)^4 is far past 2^63.
  require_bad_idx(
      write_plain(dir.file("huge"),
                  idx_file(0x08, {0xffffffffu, 0xffffffffu, 0xffffffffu, 0xffffffffu}, {})),
      "exceed the limit of 281474976710656 elements");
  // 2^31 · 2^31 · 2 = 2^63 one-byte elements: one past the largest int64.
  require_bad_idx(write_plain(dir.file("edge"), idx_file(0x08, {1u << 31, 1u << 31, 2}, {})),
                  "exceed the limit");
  // 2^24 · 2^24 + a row = just past kMaxElements (2^48)...
  require_bad_idx(write_gzip(dir.file("edge.gz"), idx_file(0x0E, {(1u << 24) + 1, 1u << 24}, {})),
                  "exceed the limit");
  // ...while 2^48 float64 elements (2^51 bytes) are counted, and are then too long for the file.
  require_bad_idx(write_gzip(dir.file("fits.gz"), idx_file(0x0E, {1u << 24, 1u << 24}, {})),
                  "truncated");
  // A zero extent does not excuse absurd others: the 16-byte file [2^32−1, 2^32−1, 0] once
  // overflowed the element count while building its empty tensor (regression).
  require_bad_idx(
      write_plain(dir.file("zero-absurd"), idx_file(0x08, {0xffffffffu, 0xffffffffu, 0}, {})),
      "exceed the limit");
  // An honest empty file: a zero extent makes the count zero.
  CHECK(read_idx_integers(write_plain(dir.file("zero"), idx_file(0x08, {60000, 28, 0}, {})))
            .values.empty());
}

TEST_CASE("idx: a header claiming more than the file holds fails before allocating") {
  ScratchDir dir;
  // 60,000 × (2^31−1) bytes, about 1.3e14: the reader must refuse from the file size, not try
  // to allocate and throw std::bad_alloc (which require_bad_idx counts as a failure).
  const Bytes liar = idx_file(0x08, {60000, 0x7fffffffu}, {1, 2});
  require_bad_idx(write_gzip(dir.file("liar.gz"), liar), "more than a gzip file of");
  require_bad_idx(write_plain(dir.file("liar"), liar), "truncated");
}

TEST_CASE("idx: a truncated or damaged gzip file errors instead of crashing") {
  ScratchDir dir;
  Bytes data;
  for (int k = 0; k < 4096; ++k) data.push_back(static_cast<unsigned char>((k * 37) % 251));
  const std::string good = write_gzip(dir.file("good.gz"), idx_file(0x08, {64, 64}, data));
  REQUIRE(read_idx(good).values.element_count() == 4096);
  const Bytes packed = read_file(good);
  REQUIRE(packed.size() > 20);
  // Every proper prefix of the compressed file, from one that stops inside the gzip header to
  // one that lacks only the last byte of the trailer's CRC-32 and length. (A single byte 1f
  // is not yet the gzip magic and reads as a non-IDX file.)
  require_bad_idx(write_plain(dir.file("cut.gz"), {packed[0]}), "not an IDX file");
  for (size_t keep = 2; keep < packed.size(); ++keep) {
    INFO("first " << keep << " of " << packed.size() << " compressed bytes");
    require_bad_idx(
        write_plain(dir.file("cut.gz"),
                    Bytes(packed.begin(), packed.begin() + static_cast<std::ptrdiff_t>(keep))),
        "truncated");
  }
  // A flipped byte in the middle of the deflate data (caught by inflate or the CRC-32).
  Bytes flipped = packed;
  flipped[packed.size() / 2] ^= 0x5a;
  require_bad_idx(write_plain(dir.file("flipped.gz"), flipped), "damaged gzip data");
}

}  // namespace
}  // namespace spar
