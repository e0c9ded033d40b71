#include "recipes/image_files.h"

#include <algorithm>
#include <cerrno>
#include <cstdio>
#include <cstring>
#include <limits>
#include <memory>
#include <new>
#include <vector>

#include "engine/error.h"

// stb_image, compiled here with only the readers spar accepts. STB_IMAGE_STATIC keeps every
// function of this copy private to this file, apart from the libstb the rest of spar links.
#define STB_IMAGE_STATIC
#define STB_IMAGE_IMPLEMENTATION
#define STBI_ONLY_PNG
#define STBI_ONLY_JPEG
#define STBI_ONLY_BMP
#define STBI_NO_STDIO
#define STBI_NO_LINEAR
#define STBI_NO_HDR
#define STBI_FAILURE_USERMSG
// stb copies zero bytes from or to a null pointer at times (an empty PNG data chunk before any
// data), which memcpy does not allow even for zero bytes (UBSan reports it): stb's copies go
// through one that skips empty copies. <cstring> is included above, so stb's own include of
// <string.h> does not see the macro.
namespace spar {
namespace detail {
inline void* copy_unless_empty(void* to, const void* from, size_t n) {
  return n ? std::memcpy(to, from, n) : to;
}
}  // namespace detail
}  // namespace spar
#define memcpy(to, from, n) ::spar::detail::copy_unless_empty(to, from, n)
#if defined(__GNUC__)
#pragma GCC diagnostic push
#pragma GCC diagnostic ignored "-Wall"
#pragma GCC diagnostic ignored "-Wextra"
#pragma GCC diagnostic ignored "-Wpedantic"
#pragma GCC diagnostic ignored "-Wshadow"
#pragma GCC diagnostic ignored "-Wunused-function"
#pragma GCC diagnostic ignored "-Wsign-compare"
#pragma GCC diagnostic ignored "-Wimplicit-fallthrough"
#pragma GCC diagnostic ignored "-Wmissing-field-initializers"
#pragma GCC diagnostic ignored "-Wunused-but-set-variable"
#pragma GCC diagnostic ignored "-Wdouble-promotion"
#endif
#include <stb/stb_image.h>
#if defined(__GNUC__)
#pragma GCC diagnostic pop
#endif
#undef memcpy

namespace spar {
namespace {

[[noreturn]] void fail(const std::string& path, const std::string& why) {
  raise(ErrorKind::kBadInputFile, path + ": " + why);
}

std::string hex_bytes(const unsigned char* p, size_t n) {
  std::string s;
  char b[4];
  for (size_t i = 0; i < n; ++i) {
    std::snprintf(b, sizeof b, "%02x", p[i]);
    s += (i ? " " : "") + std::string(b);
  }
  return s;
}

std::vector<unsigned char> read_file(const std::string& path) {
  std::unique_ptr<std::FILE, int (*)(std::FILE*)> f(std::fopen(path.c_str(), "rb"), std::fclose);
  if (!f) fail(path, std::string("cannot open: ") + std::strerror(errno));
  if (std::fseek(f.get(), 0, SEEK_END) != 0)
    fail(path, "cannot seek: " + std::string(std::strerror(errno)));
  const long size = std::ftell(f.get());
  if (size < 0) fail(path, std::string("cannot tell its size: ") + std::strerror(errno));
  if (size > kMaxImageFileBytes)
    fail(path, std::to_string(size) + " bytes; image files larger than " +
                   std::to_string(kMaxImageFileBytes >> 20) + " MiB are refused");
  std::rewind(f.get());
  std::vector<unsigned char> bytes(static_cast<size_t>(size));
  if (size > 0 && std::fread(bytes.data(), 1, bytes.size(), f.get()) != bytes.size())
    fail(path, std::string("cannot read: ") + std::strerror(errno));
  return bytes;
}

}  // namespace

std::string image_format_of(const unsigned char* p, size_t n) {
  static const unsigned char kPng[8] = {0x89, 'P', 'N', 'G', 0x0D, 0x0A, 0x1A, 0x0A};
  if (n >= 8 && std::memcmp(p, kPng, 8) == 0) return "PNG";
  if (n >= 3 && p[0] == 0xFF && p[1] == 0xD8 && p[2] == 0xFF) return "JPEG";
  if (n >= 2 && p[0] == 'B' && p[1] == 'M') return "BMP";
  return "";
}

// Walks the JPEG markers (ITU-T T.81, annex B) as stb's decoder reads them: every segment but
// SOI, EOI, RSTn and TEM carries a 2-byte big-endian length that counts itself; bytes other
// than 0xFF between segments are skipped; after a start-of-scan segment, entropy-coded data
// runs to the next marker (0xFF followed by neither 0x00, a stuffed byte, nor a restart
// marker). A DHT segment (0xC4) holds tables of a class/id byte, 16 code counts
// and as many symbols as the counts add up to, at most 256 (T.81 B.2.4.2).
std::string check_jpeg_huffman_tables(const unsigned char* p, size_t n) {
  if (image_format_of(p, n) != "JPEG") return "";
  bool defined[2][4] = {};  // [DC 0, AC 1][table 0..3]: set by a DHT segment so far
  size_t i = 2;
  while (i < n) {
    if (p[i] != 0xFF) {  // a stray byte between segments: the decoder skips it, so do we
      ++i;
      continue;
    }
    while (i < n && p[i] == 0xFF) ++i;  // fill bytes
    if (i >= n) return "";
    const unsigned marker = p[i++];
    if (marker == 0xD9) return "";  // end of image
    if (marker == 0xD8 || marker == 0x01 || marker == 0x00 || (marker >= 0xD0 && marker <= 0xD7))
      continue;
    if (n - i < 2) return "";
    const size_t length = (size_t{p[i]} << 8) | p[i + 1];
    if (length < 2) return "";
    const size_t end = n - i < length ? n : i + length;
    if (marker == 0xC4) {
      for (size_t q = i + 2; q < end;) {
        if (end - q < 17)
          return "a Huffman table (DHT segment at byte " + std::to_string(i - 2) + ") is cut short";
        if ((p[q] >> 4) <= 1 && (p[q] & 15) <= 3) defined[p[q] >> 4][p[q] & 15] = true;
        size_t codes = 0;
        for (size_t k = 1; k <= 16; ++k) codes += p[q + k];
        if (codes > 256)
          return "a Huffman table (DHT segment at byte " + std::to_string(i - 2) + ") declares " +
                 std::to_string(codes) + " codes, more than the 256 a table can hold";
        q += 17 + codes;
        if (q > end)
          return "a Huffman table (DHT segment at byte " + std::to_string(i - 2) +
                 ") runs past its segment";
      }
    }
    if (marker == 0xDA) {
      // The tables a scan decodes with must have been defined before it (T.81 B.2.3): the
      // decoder would read an undefined one from uninitialised memory. A scan of spectral
      // selection Ss..Se with high approximation bit Ah needs the DC table of each component
      // when it decodes DC values (Ss = 0, first pass Ah = 0), and its AC table when Se > 0.
      const size_t count = end - i > 2 ? p[i + 2] : 0;
      const size_t tail = i + 3 + 2 * count;  // Ss, Se, Ah|Al follow the components
      if (count > 0 && tail + 3 <= end) {
        const unsigned ss = p[tail], se = p[tail + 1], ah = p[tail + 2] >> 4;
        for (size_t c = 0; c < count; ++c) {
          const unsigned dc = p[i + 4 + 2 * c] >> 4, ac = p[i + 4 + 2 * c] & 15;
          const bool needs_dc = ss == 0 && ah == 0 && dc <= 3, needs_ac = se > 0 && ac <= 3;
          if ((needs_dc && !defined[0][dc]) || (needs_ac && !defined[1][ac]))
            return "the scan at byte " + std::to_string(i - 2) + " decodes with Huffman table " +
                   (needs_dc && !defined[0][dc] ? "DC " + std::to_string(dc)
                                                : "AC " + std::to_string(ac)) +
                   ", which no DHT segment before it defines";
        }
      }
    }
    i = end;
    if (marker == 0xDA)  // entropy-coded data up to the next real marker
      while (i + 1 < n &&
             !(p[i] == 0xFF && p[i + 1] != 0x00 && !(p[i + 1] >= 0xD0 && p[i + 1] <= 0xD7)))
        ++i;
  }
  return "";
}

std::string check_png_chunks(const unsigned char* p, size_t n) {
  // After the 8-byte signature: chunks of length (4 bytes, big-endian), type (4), data
  // (length bytes) and CRC (4) (PNG specification, 5.3).
  size_t at = 8;
  while (at + 8 <= n) {
    const uint64_t length =
        uint64_t{p[at]} << 24 | uint64_t{p[at + 1]} << 16 | uint64_t{p[at + 2]} << 8 | p[at + 3];
    const std::string type(reinterpret_cast<const char*>(p + at + 4), 4);
    if (length + 12 > n - at)
      return "truncated: its " + type + " chunk at byte " + std::to_string(at) + " claims " +
             std::to_string(length) + " bytes of data, but the file holds " +
             std::to_string(n - at) + " from there";
    if (type == "IEND") return "";
    at += 12 + static_cast<size_t>(length);
  }
  return "";
}

std::string check_bmp_length(const unsigned char* p, size_t n) {
  // BITMAPFILEHEADER (14 bytes) then an info header of at least 40 bytes: width at byte 18,
  // height at 22 (negative: top-down), bits per pixel at 28, compression at 30 (0: none,
  // 3 and 6: bit fields; both store rows as they are, each padded to 4 bytes).
  if (n < 34) return "";
  const auto u32 = [p](size_t at) {
    return uint32_t{p[at]} | uint32_t{p[at + 1]} << 8 | uint32_t{p[at + 2]} << 16 |
           uint32_t{p[at + 3]} << 24;
  };
  const uint64_t offset = u32(10);
  const int64_t width = static_cast<int32_t>(u32(18)), height = static_cast<int32_t>(u32(22));
  const uint64_t bits = p[28] | (p[29] << 8), compression = u32(30);
  if (compression != 0 && compression != 3 && compression != 6) return "";
  if (u32(14) < 40 || width <= 0 || height == 0 || bits == 0) return "";
  const uint64_t row = (bits * static_cast<uint64_t>(width) + 31) / 32 * 4;
  const uint64_t rows = static_cast<uint64_t>(height < 0 ? -height : height);
  const uint64_t needed = offset + row * rows;
  if (needed <= n) return "";
  return "truncated: its header claims " + std::to_string(width) + "x" + std::to_string(rows) +
         " uncompressed pixels, " + std::to_string(needed) + " bytes, but the file holds " +
         std::to_string(n);
}

DecodedImage decode_image_file(const std::string& path, int64_t pixel_limit,
                               const std::string& limit_key) {
  try {
    const std::vector<unsigned char> bytes = read_file(path);
    const std::string format = image_format_of(bytes.data(), bytes.size());
    if (format.empty())
      fail(path, bytes.empty()
                     ? "empty file, not a PNG, JPEG or BMP image"
                     : "not a PNG, JPEG or BMP image (it starts with " +
                           hex_bytes(bytes.data(), std::min<size_t>(bytes.size(), 8)) + ")");
    if (bytes.size() > static_cast<size_t>(std::numeric_limits<int>::max()))
      fail(path, "too large for the decoder");
    const int size = static_cast<int>(bytes.size());
    // Before the decoder reads the header: reading it builds the Huffman tables too.
    if (format == "JPEG") {
      const std::string bad = check_jpeg_huffman_tables(bytes.data(), bytes.size());
      if (!bad.empty()) fail(path, "damaged JPEG: " + bad);
    }
    if (format == "PNG") {
      const std::string bad = check_png_chunks(bytes.data(), bytes.size());
      if (!bad.empty()) fail(path, bad);
    }
    int w = 0, h = 0, n = 0;
    if (!stbi_info_from_memory(bytes.data(), size, &w, &h, &n)) {
      const char* reason = stbi_failure_reason();
      fail(path, "cannot read its " + format + " header: " + (reason ? reason : "no reason given"));
    }
    const int64_t pixels = static_cast<int64_t>(w) * h;
    if (w <= 0 || h <= 0)
      fail(path, "the image is " + std::to_string(w) + "x" + std::to_string(h) + " pixels");
    if (pixels > pixel_limit)
      fail(path, std::to_string(w) + "x" + std::to_string(h) + " pixels, more than the limit of " +
                     std::to_string(pixel_limit) + " (" + limit_key + ")");
    if (format == "BMP") {
      const std::string bad = check_bmp_length(bytes.data(), bytes.size());
      if (!bad.empty()) fail(path, bad);
    }
    DecodedImage image;
    image.pixels.reset(
        stbi_load_from_memory(bytes.data(), size, &image.width, &image.height, &image.channels, 0),
        stbi_image_free);
    if (!image.pixels) {
      const char* reason = stbi_failure_reason();
      fail(path, "cannot decode as " + format + ": " + (reason ? reason : "no reason given"));
    }
    if (image.width != w || image.height != h || image.channels < 1 || image.channels > 4)
      fail(path, "the decoder returned an image other than its header announced");
    return image;
  } catch (const std::bad_alloc&) {
    fail(path, "out of memory while decoding");
  }
}

}  // namespace spar
