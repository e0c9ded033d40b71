// Batch normalisation kernels (Ioffe & Szegedy 2015): one pass for the statistics, one for the
// normalised output, two for the adjoint, instead of the eight and twenty passes over the
// data that the same formulas take as separate elementwise operations.
//
// x is viewed as [N, C, P] (P = H·W, or 1 for [N, C]): channel c is N runs of P values. Each
// channel is one task; its sums are accumulated in double in a fixed order
// (kernels_detail.h), so results are bit-identical for any thread count.
#include <cmath>
#include <string>

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

// Runs body(c) for every channel, in parallel when the tensor is large.
template <class Body>
void for_each_channel(const ChannelLayout& l, Body&& body) {
  parallel_for(l.c, l.n * l.c * l.p >= kParallelGrain, body);
}

}  // namespace

template <class T>
Tensor<T> channel_statistics(const Tensor<T>& x) {
  const ChannelLayout l = channel_layout(x.shape(), "batch statistics");
  if (l.per_channel() < 1)
    raise(ErrorKind::kBadShape, "batch statistics: no values per channel in " + x.shape().str());
  Tensor<T> st = Tensor<T>::uninitialised({2, l.c});
  const T* px = x.data();
  T* out = st.mutable_data();
  const double m = static_cast<double>(l.per_channel());
  for_each_channel(l, [&](int64_t c) {
    double sum = 0;
    for (int64_t i = 0; i < l.n; ++i) {
      const T* run = px + (i * l.c + c) * l.p;
      sum += detail::lane_sum(l.p, [run](int64_t k) { return static_cast<double>(run[k]); });
    }
    const double mean = sum / m;
    double squares = 0;  // Σ (x − mean)², the two-pass form: no cancellation
    for (int64_t i = 0; i < l.n; ++i) {
      const T* run = px + (i * l.c + c) * l.p;
      squares += detail::lane_sum(l.p, [run, mean](int64_t k) {
        const double d = static_cast<double>(run[k]) - mean;
        return d * d;
      });
    }
    out[c] = static_cast<T>(mean);
    out[l.c + c] = static_cast<T>(squares / m);
  });
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
  Tensor<T> y = Tensor<T>::uninitialised(x.shape());
  const T* px = x.data();
  T* py = y.mutable_data();
  for_each_channel(l, [&](int64_t c) {
    // y = (x − mean)·a + shift with a = scale/√(variance + ε).
    const T mean = statistics.data()[c];
    const T a =
        static_cast<T>(static_cast<double>(scale.data()[c]) /
                       std::sqrt(static_cast<double>(statistics.data()[l.c + c]) + epsilon));
    const T b = shift.data()[c];
    for (int64_t i = 0; i < l.n; ++i) {
      const T* __restrict in = px + (i * l.c + c) * l.p;
      T* __restrict out = py + (i * l.c + c) * l.p;
      for (int64_t k = 0; k < l.p; ++k) out[k] = (in[k] - mean) * a + b;
    }
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
  NormaliseGradients<T> r{Tensor<T>::uninitialised(x.shape()), Tensor<T>::uninitialised({l.c}),
                          Tensor<T>::uninitialised({l.c})};
  const T *px = x.data(), *pg = g.data();
  T* pgx = r.x.mutable_data();
  const double m = static_cast<double>(l.per_channel());
  for_each_channel(l, [&](int64_t c) {
    const double mean = statistics.data()[c];
    const double inv = 1 / std::sqrt(static_cast<double>(statistics.data()[l.c + c]) + epsilon);
    double sum_g = 0, sum_gx = 0;  // Σ g and Σ g·x̂
    for (int64_t i = 0; i < l.n; ++i) {
      const T* gr = pg + (i * l.c + c) * l.p;
      const T* xr = px + (i * l.c + c) * l.p;
      sum_g += detail::lane_sum(l.p, [gr](int64_t k) { return static_cast<double>(gr[k]); });
      sum_gx += detail::lane_sum(l.p, [gr, xr, mean](int64_t k) {
        return static_cast<double>(gr[k]) * (static_cast<double>(xr[k]) - mean);
      });
    }
    sum_gx *= inv;
    r.shift.mutable_data()[c] = static_cast<T>(sum_g);
    r.scale.mutable_data()[c] = static_cast<T>(sum_gx);
    // gx = k·(g − (Σg + x̂·Σgx̂)/m) = k·g − k·Σg/m − k·(Σgx̂/m)·inv·(x − mean)
    const double k = static_cast<double>(scale.data()[c]) * inv;
    const T kg = static_cast<T>(k), off = static_cast<T>(k * sum_g / m),
            kx = static_cast<T>(k * sum_gx / m * inv), mu = static_cast<T>(mean);
    for (int64_t i = 0; i < l.n; ++i) {
      const T* __restrict gr = pg + (i * l.c + c) * l.p;
      const T* __restrict xr = px + (i * l.c + c) * l.p;
      T* __restrict out = pgx + (i * l.c + c) * l.p;
      for (int64_t q = 0; q < l.p; ++q) out[q] = kg * gr[q] - off - kx * (xr[q] - mu);
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
