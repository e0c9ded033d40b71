// Image files for the tests, written from their specifications independently of spar's decoders:
// the formats and headers stb_image_write cannot produce. Plain functions, no shared state.
#pragma once

#include <cstdint>
#include <string>
#include <vector>

namespace spar {
namespace testing {

using Rgba = std::vector<unsigned char>;  // one pixel, 1 to 4 channels

// An 8-bit palette PNG (colour type 3) written from the PNG specification (W3C PNG, 2nd ed.,
// ISO/IEC 15948): signature; chunks of length, type, data and CRC-32 over type and data
// (zlib's crc32 is the specification's CRC); IHDR, PLTE, IDAT (a zlib stream of the rows, each
// led by filter byte 0), IEND. stb_image_write has no palette mode.
std::string palette_png(uint32_t w, uint32_t h, const std::vector<Rgba>& palette,
                        const std::vector<unsigned char>& indices);

// A 54-byte BMP header (BITMAPINFOHEADER, 24 bits per pixel, no pixel data) claiming w × h.
std::string bmp_header(uint32_t w, uint32_t h);

}  // namespace testing
}  // namespace spar
