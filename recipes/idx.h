// Reading IDX files: the simple array format of the MNIST and Fashion-MNIST data sets, plain
// or gzip-compressed.
//
// Layout (LeCun's MNIST page): two zero bytes; a type byte (0x08 unsigned byte, 0x09 signed
// byte, 0x0B int16, 0x0C int32, 0x0D float32, 0x0E float64); a byte with the number of
// dimensions d; d extents, each a 4-byte big-endian unsigned integer, outermost first; then
// the product of the extents elements, row-major, each big-endian. Nothing may follow.
// A file that starts with the gzip magic bytes 1f 8b is decompressed on the fly.
//
// The reader checks every length before it allocates: the extents' product (and its size in
// bytes) must not overflow, and the data must fit the file (exactly, for a plain file; within
// what a gzip file of that size can expand to, for a compressed one, whose buffer then grows
// only as decompressed bytes arrive). Any fault raises kBadInputFile "<path>: <why>" in one
// line (kIo when the operating system refuses a read).
//
// Thread safety: the functions are reentrant; distinct calls may run on distinct threads.
#pragma once

#include <cstdint>
#include <string>
#include <vector>

#include "engine/tensor.h"

namespace spar {

// The element type, as its byte in the file.
enum class IdxType : uint8_t {
  kUnsigned8 = 0x08,
  kSigned8 = 0x09,
  kInt16 = 0x0B,
  kInt32 = 0x0C,
  kFloat32 = 0x0D,
  kFloat64 = 0x0E,
};

const char* to_string(IdxType type);  // "unsigned byte", "int16", "float64", ...
int idx_element_bytes(IdxType type);  // 1, 1, 2, 4, 4, 8

// An IDX file read as float values.
struct IdxTensor {
  IdxType type = IdxType::kUnsigned8;  // as declared by the file
  std::vector<int64_t> extents;        // as in the file, outermost first
  // The elements with shape `extents`. Byte and int16 values are exact; int32 values beyond
  // 2^24 in magnitude and float64 values are rounded to the nearest float (float64 values
  // beyond the float range become ±infinity).
  Tensor<float> values;
};

// Reads a whole IDX file as floats. Rank 0 (one element) to kMaxRank; a file with more
// dimensions raises kBadInputFile.
IdxTensor read_idx(const std::string& path);

// An IDX file of integers (labels) read exactly.
struct IdxIntegers {
  IdxType type = IdxType::kUnsigned8;
  std::vector<int64_t> extents;  // any number of dimensions
  std::vector<int64_t> values;   // row-major, the product of the extents of them
};

// Reads a whole IDX file of an integer type (bytes, int16 or int32), as label files are.
// A float32 or float64 file raises kBadInputFile.
IdxIntegers read_idx_integers(const std::string& path);

}  // namespace spar
