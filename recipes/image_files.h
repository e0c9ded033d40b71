// Decoding one image file from outside, guarded. The file is identified by its first bytes
// (PNG, JPEG or BMP, whatever its name says), its size is read from its header and checked
// against a pixel limit before any pixel is decoded, JPEG Huffman tables are checked before
// the decoder builds them, and running out of memory becomes an error naming the file.
// The decoder is stb_image compiled into spar with only its PNG, JPEG and BMP readers, so no
// file reaches a reader of another format (Radiance HDR, GIF, PSD, ...) by its name.
//
// Thread safety: decode_image_file may be called from several threads at once, except that
// the decoder's failure reason is a process-wide string (a message may name another
// thread's reason).
#pragma once

#include <cstdint>
#include <memory>
#include <string>

namespace spar {

// The default pixel limit: 40 million pixels (a 7,000 × 5,000 photograph fits), which caps
// the memory one image takes while it is decoded and resampled at about 800 MB.
constexpr int64_t kDefaultPixelLimit = 40'000'000;
// Files larger than this are refused before they are read: 512 MiB.
constexpr int64_t kMaxImageFileBytes = int64_t{512} << 20;

struct DecodedImage {
  int width = 0, height = 0;
  int channels = 0;                             // 1 gray, 2 gray + alpha, 3 RGB, 4 RGBA
  std::shared_ptr<const unsigned char> pixels;  // row-major, channels interleaved, 8 bits
};

// Raises kBadInputFile "<path>: <why>" for a file that cannot be read, is not PNG, JPEG or
// BMP, has more than `pixel_limit` pixels (`limit_key` names the setting in the message),
// holds an invalid JPEG Huffman table, or does not decode.
DecodedImage decode_image_file(const std::string& path, int64_t pixel_limit,
                               const std::string& limit_key);

// "PNG", "JPEG" or "BMP" for bytes that start like such a file, else "" (exposed for tests).
std::string image_format_of(const unsigned char* bytes, size_t size);
// The first invalid use of JPEG Huffman tables in `bytes` as a message: a DHT segment whose
// code counts add up to more than 256 or that runs past its segment, or a scan that decodes
// with a table no DHT segment before it defines; "" when there is none or the bytes are not
// a JPEG file (exposed for tests).
std::string check_jpeg_huffman_tables(const unsigned char* bytes, size_t size);

// A message when an uncompressed BMP file is shorter than the rows its header claims (the
// decoder would read zeros for the missing bytes, at the full claimed size), else "" (exposed
// for tests).
std::string check_bmp_length(const unsigned char* bytes, size_t size);
// A message when a PNG chunk before IEND claims more bytes than the file holds after it (the
// decoder would first grow its buffer for a compressed-data chunk to the claimed size: a
// 108-byte file asked for 2 GiB), else "" (exposed for tests).
std::string check_png_chunks(const unsigned char* bytes, size_t size);

}  // namespace spar
