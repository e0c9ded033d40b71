// 2-D convolution kernels (NCHW), lowered to Eigen's GEMM.
//
// Each sample's input is unfolded into columns ("im2col": one row per (channel, kernel row,
// kernel column), one column per output position), so the convolution becomes one matrix
// product with the filters viewed as an [O, C·KH·KW] matrix. Samples are processed in fixed
// groups whose columns sit side by side, so each GEMM is wide enough to run near peak; groups
// run in parallel, each with its own buffers from the pool, and each GEMM is single-threaded
// (parallel.h). The group size depends only on the shapes, so results are bit-identical for
// any thread count. The weight gradient sums one partial product per group, in group order.
//
// Unfolding goes through the stride phases of the padded input (Phases below), so a strided
// gather becomes a copy of contiguous runs, with fixed-width loops for the common output
// widths. At the DCGAN shapes of benchmarks/conv_bench.cpp (one thread) this made unfolding
// about 2× and folding 3 to 8× faster than gathering and scattering with the stride directly.
// Folding adds the columns into zeroed phases in the same (c, ki, kj, oi, oj) order as a
// direct scatter into the output, then copies the phases out, so each output element is the
// same sum, in the same order, either way.
#include <Eigen/Core>
#include <algorithm>
#include <cstring>
#include <functional>
#include <string>
#include <type_traits>
#include <vector>

#include "engine/error.h"
#include "engine/kernels.h"
#include "engine/parallel.h"

namespace spar {

int64_t conv_output_extent(int64_t in, int64_t kernel, int64_t stride, int64_t pad,
                           const char* op) {
  if (kernel < 1 || stride < 1 || pad < 0)
    raise(ErrorKind::kBadShape, std::string(op) + ": kernel " + std::to_string(kernel) +
                                    ", stride " + std::to_string(stride) + ", padding " +
                                    std::to_string(pad) +
                                    " (need kernel ≥ 1, stride ≥ 1, padding ≥ 0)");
  const int64_t span = in + 2 * pad - kernel;
  if (span < 0)
    raise(ErrorKind::kBadShape, std::string(op) + ": a kernel of " + std::to_string(kernel) +
                                    " does not fit an input of " + std::to_string(in) +
                                    " with padding " + std::to_string(pad));
  return span / stride + 1;
}

int64_t conv_transpose_output_extent(int64_t in, int64_t kernel, int64_t stride, int64_t pad,
                                     int64_t output_pad, const char* op) {
  if (output_pad < 0 || output_pad >= stride)
    raise(ErrorKind::kBadShape, std::string(op) + ": output padding " + std::to_string(output_pad) +
                                    " must lie in 0.." + std::to_string(stride - 1) +
                                    " for stride " + std::to_string(stride));
  const int64_t out = stride * (in - 1) + output_pad + kernel - 2 * pad;
  if (in < 1 || out < 1)
    raise(ErrorKind::kBadShape, std::string(op) + ": an input of " + std::to_string(in) +
                                    " gives an output of " + std::to_string(out));
  return out;
}

namespace kernels {
namespace {

// The geometry of one forward convolution, validated once.
struct ConvShape {
  int64_t n, c, h, w;  // input
  int64_t o, kh, kw;   // filters
  int64_t oh, ow;      // output
  ConvGeometry g;
  int64_t ckk() const { return c * kh * kw; }
  int64_t positions() const { return oh * ow; }
};

void count_flops(const ConvShape& s) {
  add_product_flops(2 * s.n * s.o * s.positions() * s.ckk());
}

std::string dims(const Shape& s) {
  return s.str();
}

std::string extents(int64_t a, int64_t b) {
  return std::to_string(a) + " × " + std::to_string(b);
}

// Describes the operands of a failing call for its error message, e.g. "input [2, 3, 5, 5]
// and weight [4, 3, 3, 3]"; built only when a check fails.
using Operands = std::function<std::string()>;

// Raises kBadShape naming `op` unless stride ≥ 1, padding ≥ 0 and kernel ≥ 1 on both axes.
void check_geometry(const ConvGeometry& g, int64_t kh, int64_t kw, const char* op,
                    const Operands& operands) {
  if (g.stride_rows < 1 || g.stride_cols < 1 || g.pad_rows < 0 || g.pad_cols < 0 || kh < 1 ||
      kw < 1)
    raise(ErrorKind::kBadShape,
          std::string(op) + ": stride " + extents(g.stride_rows, g.stride_cols) + ", padding " +
              extents(g.pad_rows, g.pad_cols) + ", kernel " + extents(kh, kw) +
              " (need stride ≥ 1, padding ≥ 0, kernel ≥ 1; " + operands() + ")");
}

// Validates the geometry of a convolution with input `x` and weight `w` (for the transposed
// convolution and the weight gradient, the shapes they imply) and derives the output extents.
ConvShape conv_shape(const Shape& x, const Shape& w, const ConvGeometry& g, const char* op,
                     const Operands& operands) {
  if (x.rank() != 4 || w.rank() != 4)
    raise(ErrorKind::kBadShape, std::string(op) +
                                    ": expects input [N, C, H, W] and weight [O, C, KH, KW], got " +
                                    dims(x) + " and " + dims(w));
  if (x[1] != w[1])
    raise(ErrorKind::kBadShape, std::string(op) + ": input " + dims(x) + " has " +
                                    std::to_string(x[1]) + " channels but weight " + dims(w) +
                                    " expects " + std::to_string(w[1]));
  ConvShape s{x[0], x[1], x[2], x[3], w[0], w[2], w[3], 0, 0, g};
  check_geometry(g, s.kh, s.kw, op, operands);
  if (s.h + 2 * g.pad_rows < s.kh || s.w + 2 * g.pad_cols < s.kw)
    raise(ErrorKind::kBadShape, std::string(op) + ": a " + extents(s.kh, s.kw) +
                                    " kernel does not fit a " + extents(s.h, s.w) +
                                    " input with padding " + extents(g.pad_rows, g.pad_cols) +
                                    " (" + operands() + ")");
  s.oh = conv_output_extent(s.h, s.kh, g.stride_rows, g.pad_rows, op);
  s.ow = conv_output_extent(s.w, s.kw, g.stride_cols, g.pad_cols, op);
  return s;
}

std::string geometry_text(const ConvGeometry& g) {
  return "stride " + extents(g.stride_rows, g.stride_cols) + " and padding " +
         extents(g.pad_rows, g.pad_cols);
}

// Samples per GEMM: about 2^19 column entries (a couple of MB) for a wide, efficient product,
// but at most a quarter of the batch so that several threads have work.
int64_t group_size(const ConvShape& s) {
  const int64_t per_sample = std::max<int64_t>(1, s.ckk() * s.positions());
  const int64_t wide = std::max<int64_t>(1, (int64_t{1} << 19) / per_sample);
  return std::min(wide, std::max<int64_t>(1, (s.n + 3) / 4));
}

// The output positions ow whose input column ow·stride − pad + k lies inside 0..extent-1.
void valid_range(int64_t out, int64_t extent, int64_t stride, int64_t pad, int64_t k, int64_t& lo,
                 int64_t& hi) {
  // ow·s − p + k >= 0  ⇔  ow >= ceil((p − k)/s);  ow·s − p + k <= extent − 1  ⇔  ow <= ⌊(extent − 1
  // + p − k)/s⌋
  const int64_t a = pad - k;
  lo = a <= 0 ? 0 : (a + stride - 1) / stride;
  const int64_t b = extent - 1 + pad - k;
  hi = b < 0 ? 0 : std::min(out, b / stride + 1);
  lo = std::min(lo, hi);
}

// The zero-padded input of one sample split into its stride phases. Plane (c, a, b) holds
// xpad[c][i·s_h + a][j·s_w + b] for i < rows, j < cols, where xpad is x with its zero padding.
// Tap (ki, kj) of output (oi, oj) reads xpad[oi·s_h + ki][oj·s_w + kj], which is plane
// (c, ki mod s_h, kj mod s_w) at (oi + ki div s_h, oj + kj div s_w): for each output row a
// contiguous run of OW values, whatever the stride.
struct Phases {
  int64_t ph, pw;             // phases present per axis: min(stride, kernel)
  int64_t rows, cols;         // plane extents: OH + (KH − 1) div s_h and OW + (KW − 1) div s_w
  std::vector<int64_t> taps;  // per tap ki·KW + kj, its first input within a channel's planes

  explicit Phases(const ConvShape& s)
      : ph(std::min(s.g.stride_rows, s.kh)),
        pw(std::min(s.g.stride_cols, s.kw)),
        rows(s.oh + (s.kh - 1) / s.g.stride_rows),
        cols(s.ow + (s.kw - 1) / s.g.stride_cols),
        taps(static_cast<size_t>(s.kh * s.kw)) {
    for (int64_t ki = 0; ki < s.kh; ++ki)
      for (int64_t kj = 0; kj < s.kw; ++kj)
        taps[ki * s.kw + kj] = offset(0, ki % s.g.stride_rows, kj % s.g.stride_cols) +
                               (ki / s.g.stride_rows) * cols + kj / s.g.stride_cols;
  }
  int64_t plane() const { return rows * cols; }
  int64_t channel() const { return ph * pw * plane(); }  // one channel's planes
  int64_t size(const ConvShape& s) const { return s.c * channel(); }
  // Whether every input position lies in some plane (so merge_phases writes all of x): all
  // stride phases are present (kernel ≥ stride) and the planes reach the last row and column.
  bool covers_input(const ConvShape& s) const {
    return ph == s.g.stride_rows && pw == s.g.stride_cols &&
           (s.h - 1 + s.g.pad_rows) / s.g.stride_rows < rows &&
           (s.w - 1 + s.g.pad_cols) / s.g.stride_cols < cols;
  }
  // Whether split_phases_in_pairs and merge_phases_in_pairs apply: width stride 2 with both
  // column phases present, an even width, and every input column inside the planes.
  bool pairs(const ConvShape& s) const {
    return s.g.stride_cols == 2 && pw == 2 && s.w % 2 == 0 && (s.w - 1 + s.g.pad_cols) / 2 < cols;
  }
  int64_t offset(int64_t c, int64_t a, int64_t b) const {
    return c * channel() + (a * pw + b) * plane();
  }
};

// Copies sample x (C×H×W) into its phase planes. Only the positions that hold x are written:
// the zero padding is the same for every sample, so the caller zeroes the planes once and
// reuses them (a per-row fill of one or two padding values compiled to a memset call per row,
// which cost more than the copy). kStride is the width stride when fixed at compile time
// (0: s.g.stride_cols).
template <int kStride, class T>
void split_phases(const T* x, const ConvShape& s, const Phases& f, T* planes) {
  const int64_t stride = kStride > 0 ? kStride : s.g.stride_cols, cols = f.cols;
  for (int64_t b = 0; b < f.pw; ++b) {
    int64_t lo, hi;
    valid_range(cols, s.w, stride, s.g.pad_cols, b, lo, hi);
    for (int64_t c = 0; c < s.c; ++c)
      for (int64_t a = 0; a < f.ph; ++a) {
        T* dst = planes + f.offset(c, a, b);
        for (int64_t i = 0; i < f.rows; ++i, dst += cols) {
          const int64_t ih = i * s.g.stride_rows + a - s.g.pad_rows;
          if (ih < 0 || ih >= s.h) continue;
          const T* src = x + (c * s.h + ih) * s.w + b - s.g.pad_cols;
          for (int64_t j = lo; j < hi; ++j) dst[j] = src[j * stride];
        }
      }
  }
}

// For width stride 2 when Phases::pairs holds: calls move(row, even, odd) with the offsets of
// every row of x that lies in the planes and of its even and odd plane rows. Input column 2k + e
// (e = 0, 1) is padded column 2k + e + pad: phase (e + pad) mod 2, plane column k + (e + pad)
// div 2.
template <class Move>
void for_each_row_in_pairs(const ConvShape& s, const Phases& f, Move&& move) {
  const int64_t pad = s.g.pad_cols;
  const int64_t even_phase = pad % 2, odd_phase = (pad + 1) % 2;
  const int64_t even_shift = pad / 2, odd_shift = (pad + 1) / 2;
  for (int64_t c = 0; c < s.c; ++c)
    for (int64_t a = 0; a < f.ph; ++a)
      for (int64_t i = 0; i < f.rows; ++i) {
        const int64_t ih = i * s.g.stride_rows + a - s.g.pad_rows;
        if (ih < 0 || ih >= s.h) continue;
        move((c * s.h + ih) * s.w, f.offset(c, a, even_phase) + i * f.cols + even_shift,
             f.offset(c, a, odd_phase) + i * f.cols + odd_shift);
      }
}

// split_phases for width stride 2 when Phases::pairs holds: each input row of kWidth values is
// split into its even and odd elements in one pass that reads the whole row, which the
// compiler turns into vector shuffles (the per-phase strided gathers above stay scalar for rows
// this short).
template <int kWidth, class T>
void split_phases_in_pairs(const T* x, const ConvShape& s, const Phases& f, T* planes) {
  for_each_row_in_pairs(s, f, [&](int64_t row, int64_t even_row, int64_t odd_row) {
    const T* __restrict src = x + row;
    T* __restrict even = planes + even_row;
    T* __restrict odd = planes + odd_row;
    for (int64_t k = 0; k < kWidth / 2; ++k) {
      even[k] = src[2 * k];
      odd[k] = src[2 * k + 1];
    }
  });
}

// Writes phase planes back into sample x (C×H×W), dropping the padding. Each element of x lies
// in at most one plane; those in none (a phase no tap reaches) are left as they are.
template <int kStride, class T>
void merge_phases(const T* planes, const ConvShape& s, const Phases& f, T* x) {
  const int64_t stride = kStride > 0 ? kStride : s.g.stride_cols, cols = f.cols;
  for (int64_t b = 0; b < f.pw; ++b) {
    int64_t lo, hi;
    valid_range(cols, s.w, stride, s.g.pad_cols, b, lo, hi);
    for (int64_t c = 0; c < s.c; ++c)
      for (int64_t a = 0; a < f.ph; ++a) {
        const T* src = planes + f.offset(c, a, b);
        for (int64_t i = 0; i < f.rows; ++i, src += cols) {
          const int64_t ih = i * s.g.stride_rows + a - s.g.pad_rows;
          if (ih < 0 || ih >= s.h) continue;
          T* dst = x + (c * s.h + ih) * s.w + b - s.g.pad_cols;
          for (int64_t j = lo; j < hi; ++j) dst[j * stride] = src[j];
        }
      }
  }
}

// The reverse of split_phases_in_pairs: each row of x is written whole from its even and odd
// plane rows in one pass.
template <int kWidth, class T>
void merge_phases_in_pairs(const T* planes, const ConvShape& s, const Phases& f, T* x) {
  for_each_row_in_pairs(s, f, [&](int64_t row, int64_t even_row, int64_t odd_row) {
    T* __restrict dst = x + row;
    const T* __restrict even = planes + even_row;
    const T* __restrict odd = planes + odd_row;
    for (int64_t k = 0; k < kWidth / 2; ++k) {
      dst[2 * k] = even[k];
      dst[2 * k + 1] = odd[k];
    }
  });
}

// Unfolds one sample's phase planes into rows of `col` (row stride ld) at columns
// col0..col0+OH·OW-1: row (c, ki, kj) holds the input under tap (ki, kj) at every output.
// kWidth is OW when fixed at compile time (0: s.ow), so that each run is a few vector moves.
template <int kWidth, class T>
void im2col(const T* planes, const ConvShape& s, const Phases& f, T* col, int64_t ld,
            int64_t col0) {
  const int64_t ow = kWidth > 0 ? kWidth : s.ow, oh = s.oh, pitch = f.cols;
  const int64_t taps = s.kh * s.kw;
  for (int64_t c = 0; c < s.c; ++c) {
    const T* channel = planes + f.offset(c, 0, 0);
    for (int64_t t = 0; t < taps; ++t) {
      T* row = col + (c * taps + t) * ld + col0;
      const T* src = channel + f.taps[t];
      for (int64_t oi = 0; oi < oh; ++oi) {
        if constexpr (kWidth > 0)  // a constant-size copy: a few vector moves, even for 7, 14
          std::memcpy(row + oi * ow, src + oi * pitch, sizeof(T) * kWidth);
        else
          for (int64_t oj = 0; oj < ow; ++oj) row[oi * ow + oj] = src[oi * pitch + oj];
      }
    }
  }
}

// dst[0..kWidth) += src[0..kWidth) as runs of 8, 4, 2 and 1: loops of those fixed lengths
// vectorise, while one loop of 7 or 14 compiles to as many scalar additions.
template <int kWidth, class T>
inline void add_run(T* __restrict dst, const T* __restrict src) {
  constexpr int k8 = kWidth / 8 * 8, k4 = k8 + (kWidth - k8) / 4 * 4,
                k2 = k4 + (kWidth - k4) / 2 * 2;
  for (int j = 0; j < k8; ++j) dst[j] += src[j];
  for (int j = k8; j < k4; ++j) dst[j] += src[j];
  for (int j = k4; j < k2; ++j) dst[j] += src[j];
  for (int j = k2; j < kWidth; ++j) dst[j] += src[j];
}

// The adjoint of im2col: adds the columns into zeroed phase planes, in (c, ki, kj, oi, oj)
// order.
template <int kWidth, class T>
void col2im(const T* col, const ConvShape& s, const Phases& f, int64_t ld, int64_t col0,
            T* planes) {
  const int64_t ow = kWidth > 0 ? kWidth : s.ow, oh = s.oh, pitch = f.cols;
  const int64_t taps = s.kh * s.kw;
  std::fill(planes, planes + f.size(s), T(0));
  for (int64_t c = 0; c < s.c; ++c) {
    T* channel = planes + f.offset(c, 0, 0);
    for (int64_t t = 0; t < taps; ++t) {
      const T* row = col + (c * taps + t) * ld + col0;
      T* dst = channel + f.taps[t];
      for (int64_t oi = 0; oi < oh; ++oi) {
        if constexpr (kWidth > 0)
          add_run<kWidth>(dst + oi * pitch, row + oi * ow);
        else
          for (int64_t oj = 0; oj < ow; ++oj) dst[oi * pitch + oj] += row[oi * ow + oj];
      }
    }
  }
}

// Calls f(std::integral_constant<int, W>()) with W = n when n is one of kValues, else with
// W = 0 (meaning: read at run time), so that loops over widths the shipped architectures use
// are compiled for their exact length.
template <int... kValues, class F>
void with_fixed(int64_t n, F&& f) {
  bool done = false;
  ((done = done || (n == kValues && (f(std::integral_constant<int, kValues>()), true))), ...);
  if (!done) f(std::integral_constant<int, 0>());
}

// Output widths of the 28, 32 and 64-pixel DCGAN pairs (im2col, col2im), their input widths
// at stride 2 (split_phases_in_pairs), and the strides compiled for.
template <class F>
void with_fixed_output_width(int64_t ow, F&& f) {
  with_fixed<4, 7, 8, 14, 16, 32>(ow, f);
}
template <class F>
void with_fixed_input_width(int64_t w, F&& f) {
  with_fixed<8, 14, 16, 28, 32, 64>(w, f);
}
template <class F>
void with_fixed_stride(int64_t stride, F&& f) {
  with_fixed<1, 2>(stride, f);
}

// Writes the columns of samples n0..n0+count-1 of x into `col` ([C·KH·KW, count·OH·OW]) through
// `planes`.
template <class T>
void samples_to_columns(const T* x, const ConvShape& s, const Phases& f, int64_t n0, int64_t count,
                        T* planes, T* col) {
  const int64_t chw = s.c * s.h * s.w, p = s.positions(), ld = count * p;
  std::fill(planes, planes + f.size(s), T(0));  // the padding, for every sample (split_phases)
  const bool pairs = f.pairs(s);
  for (int64_t i = 0; i < count; ++i) {
    const T* sample = x + (n0 + i) * chw;
    with_fixed_input_width(pairs ? s.w : 0, [&](auto width) {
      if constexpr (decltype(width)::value > 0)
        split_phases_in_pairs<decltype(width)::value>(sample, s, f, planes);
      else
        with_fixed_stride(s.g.stride_cols, [&](auto stride) {
          split_phases<decltype(stride)::value>(sample, s, f, planes);
        });
    });
    with_fixed_output_width(
        s.ow, [&](auto width) { im2col<decltype(width)::value>(planes, s, f, col, ld, i * p); });
  }
}

// The adjoint of samples_to_columns: adds `col` back into samples n0..n0+count-1 of x through
// `planes`.
template <class T>
void columns_to_samples(const T* col, const ConvShape& s, const Phases& f, int64_t n0,
                        int64_t count, T* planes, T* x) {
  const int64_t chw = s.c * s.h * s.w, p = s.positions(), ld = count * p;
  const bool pairs = f.pairs(s);
  for (int64_t i = 0; i < count; ++i) {
    with_fixed_output_width(
        s.ow, [&](auto width) { col2im<decltype(width)::value>(col, s, f, ld, i * p, planes); });
    T* sample = x + (n0 + i) * chw;
    with_fixed_input_width(pairs ? s.w : 0, [&](auto width) {
      if constexpr (decltype(width)::value > 0)
        merge_phases_in_pairs<decltype(width)::value>(planes, s, f, sample);
      else
        with_fixed_stride(s.g.stride_cols, [&](auto stride) {
          merge_phases<decltype(stride)::value>(planes, s, f, sample);
        });
    });
  }
}

template <class T>
using Matrix = Eigen::Matrix<T, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor>;
template <class T>
using ConstMap = Eigen::Map<const Matrix<T>>;
template <class T>
using MutableMap = Eigen::Map<Matrix<T>>;
// One sample's block of columns within a group's [rows, count·P] matrix.
template <class T>
using ConstBlock = Eigen::Map<const Matrix<T>, 0, Eigen::OuterStride<>>;
template <class T>
using MutableBlock = Eigen::Map<Matrix<T>, 0, Eigen::OuterStride<>>;

// Output positions per sample from which each sample gets its own GEMM on its block of the
// group's columns, instead of one GEMM for the group plus a copy between the group's layout
// and the [N, O, P] samples. The weight is then packed once per sample instead of once per
// group, which is cheap against 2·P multiply-adds per packed entry, and the copy, which is
// bound by memory bandwidth and scaled poorly to two threads, goes away. Measured on the DCGAN
// shapes of benchmarks/conv_bench.cpp: 30% faster on two threads at P = 256 (3→64 channels,
// 32² → 16²), 5 to 15% slower at P = 64 and P = 16.
constexpr int64_t kPerSamplePositions = 256;

// Copies the per-sample [O, P] blocks of samples n0..n0+count-1 of an [N, O, P] tensor side by
// side into an [O, count·P] matrix; scatter_samples does the reverse.
template <class T>
void gather_samples(const T* samples, int64_t n0, int64_t count, int64_t o, int64_t p, T* wide) {
  for (int64_t i = 0; i < count; ++i)
    for (int64_t r = 0; r < o; ++r)
      std::memcpy(wide + r * count * p + i * p, samples + ((n0 + i) * o + r) * p, sizeof(T) * p);
}
template <class T>
void scatter_samples(const T* wide, int64_t n0, int64_t count, int64_t o, int64_t p, T* samples) {
  for (int64_t i = 0; i < count; ++i)
    for (int64_t r = 0; r < o; ++r)
      std::memcpy(samples + ((n0 + i) * o + r) * p, wide + r * count * p + i * p, sizeof(T) * p);
}

// Runs body(first sample, count, group index) for each fixed group of samples, in parallel.
template <class Body>
void for_each_group(const ConvShape& s, Body&& body) {
  detail::ensure_eigen_single_threaded();
  const int64_t size = group_size(s), groups = (s.n + size - 1) / size;
  parallel_for(groups, true,
               [&](int64_t gi) { body(gi * size, std::min(size, s.n - gi * size), gi); });
}

}  // namespace

template <class T>
Tensor<T> convolution(const Tensor<T>& x, const Tensor<T>& w, const ConvGeometry& g) {
  const ConvShape s = conv_shape(x.shape(), w.shape(), g, "convolution", [&] {
    return "input " + dims(x.shape()) + ", weight " + dims(w.shape());
  });
  count_flops(s);
  Tensor<T> y = Tensor<T>::uninitialised({s.n, s.o, s.oh, s.ow});
  const int64_t p = s.positions();
  const Phases f(s);
  const ConstMap<T> filters(w.data(), s.o, s.ckk());
  for_each_group(s, [&](int64_t n0, int64_t count, int64_t) {
    const int64_t ld = count * p;
    Tensor<T> col = Tensor<T>::uninitialised({s.ckk(), ld});
    Tensor<T> planes = Tensor<T>::uninitialised({f.size(s)});
    samples_to_columns(x.data(), s, f, n0, count, planes.mutable_data(), col.mutable_data());
    if (count == 1 || p >= kPerSamplePositions) {
      for (int64_t i = 0; i < count; ++i)
        MutableMap<T>(y.mutable_data() + (n0 + i) * s.o * p, s.o, p).noalias() =
            filters * ConstBlock<T>(col.data() + i * p, s.ckk(), p, Eigen::OuterStride<>(ld));
      return;
    }
    Tensor<T> wide = Tensor<T>::uninitialised({s.o, ld});
    MutableMap<T>(wide.mutable_data(), s.o, ld).noalias() =
        filters * ConstMap<T>(col.data(), s.ckk(), ld);
    scatter_samples(wide.data(), n0, count, s.o, p, y.mutable_data());
  });
  return y;
}

template <class T>
Tensor<T> transposed_convolution(const Tensor<T>& z, const Tensor<T>& w, const ConvGeometry& g,
                                 int64_t out_h, int64_t out_w) {
  if (z.rank() != 4 || w.rank() != 4)
    raise(ErrorKind::kBadShape,
          "transposed_convolution: expects input [N, O, OH, OW] and weight [O, C, KH, KW], got " +
              dims(z.shape()) + " and " + dims(w.shape()));
  if (z.dim(1) != w.dim(0))
    raise(ErrorKind::kBadShape, "transposed_convolution: input " + dims(z.shape()) + " has " +
                                    std::to_string(z.dim(1)) + " channels but weight " +
                                    dims(w.shape()) + " expects " + std::to_string(w.dim(0)));
  const auto operands = [&] {
    return "input " + dims(z.shape()) + ", weight " + dims(w.shape()) + ", output size " +
           extents(out_h, out_w);
  };
  check_geometry(g, w.dim(2), w.dim(3), "transposed_convolution", operands);
  // The outputs a convolution maps onto z's extents: o' = s(i' − 1) + a + k − 2p with output
  // padding 0 <= a < s (Dumoulin & Visin 2016), and at least 1.
  const int64_t lo_h = g.stride_rows * (z.dim(2) - 1) + w.dim(2) - 2 * g.pad_rows;
  const int64_t lo_w = g.stride_cols * (z.dim(3) - 1) + w.dim(3) - 2 * g.pad_cols;
  const int64_t hi_h = lo_h + g.stride_rows - 1, hi_w = lo_w + g.stride_cols - 1;
  if (z.dim(2) < 1 || z.dim(3) < 1 || out_h < std::max<int64_t>(1, lo_h) || out_h > hi_h ||
      out_w < std::max<int64_t>(1, lo_w) || out_w > hi_w)
    raise(ErrorKind::kBadShape,
          "transposed_convolution: output size " + extents(out_h, out_w) + " does not fit input " +
              dims(z.shape()) + " and weight " + dims(w.shape()) + " with " + geometry_text(g) +
              ": it must be " + std::to_string(std::max<int64_t>(1, lo_h)) + ".." +
              std::to_string(hi_h) + " high and " + std::to_string(std::max<int64_t>(1, lo_w)) +
              ".." + std::to_string(hi_w) + " wide (output padding below the stride)");
  const ConvShape s = conv_shape(Shape{z.dim(0), w.dim(1), out_h, out_w}, w.shape(), g,
                                 "transposed_convolution", operands);
  count_flops(s);
  const int64_t p = s.positions();
  const Phases f(s);
  // Positions no kernel tap reaches stay zero; when there are none, no need to clear x first.
  Tensor<T> x = f.covers_input(s) ? Tensor<T>::uninitialised({s.n, s.c, s.h, s.w})
                                  : Tensor<T>::zeros({s.n, s.c, s.h, s.w});
  const ConstMap<T> filters(w.data(), s.o, s.ckk());
  for_each_group(s, [&](int64_t n0, int64_t count, int64_t) {
    const int64_t ld = count * p;
    Tensor<T> col = Tensor<T>::uninitialised({s.ckk(), ld});
    MutableMap<T> cols(col.mutable_data(), s.ckk(), ld);
    if (count == 1 || p >= kPerSamplePositions) {
      for (int64_t i = 0; i < count; ++i)
        MutableBlock<T>(col.mutable_data() + i * p, s.ckk(), p, Eigen::OuterStride<>(ld))
            .noalias() = filters.transpose() * ConstMap<T>(z.data() + (n0 + i) * s.o * p, s.o, p);
    } else {
      Tensor<T> wide = Tensor<T>::uninitialised({s.o, ld});
      gather_samples(z.data(), n0, count, s.o, p, wide.mutable_data());
      cols.noalias() = filters.transpose() * ConstMap<T>(wide.data(), s.o, ld);
    }
    Tensor<T> planes = Tensor<T>::uninitialised({f.size(s)});
    columns_to_samples(col.data(), s, f, n0, count, planes.mutable_data(), x.mutable_data());
  });
  return x;
}

template <class T>
Tensor<T> convolution_weight_gradient(const Tensor<T>& x, const Tensor<T>& dy,
                                      const ConvGeometry& g, int64_t kernel_rows,
                                      int64_t kernel_cols) {
  if (x.rank() != 4 || dy.rank() != 4)
    raise(ErrorKind::kBadShape,
          "convolution_weight_gradient: expects input [N, C, H, W] and output adjoint [N, O, OH, "
          "OW], "
          "got " +
              dims(x.shape()) + " and " + dims(dy.shape()));
  const auto operands = [&] {
    return "input " + dims(x.shape()) + ", output adjoint " + dims(dy.shape());
  };
  if (kernel_rows < 1 || kernel_cols < 1)
    raise(ErrorKind::kBadShape, "convolution_weight_gradient: kernel " +
                                    extents(kernel_rows, kernel_cols) + " is not positive (" +
                                    operands() + ")");
  const Shape w_shape{dy.dim(1), x.dim(1), kernel_rows, kernel_cols};
  const ConvShape s = conv_shape(x.shape(), w_shape, g, "convolution_weight_gradient", operands);
  if (dy.dim(0) != s.n || dy.dim(2) != s.oh || dy.dim(3) != s.ow)
    raise(ErrorKind::kBadShape, "convolution_weight_gradient: the output adjoint " +
                                    dims(dy.shape()) + " does not match input " + dims(x.shape()) +
                                    " with a " + extents(kernel_rows, kernel_cols) + " kernel, " +
                                    geometry_text(g) + ", which give " +
                                    Shape{s.n, s.o, s.oh, s.ow}.str());
  count_flops(s);
  const int64_t p = s.positions();
  const int64_t size = group_size(s), groups = (s.n + size - 1) / size;
  const Phases f(s);
  std::vector<Tensor<T>> partial(static_cast<size_t>(groups));
  for_each_group(s, [&](int64_t n0, int64_t count, int64_t gi) {
    const int64_t ld = count * p;
    Tensor<T> col = Tensor<T>::uninitialised({s.ckk(), ld});
    Tensor<T> planes = Tensor<T>::uninitialised({f.size(s)});
    samples_to_columns(x.data(), s, f, n0, count, planes.mutable_data(), col.mutable_data());
    partial[gi] = Tensor<T>::uninitialised(w_shape);
    MutableMap<T> sum(partial[gi].mutable_data(), s.o, s.ckk());
    if (count == 1 || p >= kPerSamplePositions) {
      for (int64_t i = 0; i < count; ++i) {
        const ConstMap<T> dy_i(dy.data() + (n0 + i) * s.o * p, s.o, p);
        const ConstBlock<T> col_i(col.data() + i * p, s.ckk(), p, Eigen::OuterStride<>(ld));
        if (i == 0)
          sum.noalias() = dy_i * col_i.transpose();
        else
          sum.noalias() += dy_i * col_i.transpose();
      }
      return;
    }
    Tensor<T> wide = Tensor<T>::uninitialised({s.o, ld});
    gather_samples(dy.data(), n0, count, s.o, p, wide.mutable_data());
    sum.noalias() =
        ConstMap<T>(wide.data(), s.o, ld) * ConstMap<T>(col.data(), s.ckk(), ld).transpose();
  });
  if (groups == 1) return partial[0];
  Tensor<T> gw = Tensor<T>::uninitialised(w_shape);
  T* out = gw.mutable_data();
  // ((p0 + p1) + p2) + … per element, group by group so each pass is one vector loop.
  parallel_for_chunks(gw.element_count(), [&](int64_t begin, int64_t end) {
    std::copy(partial[0].data() + begin, partial[0].data() + end, out + begin);
    for (int64_t gi = 1; gi < groups; ++gi) {
      const T* __restrict in = partial[gi].data();
      T* __restrict acc = out;
      for (int64_t k = begin; k < end; ++k) acc[k] += in[k];
    }
  });
  return gw;
}

#define SPAR_INSTANTIATE(T)                                                                \
  template Tensor<T> convolution(const Tensor<T>&, const Tensor<T>&, const ConvGeometry&); \
  template Tensor<T> transposed_convolution(const Tensor<T>&, const Tensor<T>&,            \
                                            const ConvGeometry&, int64_t, int64_t);        \
  template Tensor<T> convolution_weight_gradient(const Tensor<T>&, const Tensor<T>&,       \
                                                 const ConvGeometry&, int64_t, int64_t);
SPAR_INSTANTIATE(float)
SPAR_INSTANTIATE(double)
#undef SPAR_INSTANTIATE

}  // namespace kernels
}  // namespace spar
