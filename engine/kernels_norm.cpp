// Batch normalisation kernels (Ioffe & Szegedy 2015): two passes for the statistics (the mean,
// then squares about it), one for the normalised output, two for the adjoint, instead of the
// eight and twenty passes over the data that the same formulas take as separate elementwise
// operations.
//
// x is viewed as [N, C, P] (P = H·W, or 1 for [N, C]): channel c is N runs of P values. The
// work is split by samples, not channels: fixed slabs of the batch (at most kSlabs, the same
// for any thread count), so that each thread reads the samples it wrote in the kernel before
// (a convolution over groups of samples, an elementwise map over chunks of the flat tensor).
// Split by channels, every thread read every sample, and on two cores the statistics took
// longer with two threads than with one: the cache lines had just been written by the other
// core. Each slab sums its samples per channel in double (kernels_detail.h), and the slab
// sums are added in slab order, so results are bit-identical for any thread count.
#include <algorithm>
#include <cmath>
#include <string>
#include <vector>

#include "engine/error.h"
#include "engine/kernels.h"
#include "engine/kernels_detail.h"
#include "engine/parallel.h"

namespace spar {
namespace kernels {
namespace {

struct ChannelLayout {
  int64_t n = 0, c = 0, p = 0;  // x as [N, C, P]
  int64_t per_channel() const { return n * p; }
};

ChannelLayout channel_layout(const Shape& s, const char* op) {
  if (s.rank() != 2 && s.rank() != 4)
    raise(ErrorKind::kBadShape,
          std::string(op) + ": expects [N, C] or [N, C, H, W], got " + s.str());
  return {s[0], s[1], s.rank() == 4 ? s[2] * s[3] : 1};
}

void check_channel_vector(const Shape& s, int64_t channels, const char* what, const char* op) {
  if (s != Shape{channels})
    raise(ErrorKind::kBadShape, std::string(op) + ": " + what + " has shape " + s.str() +
                                    ", expected [" + std::to_string(channels) + "]");
}

// out = (in − mean)·a + b over one run of n values.
template <class T>
void affine_run(const T* __restrict in, T* __restrict out, int64_t n, T mean, T a, T b) {
  for (int64_t k = 0; k < n; ++k) out[k] = (in[k] - mean) * a + b;
}

// gx = kg·g − off − kx·(x − mean) over one run of n values.
template <class T>
void adjoint_run(const T* __restrict g, const T* __restrict x, T* __restrict gx, int64_t n, T kg,
                 T off, T kx, T mean) {
  for (int64_t k = 0; k < n; ++k) gx[k] = kg * g[k] - off - kx * (x[k] - mean);
}

// Slabs of samples per kernel: enough for up to 8 threads to share, few enough that the
// per-slab sums are cheap to add up.
constexpr int64_t kSlabs = 8;

int64_t slab_count(const ChannelLayout& l) {
  return std::min(l.n, kSlabs);
}

// Runs body(slab k, its samples i in order) for every slab; slabs in parallel when x is large.
template <class Body>
void for_each_slab(const ChannelLayout& l, Body&& body) {
  const int64_t slabs = slab_count(l);
  parallel_for(slabs, l.n * l.c * l.p >= kParallelGrain, [&](int64_t k) {
    for (int64_t i = l.n * k / slabs; i < l.n * (k + 1) / slabs; ++i) body(k, i);
  });
}

// kSums sums per channel over all samples: add(i, c, sums) adds sample i's terms for channel c
// to sums[0..kSums). Returns them channel-major, sums[c·kSums + j]. Each slab accumulates its
// own copy (slab k's samples in order), then the copies are added in slab order.
template <int kSums, class Add>
std::vector<double> channel_sums(const ChannelLayout& l, Add&& add) {
  const int64_t slabs = slab_count(l), width = l.c * kSums;
  std::vector<double> partial(static_cast<size_t>(slabs * width), 0.0);
  for_each_slab(l, [&](int64_t k, int64_t i) {
    double* sums = partial.data() + k * width;
    for (int64_t c = 0; c < l.c; ++c) add(i, c, sums + c * kSums);
  });
  for (int64_t k = 1; k < slabs; ++k)
    for (int64_t j = 0; j < width; ++j) partial[j] += partial[k * width + j];
  partial.resize(static_cast<size_t>(width));
  return partial;
}

}  // namespace

template <class T>
Tensor<T> channel_statistics(const Tensor<T>& x) {
  const ChannelLayout l = channel_layout(x.shape(), "batch statistics");
  if (l.per_channel() < 1)
    raise(ErrorKind::kBadShape, "batch statistics: no values per channel in " + x.shape().str());
  const T* px = x.data();
  const double m = static_cast<double>(l.per_channel());
  std::vector<double> mean = channel_sums<1>(l, [&](int64_t i, int64_t c, double* sums) {
    const T* run = px + (i * l.c + c) * l.p;
    sums[0] += detail::lane_sum(l.p, [run](int64_t k) { return static_cast<double>(run[k]); });
  });
  for (double& v : mean) v /= m;
  // Σ (x − mean)², the two-pass form: no cancellation.
  const std::vector<double> squares = channel_sums<1>(l, [&](int64_t i, int64_t c, double* sums) {
    const T* run = px + (i * l.c + c) * l.p;
    const double mu = mean[static_cast<size_t>(c)];
    sums[0] += detail::lane_sum(l.p, [run, mu](int64_t k) {
      const double d = static_cast<double>(run[k]) - mu;
      return d * d;
    });
  });
  Tensor<T> st = Tensor<T>::uninitialised({2, l.c});
  for (int64_t c = 0; c < l.c; ++c) {
    st.mutable_data()[c] = static_cast<T>(mean[static_cast<size_t>(c)]);
    st.mutable_data()[l.c + c] = static_cast<T>(squares[static_cast<size_t>(c)] / m);
  }
  return st;
}

template <class T>
Tensor<T> normalise_channels(const Tensor<T>& x, const Tensor<T>& statistics,
                             const Tensor<T>& scale, const Tensor<T>& shift, double epsilon) {
  const char* op = "batch normalisation";
  const ChannelLayout l = channel_layout(x.shape(), op);
  if (statistics.shape() != Shape{2, l.c})
    raise(ErrorKind::kBadShape, std::string(op) + ": statistics have shape " +
                                    statistics.shape().str() + ", expected [2, " +
                                    std::to_string(l.c) + "]");
  check_channel_vector(scale.shape(), l.c, "scale", op);
  check_channel_vector(shift.shape(), l.c, "shift", op);
  // y = (x − mean)·a + shift with a = scale/√(variance + ε), per channel.
  std::vector<T> a(static_cast<size_t>(l.c));
  for (int64_t c = 0; c < l.c; ++c)
    a[static_cast<size_t>(c)] =
        static_cast<T>(static_cast<double>(scale.data()[c]) /
                       std::sqrt(static_cast<double>(statistics.data()[l.c + c]) + epsilon));
  Tensor<T> y = Tensor<T>::uninitialised(x.shape());
  const T *px = x.data(), *mean = statistics.data(), *b = shift.data();
  T* py = y.mutable_data();
  for_each_slab(l, [&](int64_t, int64_t i) {
    for (int64_t c = 0; c < l.c; ++c)
      affine_run(px + (i * l.c + c) * l.p, py + (i * l.c + c) * l.p, l.p, mean[c],
                 a[static_cast<size_t>(c)], b[c]);
  });
  return y;
}

template <class T>
NormaliseGradients<T> normalise_channels_adjoint(const Tensor<T>& g, const Tensor<T>& x,
                                                 const Tensor<T>& statistics,
                                                 const Tensor<T>& scale, double epsilon) {
  const char* op = "batch normalisation adjoint";
  const ChannelLayout l = channel_layout(x.shape(), op);
  if (g.shape() != x.shape())
    raise(ErrorKind::kBadShape, std::string(op) + ": gradient " + g.shape().str() + " and input " +
                                    x.shape().str() + " differ");
  check_channel_vector(scale.shape(), l.c, "scale", op);
  const T *px = x.data(), *pg = g.data(), *ps = statistics.data();
  // Σ g and Σ g·(x − mean) per channel.
  const std::vector<double> sums = channel_sums<2>(l, [&](int64_t i, int64_t c, double* out) {
    const T* gr = pg + (i * l.c + c) * l.p;
    const T* xr = px + (i * l.c + c) * l.p;
    const double mean = ps[c];
    out[0] += detail::lane_sum(l.p, [gr](int64_t k) { return static_cast<double>(gr[k]); });
    out[1] += detail::lane_sum(l.p, [gr, xr, mean](int64_t k) {
      return static_cast<double>(gr[k]) * (static_cast<double>(xr[k]) - mean);
    });
  });
  NormaliseGradients<T> r{Tensor<T>::uninitialised(x.shape()), Tensor<T>::uninitialised({l.c}),
                          Tensor<T>::uninitialised({l.c})};
  // gx = k·(g − (Σg + x̂·Σgx̂)/m) = k·g − k·Σg/m − k·(Σgx̂/m)·inv·(x − mean), with
  // inv = 1/√(variance + ε), x̂ = (x − mean)·inv and k = scale·inv.
  const double m = static_cast<double>(l.per_channel());
  std::vector<T> kg(static_cast<size_t>(l.c)), off(kg), kx(kg);
  for (int64_t c = 0; c < l.c; ++c) {
    const auto u = static_cast<size_t>(c);
    const double inv = 1 / std::sqrt(static_cast<double>(ps[l.c + c]) + epsilon);
    const double sum_g = sums[2 * u], sum_gx = sums[2 * u + 1] * inv;
    r.shift.mutable_data()[c] = static_cast<T>(sum_g);
    r.scale.mutable_data()[c] = static_cast<T>(sum_gx);
    const double k = static_cast<double>(scale.data()[c]) * inv;
    kg[u] = static_cast<T>(k);
    off[u] = static_cast<T>(k * sum_g / m);
    kx[u] = static_cast<T>(k * sum_gx / m * inv);
  }
  T* pgx = r.x.mutable_data();
  for_each_slab(l, [&](int64_t, int64_t i) {
    for (int64_t c = 0; c < l.c; ++c) {
      const auto u = static_cast<size_t>(c);
      const int64_t at = (i * l.c + c) * l.p;
      adjoint_run(pg + at, px + at, pgx + at, l.p, kg[u], off[u], kx[u], ps[c]);
    }
  });
  return r;
}

#define SPAR_INSTANTIATE(T)                                                                   \
  template Tensor<T> channel_statistics(const Tensor<T>&);                                    \
  template Tensor<T> normalise_channels(const Tensor<T>&, const Tensor<T>&, const Tensor<T>&, \
                                        const Tensor<T>&, double);                            \
  template NormaliseGradients<T> normalise_channels_adjoint(                                  \
      const Tensor<T>&, const Tensor<T>&, const Tensor<T>&, const Tensor<T>&, double);
SPAR_INSTANTIATE(float)
SPAR_INSTANTIATE(double)
#undef SPAR_INSTANTIATE

}  // namespace kernels
}  // namespace spar
