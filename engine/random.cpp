#include "engine/random.h"

#include <algorithm>
#include <cmath>
#include <cstring>
#include <sstream>
#include <string>
#include <type_traits>

#include "engine/error.h"
#include "engine/parallel.h"

namespace spar {
namespace {

// Blocks are generated kLanes at a time, lane by lane in plain arrays, so the compiler can
// run the ten rounds on vector registers. The values are the same as philox4x32_10's.
constexpr int kLanes = 16;

// c[j][l] = word j of block first + l of `stream`, for l in [0, kLanes).
inline void philox_lanes(uint64_t first, uint64_t stream, std::array<uint32_t, 2> key,
                         uint32_t (&c)[4][kLanes]) {
  for (int l = 0; l < kLanes; ++l) {
    const uint64_t b = first + static_cast<uint64_t>(l);
    c[0][l] = static_cast<uint32_t>(b);
    c[1][l] = static_cast<uint32_t>(b >> 32);
    c[2][l] = static_cast<uint32_t>(stream);
    c[3][l] = static_cast<uint32_t>(stream >> 32);
  }
  uint32_t k0 = key[0], k1 = key[1];
  for (int round = 1; round <= 10; ++round) {
    if (round > 1) {
      k0 += detail::kPhiloxKeyStep0;
      k1 += detail::kPhiloxKeyStep1;
    }
    for (int l = 0; l < kLanes; ++l) {
      const uint64_t p0 = static_cast<uint64_t>(detail::kPhiloxMultiplier0) * c[0][l];
      const uint64_t p1 = static_cast<uint64_t>(detail::kPhiloxMultiplier1) * c[2][l];
      const uint32_t next0 = static_cast<uint32_t>(p1 >> 32) ^ c[1][l] ^ k0;
      const uint32_t next2 = static_cast<uint32_t>(p0 >> 32) ^ c[3][l] ^ k1;
      c[0][l] = next0;
      c[1][l] = static_cast<uint32_t>(p1);
      c[2][l] = next2;
      c[3][l] = static_cast<uint32_t>(p0);
    }
  }
}

// Calls emit(offset, w0, w1, w2, w3) for every offset in [0, blocks), where w is the Philox
// output of block first + offset. The work is cut into fixed groups of kLanes blocks, and
// each call depends on its own counter only, so fills of kParallelGrain elements or more are
// spread over the threads (parallel.h) without changing any value.
template <class Emit>
void for_each_block(uint64_t first, int64_t blocks, uint64_t stream, std::array<uint32_t, 2> key,
                    int64_t elements, const Emit& emit) {
  const int64_t groups = (blocks + kLanes - 1) / kLanes;
  parallel_for(groups, elements >= kParallelGrain, [&](int64_t g) {
    uint32_t w[4][kLanes];
    const int64_t begin = g * kLanes;
    philox_lanes(first + static_cast<uint64_t>(begin), stream, key, w);
    const int count = static_cast<int>(std::min<int64_t>(kLanes, blocks - begin));
    for (int l = 0; l < count; ++l) emit(begin + l, w[0][l], w[1][l], w[2][l], w[3][l]);
  });
}

std::array<uint32_t, 4> counter_for(uint64_t block, uint64_t stream) {
  return {static_cast<uint32_t>(block), static_cast<uint32_t>(block >> 32),
          static_cast<uint32_t>(stream), static_cast<uint32_t>(stream >> 32)};
}

// [0, 1) from the top 24 bits of one word; exact in float.
inline float unit_float(uint32_t w) {
  return static_cast<float>(w >> 8) * 0x1p-24f;
}
// (0, 1]: the same 24 bits plus one.
inline float unit_float_above_zero(uint32_t w) {
  return static_cast<float>((w >> 8) + 1u) * 0x1p-24f;
}

// 53 bits: the top 27 of `hi` above the top 26 of `lo`.
inline uint64_t bits53(uint32_t hi, uint32_t lo) {
  return (static_cast<uint64_t>(hi >> 5) << 26) | (lo >> 6);
}
// [0, 1) and (0, 1]; exact in double.
inline double unit_double(uint32_t hi, uint32_t lo) {
  return static_cast<double>(bits53(hi, lo)) * 0x1p-53;
}
inline double unit_double_above_zero(uint32_t hi, uint32_t lo) {
  return static_cast<double>(bits53(hi, lo) + 1u) * 0x1p-53;
}

template <class T>
std::string show(T value) {
  std::ostringstream s;
  s.precision(std::is_same<T, float>::value ? 9 : 17);
  s << value;
  return s.str();
}

// Box–Muller on one pair of uniforms: u1 in (0, 1], u2 in [0, 1).
template <class T>
inline void box_muller(T u1, T u2, T* z0, T* z1) {
  const T r = std::sqrt(T(-2) * std::log(u1));
  const T t = T(6.283185307179586476925286766559) * u2;
  *z0 = r * std::cos(t);
  *z1 = r * std::sin(t);
}

}  // namespace

namespace detail {

uint64_t fnv1a_64(uint64_t state, const unsigned char* bytes, size_t count) {
  for (size_t i = 0; i < count; ++i) {
    state ^= bytes[i];
    state *= kFnv64Prime;
  }
  return state;
}

}  // namespace detail

uint64_t derive_stream(uint64_t base, const char* purpose) {
  if (purpose == nullptr) raise(ErrorKind::kBadArgument, "derive_stream: purpose is null");
  unsigned char base_bytes[8];
  for (int i = 0; i < 8; ++i) base_bytes[i] = static_cast<unsigned char>(base >> (8 * i));
  uint64_t h = detail::fnv1a_64(detail::kFnv64Offset, base_bytes, 8);
  return detail::fnv1a_64(h, reinterpret_cast<const unsigned char*>(purpose), std::strlen(purpose));
}

Rng::Rng(uint64_t seed, uint64_t stream)
    : seed_(seed),
      stream_(stream),
      key_{static_cast<uint32_t>(seed), static_cast<uint32_t>(seed >> 32)} {}

std::array<uint32_t, 4> Rng::block(uint64_t index) const {
  return philox4x32_10(counter_for(index, stream_), key_);
}

template <class T>
Tensor<T> Rng::uniform(const Shape& shape, T low, T high) {
  if (!(low < high) || !std::isfinite(low) || !std::isfinite(high) || !std::isfinite(high - low))
    raise(ErrorKind::kBadArgument,
          "uniform: needs finite low < high, got low " + show(low) + " and high " + show(high));
  Tensor<T> out = Tensor<T>::uninitialised(shape);
  constexpr int64_t kPerBlock = std::is_same<T, float>::value ? 4 : 2;
  const int64_t n = out.element_count();
  const int64_t blocks = (n + kPerBlock - 1) / kPerBlock;
  T* data = out.mutable_data();
  const T span = high - low;
  const T below_high = std::nextafter(high, low);

  for_each_block(position_, blocks, stream_, key_, n,
                 [=](int64_t b, uint32_t w0, uint32_t w1, uint32_t w2, uint32_t w3) {
                   T u[kPerBlock];
                   if constexpr (std::is_same<T, float>::value) {
                     u[0] = unit_float(w0);
                     u[1] = unit_float(w1);
                     u[2] = unit_float(w2);
                     u[3] = unit_float(w3);
                   } else {
                     u[0] = unit_double(w0, w1);
                     u[1] = unit_double(w2, w3);
                   }
                   const int64_t start = b * kPerBlock;
                   const int64_t count = std::min<int64_t>(kPerBlock, n - start);
                   for (int64_t j = 0; j < count; ++j) {
                     const T v = low + span * u[j];
                     data[start + j] = v < high ? v : below_high;
                   }
                 });
  position_ += static_cast<uint64_t>(blocks);
  return out;
}

template <class T>
Tensor<T> Rng::normal(const Shape& shape, T mean, T stddev) {
  if (!std::isfinite(mean) || !std::isfinite(stddev) || !(stddev >= 0))
    raise(ErrorKind::kBadArgument,
          "normal: needs a finite mean and a finite stddev >= 0, got "
          "mean " +
              show(mean) + " and stddev " + show(stddev));
  Tensor<T> out = Tensor<T>::uninitialised(shape);
  constexpr int64_t kPerBlock = std::is_same<T, float>::value ? 4 : 2;
  const int64_t n = out.element_count();
  const int64_t blocks = (n + kPerBlock - 1) / kPerBlock;
  T* data = out.mutable_data();

  for_each_block(position_, blocks, stream_, key_, n,
                 [=](int64_t b, uint32_t w0, uint32_t w1, uint32_t w2, uint32_t w3) {
                   T z[kPerBlock];
                   if constexpr (std::is_same<T, float>::value) {
                     box_muller(unit_float_above_zero(w0), unit_float(w1), &z[0], &z[1]);
                     box_muller(unit_float_above_zero(w2), unit_float(w3), &z[2], &z[3]);
                   } else {
                     box_muller(unit_double_above_zero(w0, w1), unit_double(w2, w3), &z[0], &z[1]);
                   }
                   const int64_t start = b * kPerBlock;
                   const int64_t count = std::min<int64_t>(kPerBlock, n - start);
                   for (int64_t j = 0; j < count; ++j) data[start + j] = mean + stddev * z[j];
                 });
  position_ += static_cast<uint64_t>(blocks);
  return out;
}

uint32_t Rng::next_u32() {
  return block(position_++)[0];
}

double Rng::next_uniform() {
  const std::array<uint32_t, 4> w = block(position_++);
  return unit_double(w[0], w[1]);
}

uint64_t Rng::below(uint64_t n) {
  if (n == 0) raise(ErrorKind::kBadArgument, "below: n must be at least 1");
  const uint64_t reject_under = (0 - n) % n;  // 2^64 mod n
  for (;;) {
    const std::array<uint32_t, 4> w = block(position_++);
    const uint64_t x0 = w[0] | (static_cast<uint64_t>(w[1]) << 32);
    if (x0 >= reject_under) return x0 % n;
    const uint64_t x1 = w[2] | (static_cast<uint64_t>(w[3]) << 32);
    if (x1 >= reject_under) return x1 % n;
  }
}

template Tensor<float> Rng::uniform<float>(const Shape&, float, float);
template Tensor<double> Rng::uniform<double>(const Shape&, double, double);
template Tensor<float> Rng::normal<float>(const Shape&, float, float);
template Tensor<double> Rng::normal<double>(const Shape&, double, double);

}  // namespace spar
