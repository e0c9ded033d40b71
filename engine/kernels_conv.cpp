// 2-D convolution kernels (NCHW), lowered to Eigen's GEMM.
//
// Each sample's input is unfolded into columns ("im2col": one row per (channel, kernel row,
// kernel column), one column per output position), so the convolution becomes one matrix
// product with the filters viewed as an [O, C·KH·KW] matrix. Samples are processed in fixed
// groups whose columns sit side by side, so each GEMM is wide enough to run near peak; groups
// run in parallel, each with its own buffers from the pool, and each GEMM is single-threaded
// (parallel.h). The group size depends only on the shapes, so results are bit-identical for
// any thread count. The weight gradient sums one partial product per group, in group order.
#include <Eigen/Core>
#include <algorithm>
#include <cstring>
#include <string>

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

std::string dims(const Shape& s) {
  return s.str();
}

ConvShape conv_shape(const Shape& x, const Shape& w, const ConvGeometry& g, const char* op) {
  if (x.rank() != 4 || w.rank() != 4)
    raise(ErrorKind::kBadShape, std::string(op) +
                                    ": expects input [N, C, H, W] and weight [O, C, KH, KW], got " +
                                    dims(x) + " and " + dims(w));
  if (x[1] != w[1])
    raise(ErrorKind::kBadShape, std::string(op) + ": input " + dims(x) + " has " +
                                    std::to_string(x[1]) + " channels but weight " + dims(w) +
                                    " expects " + std::to_string(w[1]));
  ConvShape s{x[0], x[1], x[2], x[3], w[0], w[2], w[3], 0, 0, g};
  s.oh = conv_output_extent(s.h, s.kh, g.stride_h, g.pad_h, op);
  s.ow = conv_output_extent(s.w, s.kw, g.stride_w, g.pad_w, op);
  return s;
}

void require_output(const ConvShape& s, const Shape& y, const char* op, const char* what) {
  if (y.rank() != 4 || y[0] != s.n || y[1] != s.o || y[2] != s.oh || y[3] != s.ow)
    raise(ErrorKind::kBadShape, std::string(op) + ": " + what + " has shape " + dims(y) +
                                    " but the geometry gives " + Shape{s.n, s.o, s.oh, s.ow}.str());
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

// Unfolds sample x (C×H×W) into rows of `col` (row stride ld) at columns col0..col0+OH·OW-1.
template <class T>
void im2col(const T* x, const ConvShape& s, T* col, int64_t ld, int64_t col0) {
  for (int64_t c = 0; c < s.c; ++c)
    for (int64_t ki = 0; ki < s.kh; ++ki)
      for (int64_t kj = 0; kj < s.kw; ++kj) {
        T* row = col + ((c * s.kh + ki) * s.kw + kj) * ld + col0;
        int64_t lo, hi;
        valid_range(s.ow, s.w, s.g.stride_w, s.g.pad_w, kj, lo, hi);
        for (int64_t oi = 0; oi < s.oh; ++oi) {
          T* dst = row + oi * s.ow;
          const int64_t ih = oi * s.g.stride_h - s.g.pad_h + ki;
          if (ih < 0 || ih >= s.h) {
            std::fill(dst, dst + s.ow, T(0));
            continue;
          }
          const T* src = x + (c * s.h + ih) * s.w - s.g.pad_w + kj;
          std::fill(dst, dst + lo, T(0));
          if (s.g.stride_w == 1)
            std::memcpy(dst + lo, src + lo, sizeof(T) * (hi - lo));
          else
            for (int64_t oj = lo; oj < hi; ++oj) dst[oj] = src[oj * s.g.stride_w];
          std::fill(dst + hi, dst + s.ow, T(0));
        }
      }
}

// The adjoint of im2col: adds the columns back into sample x (C×H×W).
template <class T>
void col2im(const T* col, const ConvShape& s, int64_t ld, int64_t col0, T* x) {
  for (int64_t c = 0; c < s.c; ++c)
    for (int64_t ki = 0; ki < s.kh; ++ki)
      for (int64_t kj = 0; kj < s.kw; ++kj) {
        const T* row = col + ((c * s.kh + ki) * s.kw + kj) * ld + col0;
        int64_t lo, hi;
        valid_range(s.ow, s.w, s.g.stride_w, s.g.pad_w, kj, lo, hi);
        for (int64_t oi = 0; oi < s.oh; ++oi) {
          const int64_t ih = oi * s.g.stride_h - s.g.pad_h + ki;
          if (ih < 0 || ih >= s.h) continue;
          const T* src = row + oi * s.ow;
          T* dst = x + (c * s.h + ih) * s.w - s.g.pad_w + kj;
          for (int64_t oj = lo; oj < hi; ++oj) dst[oj * s.g.stride_w] += src[oj];
        }
      }
}

template <class T>
using Matrix = Eigen::Matrix<T, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor>;
template <class T>
using ConstMap = Eigen::Map<const Matrix<T>>;
template <class T>
using MutableMap = Eigen::Map<Matrix<T>>;

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

// Runs body(first sample, count) for each fixed group of samples, in parallel.
template <class Body>
void for_each_group(const ConvShape& s, Body&& body) {
  detail::ensure_eigen_single_threaded();
  const int64_t size = group_size(s), groups = (s.n + size - 1) / size;
  parallel_for(groups, true,
               [&](int64_t gi) { body(gi * size, std::min(size, s.n - gi * size), gi); });
}

}  // namespace

template <class T>
Tensor<T> conv2d(const Tensor<T>& x, const Tensor<T>& w, const ConvGeometry& g) {
  const ConvShape s = conv_shape(x.shape(), w.shape(), g, "conv2d");
  Tensor<T> y = Tensor<T>::uninitialised({s.n, s.o, s.oh, s.ow});
  const int64_t p = s.positions(), chw = s.c * s.h * s.w;
  const ConstMap<T> filters(w.data(), s.o, s.ckk());
  for_each_group(s, [&](int64_t n0, int64_t count, int64_t) {
    const int64_t ld = count * p;
    Tensor<T> col = Tensor<T>::uninitialised({s.ckk(), ld});
    for (int64_t i = 0; i < count; ++i)
      im2col(x.data() + (n0 + i) * chw, s, col.mutable_data(), ld, i * p);
    if (count == 1) {
      MutableMap<T>(y.mutable_data() + n0 * s.o * p, s.o, p).noalias() =
          filters * ConstMap<T>(col.data(), s.ckk(), ld);
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
Tensor<T> conv2d_transpose(const Tensor<T>& z, const Tensor<T>& w, const ConvGeometry& g,
                           int64_t out_h, int64_t out_w) {
  if (z.rank() != 4 || w.rank() != 4)
    raise(ErrorKind::kBadShape,
          "conv2d_transpose: expects input [N, O, OH, OW] and weight [O, C, KH, KW], got " +
              dims(z.shape()) + " and " + dims(w.shape()));
  if (z.dim(1) != w.dim(0))
    raise(ErrorKind::kBadShape, "conv2d_transpose: input " + dims(z.shape()) + " has " +
                                    std::to_string(z.dim(1)) + " channels but weight " +
                                    dims(w.shape()) + " expects " + std::to_string(w.dim(0)));
  const ConvShape s =
      conv_shape(Shape{z.dim(0), w.dim(1), out_h, out_w}, w.shape(), g, "conv2d_transpose");
  require_output(s, z.shape(), "conv2d_transpose", "the input");
  Tensor<T> x = Tensor<T>::zeros({s.n, s.c, s.h, s.w});
  const int64_t p = s.positions(), chw = s.c * s.h * s.w;
  const ConstMap<T> filters(w.data(), s.o, s.ckk());
  for_each_group(s, [&](int64_t n0, int64_t count, int64_t) {
    const int64_t ld = count * p;
    Tensor<T> col = Tensor<T>::uninitialised({s.ckk(), ld});
    MutableMap<T> cols(col.mutable_data(), s.ckk(), ld);
    if (count == 1) {
      cols.noalias() = filters.transpose() * ConstMap<T>(z.data() + n0 * s.o * p, s.o, p);
    } else {
      Tensor<T> wide = Tensor<T>::uninitialised({s.o, ld});
      gather_samples(z.data(), n0, count, s.o, p, wide.mutable_data());
      cols.noalias() = filters.transpose() * ConstMap<T>(wide.data(), s.o, ld);
    }
    for (int64_t i = 0; i < count; ++i)
      col2im(col.data(), s, ld, i * p, x.mutable_data() + (n0 + i) * chw);
  });
  return x;
}

template <class T>
Tensor<T> conv2d_weight_gradient(const Tensor<T>& x, const Tensor<T>& dy, const ConvGeometry& g,
                                 int64_t kernel_h, int64_t kernel_w) {
  if (dy.rank() != 4)
    raise(ErrorKind::kBadShape,
          "conv2d_weight_gradient: expects [N, O, OH, OW], got " + dims(dy.shape()));
  const Shape w_shape{dy.dim(1), x.rank() == 4 ? x.dim(1) : 0, kernel_h, kernel_w};
  const ConvShape s = conv_shape(x.shape(), w_shape, g, "conv2d_weight_gradient");
  require_output(s, dy.shape(), "conv2d_weight_gradient", "the output adjoint");
  const int64_t p = s.positions(), chw = s.c * s.h * s.w;
  const int64_t size = group_size(s), groups = (s.n + size - 1) / size;
  std::vector<Tensor<T>> partial(static_cast<size_t>(groups));
  for_each_group(s, [&](int64_t n0, int64_t count, int64_t gi) {
    const int64_t ld = count * p;
    Tensor<T> col = Tensor<T>::uninitialised({s.ckk(), ld});
    for (int64_t i = 0; i < count; ++i)
      im2col(x.data() + (n0 + i) * chw, s, col.mutable_data(), ld, i * p);
    Tensor<T> wide;
    if (count == 1) {
      wide = dy.leading_slice(n0, n0 + 1);
    } else {
      wide = Tensor<T>::uninitialised({s.o, ld});
      gather_samples(dy.data(), n0, count, s.o, p, wide.mutable_data());
    }
    partial[gi] = Tensor<T>::uninitialised(w_shape);
    MutableMap<T>(partial[gi].mutable_data(), s.o, s.ckk()).noalias() =
        ConstMap<T>(wide.data(), s.o, ld) * ConstMap<T>(col.data(), s.ckk(), ld).transpose();
  });
  if (groups == 1) return partial[0];
  Tensor<T> gw = Tensor<T>::uninitialised(w_shape);
  T* out = gw.mutable_data();
  parallel_for_elements(gw.numel(), [&](int64_t k) {
    T sum = partial[0].data()[k];
    for (int64_t gi = 1; gi < groups; ++gi) sum += partial[gi].data()[k];
    out[k] = sum;
  });
  return gw;
}

#define SPAR_INSTANTIATE(T)                                                                    \
  template Tensor<T> conv2d(const Tensor<T>&, const Tensor<T>&, const ConvGeometry&);          \
  template Tensor<T> conv2d_transpose(const Tensor<T>&, const Tensor<T>&, const ConvGeometry&, \
                                      int64_t, int64_t);                                       \
  template Tensor<T> conv2d_weight_gradient(const Tensor<T>&, const Tensor<T>&,                \
                                            const ConvGeometry&, int64_t, int64_t);
SPAR_INSTANTIATE(float)
SPAR_INSTANTIATE(double)
#undef SPAR_INSTANTIATE

}  // namespace kernels
}  // namespace spar
