// ConvGeometry: the stride and zero padding of a 2-D convolution, and the output-size rule.
// A value type; thread-safe to read.
#pragma once

#include <cstdint>

namespace spar {

// Stride and zero padding per spatial axis (height, width).
struct ConvGeometry {
  int64_t stride_rows = 1, stride_cols = 1;
  int64_t pad_rows = 0, pad_cols = 0;
};

// The output extent along one axis, from Dumoulin & Visin (2016), "A guide to convolution
// arithmetic for deep learning": o = ⌊(i + 2p − k)/s⌋ + 1. Raises kBadShape naming `op` when
// the kernel does not fit or kernel < 1, stride < 1 or pad < 0.
int64_t conv_output_extent(int64_t in, int64_t kernel, int64_t stride, int64_t pad, const char* op);

// The output extent of the transposed convolution with output padding a (0 <= a < stride):
// o' = s(i' − 1) + a + k − 2p (Dumoulin & Visin 2016). Raises kBadShape naming `op` when a is
// out of range or the result is below 1.
int64_t conv_transpose_output_extent(int64_t in, int64_t kernel, int64_t stride, int64_t pad,
                                     int64_t output_pad, const char* op);

}  // namespace spar
