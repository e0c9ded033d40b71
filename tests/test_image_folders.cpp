// Image folders (recipes/datasets.h, recipes/image_files.h): classes, modes, crops, hostile files.
#include <stb/stb_image_write.h>
#include <zlib.h>

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <fstream>
#include <functional>
#include <string>
#include <vector>

#include "recipes/datasets.h"
#include "recipes/image_files.h"
#include "tests/image_encoders.h"
#include "tests/support.h"

namespace spar {
namespace {

using testing::bmp_header;
using testing::error_kind_of;
using testing::palette_png;
using testing::read_bytes;
using testing::require_bad_input;
using testing::Rgba;
using testing::ScratchDir;
using testing::write_bytes;

std::vector<unsigned char> solid(int w, int h, const Rgba& pixel) {
  std::vector<unsigned char> data;
  for (int i = 0; i < w * h; ++i) data.insert(data.end(), pixel.begin(), pixel.end());
  return data;
}

void write_png(const std::string& path, int w, int h, const Rgba& pixel) {
  const int comp = static_cast<int>(pixel.size());
  REQUIRE(stbi_write_png(path.c_str(), w, h, comp, solid(w, h, pixel).data(), w * comp) != 0);
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
    const Dataset d = load_images(root, {16, 3});
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
    const Dataset d = load_images(root, {16, 1});
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

  const Dataset d = load_images(root, {16, 1});
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
  require_bad_input([&] { load_images(missing, {}); }, missing);

  const std::string plain_file = write_bytes(dir.file("a-file.png"), "x");
  require_bad_input([&] { load_images(plain_file, {}); }, plain_file);

  const std::string empty = dir.folder("empty");
  write_bytes(dir.file("empty/readme.txt"), "no images here");
  require_bad_input([&] { load_images(empty, {}); }, empty);

  // Random bytes behind a .png name (a fixed-seed generator, for a fixed test).
  const std::string corrupt = dir.folder("corrupt");
  write_png(dir.file("corrupt/good.png"), 8, 8, {50});
  std::string noise;
  Rng rng(5, 5);
  for (int i = 0; i < 300; ++i) noise.push_back(static_cast<char>(rng.next_u32()));
  const std::string bad_png = write_bytes(dir.file("corrupt/noise.png"), noise);
  require_bad_input([&] { load_images(corrupt, {}); }, bad_png);

  // A PNG whose header declares a width of 0.
  const std::string zero = dir.folder("zero");
  const std::string zero_png =
      write_bytes(dir.file("zero/flat.png"), palette_png(0, 4, {{1, 2, 3}}, {}));
  require_bad_input([&] { load_images(zero, {}); }, zero_png);

  const std::string mixed = dir.folder("mixed");
  write_png(dir.file("mixed/loose.png"), 8, 8, {50});
  write_png(dir.file("mixed/cats/c.png"), 8, 8, {50});
  require_bad_input([&] { load_images(mixed, {}); }, mixed);

  const std::string hollow = dir.folder("hollow");
  write_png(dir.file("hollow/cats/c.png"), 8, 8, {50});
  const std::string no_dogs = dir.folder("hollow/dogs");
  require_bad_input([&] { load_images(hollow, {}); }, no_dogs);

  const std::string fine = dir.folder("fine");
  write_png(dir.file("fine/a.png"), 8, 8, {50});
  CHECK(error_kind_of([&] { load_images(fine, {16, 2}); }) == ErrorKind::kBadArgument);
  CHECK(error_kind_of([&] { load_images(fine, {0, 3}); }) == ErrorKind::kBadArgument);
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
  CHECK(error_kind_of([&] { load_images(folder_of(hdr), {}); }, &message) ==
        ErrorKind::kBadInputFile);
  CHECK(message == hdr + ": not a PNG, JPEG or BMP image (it starts with 23 3f 52 41 44 49 41 4e)");

  // Regression: a 54-byte BMP header claiming 16384 × 16384 took 3.9 GB; a PNG claiming
  // 20000 × 20000 (only its IHDR chunk, PNG specification §11.2.2) took 5.1 GB.
  const std::string bmp = alone("big.bmp", bmp_header(16384, 16384));
  require_bad_input(
      [&] { load_images(folder_of(bmp), {}); },
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
  require_bad_input([&] { load_images(folder_of(big_png), {}); },
                    big_png + ": 20000x20000 pixels, more than the limit");

  // Found by fuzzing: a 54-byte BMP claiming 3 × 8,323,074 pixels (under the limit) was
  // decoded at full size from zeros read past its end. 24-bit rows of 3 pixels take 12 bytes.
  const std::string short_bmp = alone("short.bmp", bmp_header(3, 8323074));
  require_bad_input([&] { load_images(folder_of(short_bmp), {}); },
                    short_bmp + ": truncated: its header claims 3x8323074 uncompressed pixels, " +
                        std::to_string(54 + 12 * 8323074) + " bytes, but the file holds 54");

  // The limit is adjustable: an 8 × 8 image passes a limit of 64 pixels, not one of 63.
  const std::string small = alone("small.png", "");
  write_png(small, 8, 8, {50});
  ImageLoadOptions tight;
  tight.size = 8;
  tight.pixel_limit = 64;
  CHECK(load_images(folder_of(small), tight).samples.shape() == Shape{1, 3, 8, 8});
  tight.pixel_limit = 63;
  require_bad_input([&] { load_images(folder_of(small), tight); },
                    small + ": 8x8 pixels, more than the limit of 63");

  // Found by an hour of fuzzing: a PNG data chunk claiming more bytes than the file holds made
  // the decoder grow its buffer to the claimed size first (2 GiB for a 108-byte file).
  std::string claims = read_bytes(small);
  const size_t idat = claims.find("IDAT");
  REQUIRE(idat != std::string::npos);
  const std::string huge_length("\x7f\xff\xff\xf0", 4);
  claims.replace(idat - 4, 4, huge_length);
  const auto* cp = reinterpret_cast<const unsigned char*>(claims.data());
  CHECK(check_png_chunks(cp, claims.size()) ==
        "truncated: its IDAT chunk at byte " + std::to_string(idat - 4) +
            " claims 2147483632 bytes of data, but the file holds " +
            std::to_string(claims.size() - (idat - 4)) + " from there");
  const std::string claiming_png = alone("claims.png", claims);
  require_bad_input([&] { load_images(folder_of(claiming_png), {}); },
                    claiming_png + ": truncated: its IDAT chunk");
  const std::string good_png = read_bytes(small);  // a real encoder's file passes
  CHECK(check_png_chunks(reinterpret_cast<const unsigned char*>(good_png.data()), good_png.size())
            .empty());

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
  require_bad_input([&] { load_images(folder_of(bad_jpeg), {}); },
                    bad_jpeg +
                        ": damaged JPEG: a Huffman table (DHT segment at byte 2) declares "
                        "4080 codes, more than the 256 a table can hold");
  // Found by fuzzing: the decoder skips stray bytes between segments, so a table behind one
  // must be checked too.
  const std::string behind =
      jpeg.substr(0, 2) + std::string("\xff\xe0\x00\x03\x00a", 6) + dht + jpeg.substr(2);
  const std::string stray_jpeg = alone("stray.jpg", behind);
  require_bad_input([&] { load_images(folder_of(stray_jpeg), {}); },
                    stray_jpeg +
                        ": damaged JPEG: a Huffman table (DHT segment at byte 8) declares "
                        "4080 codes");
  // Found by an hour of fuzzing: a scan whose component names a Huffman table that no DHT
  // segment defined (T.81 B.2.3 allows tables 0 to 3) made the decoder read the table from
  // uninitialised memory, past its arrays (UBSan). Here the first component of the encoder's
  // own scan is pointed at AC table 2 (its tables are 0 and 1).
  const size_t sos = jpeg.find("\xff\xda");
  REQUIRE(sos != std::string::npos);
  std::string undefined = jpeg;
  undefined[sos + 6] = static_cast<char>((undefined[sos + 6] & 0xF0) | 2);  // Td|Ta of component 1
  const auto* up = reinterpret_cast<const unsigned char*>(undefined.data());
  CHECK(check_jpeg_huffman_tables(up, undefined.size()) ==
        "the scan at byte " + std::to_string(sos) +
            " decodes with Huffman table AC 2, which no DHT segment before it defines");
  const std::string undefined_jpeg = alone("undefined.jpg", undefined);
  require_bad_input([&] { load_images(folder_of(undefined_jpeg), {}); },
                    undefined_jpeg + ": damaged JPEG: the scan at byte " + std::to_string(sos));
}

}  // namespace
}  // namespace spar
