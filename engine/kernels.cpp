#include "engine/kernels.h"

#include <Eigen/Core>
#include <algorithm>
#include <atomic>
#include <cmath>
#include <cstring>
#include <limits>
#include <string>

#include "engine/error.h"
#include "engine/kernels_detail.h"
#include "engine/parallel.h"

namespace spar {
namespace kernels {

namespace {
std::atomic<uint64_t> flops_done{0};
}  // namespace
uint64_t product_flops() {
  return flops_done.load(std::memory_order_relaxed);
}
void add_product_flops(int64_t flops) {
  flops_done.fetch_add(static_cast<uint64_t>(flops), std::memory_order_relaxed);
}
namespace {

// ---- elementwise maps -------------------------------------------------------------------

// One chunk of a map. The pointers are restrict-qualified parameters and f is a local copy,
// so the compiler knows the output aliases nothing it reads and vectorises the loop.
template <class T, class F>
void map_run(const T* __restrict in, T* __restrict out, int64_t n, F f) {
  for (int64_t i = 0; i < n; ++i) out[i] = f(in[i]);
}

// y = x with run(in, out, n) applied to each fixed chunk of elements.
template <class T, class Run>
Tensor<T> map_chunks(const Tensor<T>& x, Run run) {
  Tensor<T> y = Tensor<T>::uninitialised(x.shape());
  const T* in = x.data();
  T* out = y.mutable_data();
  parallel_for_chunks(x.element_count(), [in, out, run](int64_t begin, int64_t end) {
    run(in + begin, out + begin, end - begin);
  });
  return y;
}

template <class T, class F>
Tensor<T> map(const Tensor<T>& x, F f) {
  return map_chunks(x, [f](const T* in, T* out, int64_t n) { map_run(in, out, n, f); });
}

// tanh of a run through Eigen's array tanh: for float a rational approximation evaluated in
// vector registers, at most 4.3 ulp from the correctly rounded value (measured on every 97th
// float bit pattern against double tanh; tests/reference/check_ops.py bounds it at 8). On one
// core, 50,176 floats took 6.7 µs against 512 µs calling tanhf per element. Doubles go
// element by element to std::tanh.
template <class T>
void tanh_run(const T* in, T* out, int64_t n) {
  using Array = Eigen::Array<T, Eigen::Dynamic, 1>;
  Eigen::Map<Array>(out, n) = Eigen::Map<const Array>(in, n).tanh();
}

// The sum of n values in double (kernels_detail.h).
template <class T>
double sum_run(const T* __restrict x, int64_t n) {
  return detail::lane_sum(n, [x](int64_t i) { return static_cast<double>(x[i]); });
}

// Σ 0·x: 0 (of either sign) when every element is finite, NaN otherwise (0·±∞ and 0·NaN
// are NaN, and NaN survives every sum).
template <class T>
double zero_sum_run(const T* __restrict x, int64_t n) {
  return detail::lane_sum(n, [x](int64_t i) { return static_cast<double>(x[i]) * 0.0; });
}

template <class T>
T softplus(T x) {
  return std::max(x, T(0)) + std::log1p(std::exp(-std::abs(x)));
}
template <class T>
T sigmoid(T x) {
  if (x >= 0) return T(1) / (T(1) + std::exp(-x));
  T e = std::exp(x);
  return e / (T(1) + e);
}

// ---- broadcast walks --------------------------------------------------------------------

// A walk over the elements of an output shape with up to two operands whose strides (in
// elements) are given per output axis (0 on a broadcast axis). Axes of extent 1 are dropped
// and neighbouring axes that are contiguous for every operand are merged, so a per-channel
// or scalar broadcast becomes a long inner run.
struct Walk {
  int rank = 0;
  int64_t extent[kMaxRank];
  int64_t stride[2][kMaxRank];
};

// Row-major strides of `s` aligned to the trailing axes of `out`; 0 where s broadcasts.
void aligned_strides(const Shape& s, const Shape& out, int64_t* stride) {
  int64_t step = 1;
  const int shift = out.rank() - s.rank();
  for (int i = out.rank() - 1; i >= 0; --i) {
    int j = i - shift;
    if (j < 0 || s[j] == 1) {
      stride[i] = 0;
    } else {
      stride[i] = step;
    }
    if (j >= 0) step *= s[j];
  }
}

Walk make_walk(const Shape& out, const int64_t* s0, const int64_t* s1) {
  Walk w;
  for (int i = 0; i < out.rank(); ++i) {
    if (out[i] == 1) continue;
    if (w.rank > 0) {
      int last = w.rank - 1;
      bool merge = w.stride[0][last] == s0[i] * out[i] && w.stride[1][last] == s1[i] * out[i];
      if (merge) {
        w.extent[last] *= out[i];
        w.stride[0][last] = s0[i];
        w.stride[1][last] = s1[i];
        continue;
      }
    }
    w.extent[w.rank] = out[i];
    w.stride[0][w.rank] = s0[i];
    w.stride[1][w.rank] = s1[i];
    ++w.rank;
  }
  if (w.rank == 0) {  // a single element
    w.rank = 1;
    w.extent[0] = 1;
    w.stride[0][0] = w.stride[1][0] = 0;
  }
  return w;
}

// Calls f(out_offset, offset0, offset1, run_length, inner_stride0, inner_stride1) for the
// runs of output elements begin..end-1, in order; runs never cross the innermost axis.
template <class F>
void walk_range(const Walk& w, int64_t begin, int64_t end, F&& f) {
  const int last = w.rank - 1;
  int64_t index[kMaxRank];
  int64_t rem = begin, off0 = 0, off1 = 0;
  for (int i = last; i >= 0; --i) {
    index[i] = rem % w.extent[i];
    rem /= w.extent[i];
    off0 += index[i] * w.stride[0][i];
    off1 += index[i] * w.stride[1][i];
  }
  int64_t pos = begin;
  while (pos < end) {
    int64_t len = std::min(w.extent[last] - index[last], end - pos);
    f(pos, off0, off1, len, w.stride[0][last], w.stride[1][last]);
    pos += len;
    index[last] += len;
    off0 += len * w.stride[0][last];
    off1 += len * w.stride[1][last];
    for (int i = last; i > 0 && index[i] == w.extent[i]; --i) {  // carry
      off0 -= w.extent[i] * w.stride[0][i];
      off1 -= w.extent[i] * w.stride[1][i];
      index[i] = 0;
      ++index[i - 1];
      off0 += w.stride[0][i - 1];
      off1 += w.stride[1][i - 1];
    }
  }
}

// walk_range over all `total` elements, in fixed chunks spread over the threads.
template <class F>
void walk_all(const Walk& w, int64_t total, F&& f) {
  const int64_t chunks = (total + kParallelGrain - 1) / kParallelGrain;
  parallel_for(chunks, true, [&](int64_t c) {
    walk_range(w, c * kParallelGrain, std::min(total, (c + 1) * kParallelGrain), f);
  });
}

template <class T, class Op>
void binary_run(T* __restrict out, const T* __restrict a, const T* __restrict b, int64_t len,
                int64_t sa, int64_t sb, Op op) {
  if (sa == 1 && sb == 1) {
    for (int64_t i = 0; i < len; ++i) out[i] = op(a[i], b[i]);
  } else if (sa == 1 && sb == 0) {
    const T bv = b[0];
    for (int64_t i = 0; i < len; ++i) out[i] = op(a[i], bv);
  } else if (sa == 0 && sb == 1) {
    const T av = a[0];
    for (int64_t i = 0; i < len; ++i) out[i] = op(av, b[i]);
  } else {
    for (int64_t i = 0; i < len; ++i) out[i] = op(a[i * sa], b[i * sb]);
  }
}

template <class T, class Op>
Tensor<T> broadcast_binary(const Tensor<T>& a, const Tensor<T>& b, const char* name, Op op) {
  const Shape out_shape = broadcast_shapes(a.shape(), b.shape(), name);
  Tensor<T> out = Tensor<T>::uninitialised(out_shape);
  int64_t sa[kMaxRank], sb[kMaxRank];
  aligned_strides(a.shape(), out_shape, sa);
  aligned_strides(b.shape(), out_shape, sb);
  const Walk w = make_walk(out_shape, sa, sb);
  T* o = out.mutable_data();
  const T* pa = a.data();
  const T* pb = b.data();
  walk_all(w, out_shape.element_count(),
           [&](int64_t oo, int64_t oa, int64_t ob, int64_t len, int64_t ia, int64_t ib) {
             binary_run(o + oo, pa + oa, pb + ob, len, ia, ib, op);
           });
  return out;
}

// Splits a shape around `axis` into (outer, extent, inner) for lane-wise kernels.
struct Lanes {
  int64_t outer = 1, extent = 1, inner = 1;
};
Lanes lanes_of(const Shape& s, int axis) {
  Lanes l;
  for (int i = 0; i < axis; ++i) l.outer *= s[i];
  l.extent = s[axis];
  for (int i = axis + 1; i < s.rank(); ++i) l.inner *= s[i];
  return l;
}

}  // namespace

template <class T>
Tensor<T> unary(Unary f, const Tensor<T>& x) {
  switch (f) {
    case Unary::kNegate:
      return map(x, [](T v) { return -v; });
    case Unary::kExp:
      return map(x, [](T v) { return std::exp(v); });
    case Unary::kLog:
      return map(x, [](T v) { return std::log(v); });
    case Unary::kSqrt:
      return map(x, [](T v) { return std::sqrt(v); });
    case Unary::kSquare:
      return map(x, [](T v) { return v * v; });
    case Unary::kAbs:
      return map(x, [](T v) { return std::abs(v); });
    case Unary::kSign:
      return map(x, [](T v) { return T((v > 0) - (v < 0)); });
    case Unary::kTanh:
      return map_chunks(x, tanh_run<T>);
    case Unary::kSigmoid:
      return map(x, [](T v) { return sigmoid(v); });
    case Unary::kRelu:
      return map(x, [](T v) { return v > 0 ? v : T(0); });
    case Unary::kSoftplus:
      return map(x, [](T v) { return softplus(v); });
    case Unary::kLogSigmoid:
      return map(x, [](T v) { return -softplus(-v); });
  }
  raise(ErrorKind::kBadArgument, "unary: unknown function");
}

template <class T>
Tensor<T> power(const Tensor<T>& x, double p) {
  const T e = static_cast<T>(p);
  if (p == 2) return map(x, [](T v) { return v * v; });
  if (p == 1) return map(x, [](T v) { return v; });
  if (p == 0) return map(x, [](T) { return T(1); });
  return map(x, [e](T v) { return std::pow(v, e); });
}
template <class T>
Tensor<T> scale(const Tensor<T>& x, double c) {
  const T k = static_cast<T>(c);
  return map(x, [k](T v) { return k * v; });
}
template <class T>
Tensor<T> add_scalar(const Tensor<T>& x, double c) {
  const T k = static_cast<T>(c);
  return map(x, [k](T v) { return v + k; });
}
template <class T>
Tensor<T> leaky_relu(const Tensor<T>& x, double slope) {
  const T k = static_cast<T>(slope);
  return map(x, [k](T v) { return v > 0 ? v : k * v; });
}
template <class T>
Tensor<T> leaky_relu_slope(const Tensor<T>& x, double slope) {
  const T k = static_cast<T>(slope);
  return map(x, [k](T v) { return v > 0 ? T(1) : k; });
}

template <class T>
Tensor<T> leaky_relu_adjoint(const Tensor<T>& g, const Tensor<T>& x, double slope) {
  if (g.shape() != x.shape())
    raise(ErrorKind::kBadShape, "leaky_relu adjoint: gradient " + g.shape().str() + " and input " +
                                    x.shape().str() + " differ");
  const T k = static_cast<T>(slope);
  return broadcast_binary(g, x, "leaky_relu adjoint", [k](T u, T v) { return v > 0 ? u : k * u; });
}

template <class T>
Tensor<T> tanh_adjoint(const Tensor<T>& g, const Tensor<T>& y) {
  if (g.shape() != y.shape())
    raise(ErrorKind::kBadShape, "tanh adjoint: gradient " + g.shape().str() + " and output " +
                                    y.shape().str() + " differ");
  return broadcast_binary(g, y, "tanh adjoint", [](T u, T v) { return u * (T(1) - v * v); });
}

template <class T>
Tensor<T> binary(Binary f, const Tensor<T>& a, const Tensor<T>& b, const char* op) {
  switch (f) {
    case Binary::kAdd:
      return broadcast_binary(a, b, op, [](T u, T v) { return u + v; });
    case Binary::kSubtract:
      return broadcast_binary(a, b, op, [](T u, T v) { return u - v; });
    case Binary::kMultiply:
      return broadcast_binary(a, b, op, [](T u, T v) { return u * v; });
    case Binary::kDivide:
      return broadcast_binary(a, b, op, [](T u, T v) { return u / v; });
  }
  raise(ErrorKind::kBadArgument, std::string(op) + ": unknown function");
}

template <class T>
Tensor<T> broadcast_to(const Tensor<T>& x, const Shape& shape) {
  if (x.shape() == shape) return x;
  if (broadcast_shapes(x.shape(), shape, "broadcast_to") != shape)
    raise(ErrorKind::kBadShape,
          "broadcast_to: cannot broadcast " + x.shape().str() + " to " + shape.str());
  Tensor<T> out = Tensor<T>::uninitialised(shape);
  int64_t sx[kMaxRank], zero[kMaxRank] = {};
  aligned_strides(x.shape(), shape, sx);
  const Walk w = make_walk(shape, sx, zero);
  T* o = out.mutable_data();
  const T* px = x.data();
  walk_all(w, shape.element_count(),
           [&](int64_t oo, int64_t ox, int64_t, int64_t len, int64_t ix, int64_t) {
             if (ix == 0)
               std::fill(o + oo, o + oo + len, px[ox]);
             else
               for (int64_t i = 0; i < len; ++i) o[oo + i] = px[ox + i * ix];
           });
  return out;
}

template <class T>
Tensor<T> sum_into_shape(const Tensor<T>& x, const Shape& shape) {
  if (x.shape() == shape) return x;
  if (shape.rank() > x.rank() || broadcast_shapes(x.shape(), shape, "sum_into_shape") != x.shape())
    raise(ErrorKind::kBadShape,
          "sum_into_shape: cannot sum shape " + x.shape().str() + " to " + shape.str());
  Tensor<T> out = Tensor<T>::uninitialised(shape);
  const int64_t n_out = shape.element_count();
  if (x.element_count() == n_out) {  // only size-1 axes differ
    std::memcpy(out.mutable_data(), x.data(), sizeof(T) * n_out);
    return out;
  }
  if (n_out == 1) {
    out.mutable_data()[0] = static_cast<T>(sum_all(x));
    return out;
  }
  // Walk x with the target's strides (0 on summed axes) and accumulate in double.
  int64_t sx[kMaxRank], st[kMaxRank];
  aligned_strides(x.shape(), x.shape(), sx);
  aligned_strides(shape, x.shape(), st);
  const Walk w = make_walk(x.shape(), sx, st);
  const T* px = x.data();
  auto accumulate = [px](double* acc, int64_t ox, int64_t ot, int64_t len, int64_t, int64_t it) {
    if (it == 0) {
      acc[ot] += sum_run(px + ox, len);
    } else {
      for (int64_t i = 0; i < len; ++i) acc[ot + i] += px[ox + i];
    }
  };
  // Split the outermost walk axis into fixed slabs. When that axis is kept, slabs write to
  // disjoint targets and share one accumulator; when it is summed, each slab has its own
  // accumulator and the slabs are added in order. Either way the order of additions
  // depends only on the shapes.
  const int64_t total = x.element_count(), outer = w.extent[0];
  const int64_t per_outer = total / outer;
  int64_t slabs = std::min<int64_t>(outer, std::max<int64_t>(1, total / kParallelGrain));
  const bool outer_summed = w.stride[1][0] == 0 && w.rank > 0;
  if (outer_summed) slabs = std::min<int64_t>(slabs, 16);
  std::vector<double> acc(static_cast<size_t>(outer_summed ? slabs * n_out : n_out), 0.0);
  parallel_for(slabs, true, [&](int64_t s) {
    const int64_t b = outer * s / slabs, e = outer * (s + 1) / slabs;
    double* a = acc.data() + (outer_summed ? s * n_out : 0);
    walk_range(w, b * per_outer, e * per_outer,
               [&](int64_t, int64_t ox, int64_t ot, int64_t len, int64_t ix, int64_t it) {
                 accumulate(a, ox, ot, len, ix, it);
               });
  });
  T* o = out.mutable_data();
  parallel_for(n_out, n_out >= kParallelGrain, [&](int64_t j) {
    double s = acc[j];
    if (outer_summed)
      for (int64_t k = 1; k < slabs; ++k) s += acc[k * n_out + j];
    o[j] = static_cast<T>(s);
  });
  return out;
}

// Σ over fixed chunks of x of run(chunk), the chunks' results added in chunk order (so the
// total does not depend on the thread count).
template <class T, class Run>
double add_over_chunks(const Tensor<T>& x, Run run) {
  const int64_t n = x.element_count();
  const int64_t chunks = std::max<int64_t>(1, (n + kParallelGrain - 1) / kParallelGrain);
  std::vector<double> partial(static_cast<size_t>(chunks), 0.0);
  const T* p = x.data();
  parallel_for(chunks, true, [&](int64_t c) {
    const int64_t b = c * kParallelGrain, e = std::min(n, b + kParallelGrain);
    partial[c] = run(p + b, e - b);
  });
  double s = 0;
  for (double v : partial) s += v;
  return s;
}

template <class T>
double sum_all(const Tensor<T>& x) {
  return add_over_chunks(x, sum_run<T>);
}

template <class T>
Tensor<T> max_along(const Tensor<T>& x, int axis, Tensor<T>* first_max) {
  axis = x.shape().normalise_axis(axis, "max");
  const Lanes l = lanes_of(x.shape(), axis);
  if (l.extent == 0) raise(ErrorKind::kBadShape, "max: empty axis in shape " + x.shape().str());
  Tensor<T> out = Tensor<T>::uninitialised(x.shape().with(axis, 1));
  if (first_max) *first_max = Tensor<T>::zeros(x.shape());
  const T* px = x.data();
  T* po = out.mutable_data();
  T* pm = first_max ? first_max->mutable_data() : nullptr;
  const int64_t lanes = l.outer * l.inner;
  parallel_for(lanes, x.element_count() >= kParallelGrain, [&](int64_t q) {
    const int64_t o = q / l.inner, i = q % l.inner;
    const T* lane = px + o * l.extent * l.inner + i;
    // The first NaN wins (and ends the search), else the first of equal maxima.
    int64_t best = 0;
    for (int64_t k = 1; k < l.extent && !std::isnan(lane[best * l.inner]); ++k)
      if (lane[k * l.inner] > lane[best * l.inner] || std::isnan(lane[k * l.inner])) best = k;
    po[q] = lane[best * l.inner];
    if (pm) pm[o * l.extent * l.inner + best * l.inner + i] = T(1);
  });
  return out;
}

template <class T>
Tensor<T> log_sum_exp_along(const Tensor<T>& x, int axis) {
  axis = x.shape().normalise_axis(axis, "log_sum_exp");
  const Lanes l = lanes_of(x.shape(), axis);
  Tensor<T> out = Tensor<T>::uninitialised(x.shape().with(axis, 1));
  const T* px = x.data();
  T* po = out.mutable_data();
  const int64_t lanes = l.outer * l.inner;
  parallel_for(lanes, x.element_count() >= kParallelGrain, [&](int64_t q) {
    const int64_t o = q / l.inner, i = q % l.inner;
    const T* lane = px + o * l.extent * l.inner + i;
    T m = -std::numeric_limits<T>::infinity();
    for (int64_t k = 0; k < l.extent; ++k) {
      const T v = lane[k * l.inner];
      if (v > m || std::isnan(v)) m = v;  // a NaN sticks: nothing compares above it
    }
    if (!std::isfinite(m)) {  // any NaN gives NaN; else any +inf gives +inf; all -inf, -inf
      po[q] = m;
      return;
    }
    double s = 0;
    for (int64_t k = 0; k < l.extent; ++k)
      s += std::exp(static_cast<double>(lane[k * l.inner] - m));
    po[q] = m + static_cast<T>(std::log(s));
  });
  return out;
}

template <class T>
Tensor<T> matrix_product(const Tensor<T>& a, const Tensor<T>& b, bool ta, bool tb) {
  if (a.rank() != 2 || b.rank() != 2)
    raise(ErrorKind::kBadShape,
          "matmul: operands must be matrices, got " + a.shape().str() + " and " + b.shape().str());
  const int64_t m = ta ? a.dim(1) : a.dim(0), ka = ta ? a.dim(0) : a.dim(1);
  const int64_t kb = tb ? b.dim(1) : b.dim(0), n = tb ? b.dim(0) : b.dim(1);
  if (ka != kb)
    raise(ErrorKind::kBadShape, std::string("matmul: inner extents differ in ") + a.shape().str() +
                                    (ta ? "ᵀ" : "") + " · " + b.shape().str() + (tb ? "ᵀ" : ""));
  detail::ensure_eigen_single_threaded();
  add_product_flops(2 * m * n * ka);
  using Matrix = Eigen::Matrix<T, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor>;
  using Map = Eigen::Map<const Matrix>;
  Tensor<T> c = Tensor<T>::uninitialised(Shape{m, n});
  Eigen::Map<Matrix> C(c.mutable_data(), m, n);
  if (ka == 0) {
    C.setZero();
    return c;
  }
  const Map A(a.data(), a.dim(0), a.dim(1));
  const Map B(b.data(), b.dim(0), b.dim(1));
  // Fixed panels of the result: their number depends only on the shapes (parallel.h). Each
  // panel is one sequential Eigen GEMM; at most 8, and serial below about 4 MFLOP each.
  // Row panels where possible: a result's rows are usually samples, and each thread then
  // writes the samples the kernels before and after it work on (docs/threading.md). At least
  // 128 rows each (several of Eigen's 48 × 4 AVX-512 register blocks; B is packed once per
  // panel, about 1/rows of the work), or 16 for results under 256 rows, such as a dense
  // layer's [64, 3136] output (4 panels of 16 rows took 131 µs on two threads, 6 column
  // panels 140 µs and one panel 211 µs). Column panels only when there are too few rows to
  // split (fewer than 32) and many columns.
  const int64_t flop_panels =
      std::max<int64_t>(1, std::min<int64_t>(8, static_cast<int64_t>(2.0 * m * n * ka / 4e6)));
  const int64_t row_panels = std::min(flop_panels, std::max<int64_t>(1, m / (m >= 256 ? 128 : 16)));
  const bool by_rows = row_panels > 1 || n <= m;
  const int64_t extent = by_rows ? m : n;
  const int64_t panels =
      by_rows ? row_panels : std::min(flop_panels, std::max<int64_t>(1, n / 128));
  parallel_for(panels, true, [&](int64_t p) {
    const int64_t first = extent * p / panels, count = extent * (p + 1) / panels - first;
    if (by_rows) {
      auto dst = C.middleRows(first, count);
      if (!ta && !tb) dst.noalias() = A.middleRows(first, count) * B;
      if (!ta && tb) dst.noalias() = A.middleRows(first, count) * B.transpose();
      if (ta && !tb) dst.noalias() = A.middleCols(first, count).transpose() * B;
      if (ta && tb) dst.noalias() = A.middleCols(first, count).transpose() * B.transpose();
    } else {
      auto dst = C.middleCols(first, count);
      if (!ta && !tb) dst.noalias() = A * B.middleCols(first, count);
      if (!ta && tb) dst.noalias() = A * B.middleRows(first, count).transpose();
      if (ta && !tb) dst.noalias() = A.transpose() * B.middleCols(first, count);
      if (ta && tb) dst.noalias() = A.transpose() * B.middleRows(first, count).transpose();
    }
  });
  return c;
}

template <class T>
Tensor<T> permute(const Tensor<T>& x, const std::vector<int>& perm) {
  const int r = x.rank();
  std::vector<char> seen(r, 0);
  bool ok = static_cast<int>(perm.size()) == r;
  for (int p : perm) ok = ok && p >= 0 && p < r && !seen[p] && (seen[p] = 1);
  if (!ok)
    raise(ErrorKind::kBadShape, "permute: not a permutation of the axes of " + x.shape().str());
  Shape out_shape;
  for (int i = 0; i < r; ++i) out_shape.push_back(x.dim(perm[i]));
  int64_t in_stride[kMaxRank], sx[kMaxRank], zero[kMaxRank] = {};
  aligned_strides(x.shape(), x.shape(), in_stride);
  for (int i = 0; i < r; ++i) sx[i] = x.dim(perm[i]) == 1 ? 0 : in_stride[perm[i]];
  Tensor<T> out = Tensor<T>::uninitialised(out_shape);
  const Walk w = make_walk(out_shape, sx, zero);
  T* o = out.mutable_data();
  const T* px = x.data();
  walk_all(w, out_shape.element_count(),
           [&](int64_t oo, int64_t ox, int64_t, int64_t len, int64_t ix, int64_t) {
             for (int64_t i = 0; i < len; ++i) o[oo + i] = px[ox + i * ix];
           });
  return out;
}

template <class T>
Tensor<T> slice(const Tensor<T>& x, int axis, int64_t begin, int64_t end) {
  axis = x.shape().normalise_axis(axis, "slice");
  if (begin < 0 || end > x.dim(axis) || begin > end)
    raise(ErrorKind::kBadShape, "slice: range " + std::to_string(begin) + ".." +
                                    std::to_string(end) + " outside axis " + std::to_string(axis) +
                                    " of " + x.shape().str());
  const Lanes l = lanes_of(x.shape(), axis);
  Tensor<T> out = Tensor<T>::uninitialised(x.shape().with(axis, end - begin));
  const int64_t run = (end - begin) * l.inner;
  for (int64_t o = 0; o < l.outer; ++o)
    std::memcpy(out.mutable_data() + o * run, x.data() + (o * l.extent + begin) * l.inner,
                sizeof(T) * run);
  return out;
}

template <class T>
Tensor<T> pad(const Tensor<T>& x, int axis, int64_t before, int64_t after) {
  axis = x.shape().normalise_axis(axis, "pad");
  if (before < 0 || after < 0) raise(ErrorKind::kBadShape, "pad: negative padding");
  const Lanes l = lanes_of(x.shape(), axis);
  const int64_t extent = l.extent + before + after;
  Tensor<T> out = Tensor<T>::zeros(x.shape().with(axis, extent));
  const int64_t run = l.extent * l.inner;
  for (int64_t o = 0; o < l.outer; ++o)
    std::memcpy(out.mutable_data() + (o * extent + before) * l.inner, x.data() + o * run,
                sizeof(T) * run);
  return out;
}

template <class T>
Tensor<T> concatenate(const std::vector<Tensor<T>>& xs, int axis) {
  if (xs.empty()) raise(ErrorKind::kBadShape, "concat: nothing to join");
  axis = xs[0].shape().normalise_axis(axis, "concat");
  int64_t extent = 0;
  for (const Tensor<T>& x : xs) {
    if (x.rank() != xs[0].rank() || x.shape().with(axis, 0) != xs[0].shape().with(axis, 0))
      raise(ErrorKind::kBadShape, "concat: shapes " + xs[0].shape().str() + " and " +
                                      x.shape().str() + " differ off axis " + std::to_string(axis));
    extent += x.dim(axis);
  }
  Tensor<T> out = Tensor<T>::uninitialised(xs[0].shape().with(axis, extent));
  const Lanes l = lanes_of(out.shape(), axis);
  int64_t at = 0;
  for (const Tensor<T>& x : xs) {
    const int64_t run = x.dim(axis) * l.inner;
    for (int64_t o = 0; o < l.outer; ++o)
      std::memcpy(out.mutable_data() + (o * extent + at) * l.inner, x.data() + o * run,
                  sizeof(T) * run);
    at += x.dim(axis);
  }
  return out;
}

template <class T>
int64_t first_non_finite(const Tensor<T>& x) {
  if (add_over_chunks(x, zero_sum_run<T>) == 0) return -1;  // NaN when any element is not finite
  const T* p = x.data();
  for (int64_t i = 0; i < x.element_count(); ++i)
    if (!std::isfinite(p[i])) return i;
  return -1;
}

#define SPAR_INSTANTIATE(T)                                                           \
  template Tensor<T> unary(Unary, const Tensor<T>&);                                  \
  template Tensor<T> power(const Tensor<T>&, double);                                 \
  template Tensor<T> scale(const Tensor<T>&, double);                                 \
  template Tensor<T> add_scalar(const Tensor<T>&, double);                            \
  template Tensor<T> leaky_relu(const Tensor<T>&, double);                            \
  template Tensor<T> leaky_relu_slope(const Tensor<T>&, double);                      \
  template Tensor<T> leaky_relu_adjoint(const Tensor<T>&, const Tensor<T>&, double);  \
  template Tensor<T> tanh_adjoint(const Tensor<T>&, const Tensor<T>&);                \
  template Tensor<T> binary(Binary, const Tensor<T>&, const Tensor<T>&, const char*); \
  template Tensor<T> broadcast_to(const Tensor<T>&, const Shape&);                    \
  template Tensor<T> sum_into_shape(const Tensor<T>&, const Shape&);                  \
  template double sum_all(const Tensor<T>&);                                          \
  template int64_t first_non_finite(const Tensor<T>&);                                \
  template Tensor<T> max_along(const Tensor<T>&, int, Tensor<T>*);                    \
  template Tensor<T> log_sum_exp_along(const Tensor<T>&, int);                        \
  template Tensor<T> matrix_product(const Tensor<T>&, const Tensor<T>&, bool, bool);  \
  template Tensor<T> permute(const Tensor<T>&, const std::vector<int>&);              \
  template Tensor<T> slice(const Tensor<T>&, int, int64_t, int64_t);                  \
  template Tensor<T> pad(const Tensor<T>&, int, int64_t, int64_t);                    \
  template Tensor<T> concatenate(const std::vector<Tensor<T>>&, int);
SPAR_INSTANTIATE(float)
SPAR_INSTANTIATE(double)
#undef SPAR_INSTANTIATE

}  // namespace kernels
}  // namespace spar
