// The test image encoders declared in tests/image_encoders.h.
#include "tests/image_encoders.h"

#include <zlib.h>

#include <catch2/catch.hpp>

namespace spar {
namespace testing {
namespace {

// Little-endian bytes of v, n of them (BMP headers).
std::string le_bytes(uint64_t v, int n) {
  std::string s;
  for (int i = 0; i < n; ++i) s.push_back(static_cast<char>((v >> (8 * i)) & 0xFF));
  return s;
}

}  // namespace

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

std::string bmp_header(uint32_t w, uint32_t h) {
  return "BM" + le_bytes(54, 4) + le_bytes(0, 4) + le_bytes(54, 4) + le_bytes(40, 4) +
         le_bytes(w, 4) + le_bytes(h, 4) + le_bytes(1, 2) + le_bytes(24, 2) + le_bytes(0, 4) +
         le_bytes(0, 4) + le_bytes(2835, 4) + le_bytes(2835, 4) + le_bytes(0, 4) + le_bytes(0, 4);
}

}  // namespace testing
}  // namespace spar
