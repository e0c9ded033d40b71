// Rng: a counter-based stream of random numbers built on Philox4x32-10
// (Salmon, Moraes, Dror and Shaw 2011), and derive_stream(), which splits one run seed into
// separate streams for each purpose (initialisation, data order, latent draws, dropout).
//
// A counter-based generator has no hidden state to carry along: block b of stream s under
// seed k is philox4x32_10(counter(b, s), key(k)), four 32-bit words, and can be computed
// on its own. An Rng is therefore just (seed, stream, position), where position is the index
// of the next unused block; saving those three numbers and restoring them reproduces the
// continuation bit for bit.
//
//   key     = [seed low 32 bits, seed high 32 bits]
//   counter = [block low 32, block high 32, stream low 32, stream high 32]
//
// Tensor fills take every element from a fixed place in the counter space (documented at
// each method), so each element is computed from its own counter only. Fills of
// kParallelGrain (2^15) elements or more are spread over the threads in fixed chunks
// (parallel.h); the bits are identical whatever the thread count, and identical with OpenMP
// switched off.
//
// Thread safety: Rng is a small value type. Drawing advances the position, so one Rng object
// must not be used from two threads at once; distinct Rng objects are independent.
// philox4x32_10() and derive_stream() are pure functions, safe from any thread.
#pragma once

#include <array>
#include <cstddef>
#include <cstdint>

#include "engine/shape.h"
#include "engine/tensor.h"

namespace spar {

namespace detail {

constexpr uint32_t kPhiloxMultiplier0 = 0xD2511F53u;  // applied to counter word 0
constexpr uint32_t kPhiloxMultiplier1 = 0xCD9E8D57u;  // applied to counter word 2
constexpr uint32_t kPhiloxKeyStep0 = 0x9E3779B9u;     // added to key word 0 between rounds
constexpr uint32_t kPhiloxKeyStep1 = 0xBB67AE85u;     // added to key word 1 between rounds

// One Philox4x32 round: (hi0, lo0) = M0 * c0, (hi1, lo1) = M1 * c2 as 64-bit products;
// c <- [hi1 ^ c1 ^ k0, lo1, hi0 ^ c3 ^ k1, lo0].
inline void philox_round(uint32_t (&c)[4], uint32_t k0, uint32_t k1) {
  const uint64_t p0 = static_cast<uint64_t>(kPhiloxMultiplier0) * c[0];
  const uint64_t p1 = static_cast<uint64_t>(kPhiloxMultiplier1) * c[2];
  const uint32_t hi0 = static_cast<uint32_t>(p0 >> 32), lo0 = static_cast<uint32_t>(p0);
  const uint32_t hi1 = static_cast<uint32_t>(p1 >> 32), lo1 = static_cast<uint32_t>(p1);
  c[0] = hi1 ^ c[1] ^ k0;
  c[1] = lo1;
  c[2] = hi0 ^ c[3] ^ k1;
  c[3] = lo0;
}

constexpr uint64_t kFnv64Offset = 0xcbf29ce484222325ull;  // FNV-1a 64 initial state
constexpr uint64_t kFnv64Prime = 0x100000001b3ull;

// FNV-1a 64 over `count` bytes, continuing from `state` (start from kFnv64Offset).
uint64_t fnv1a_64(uint64_t state, const unsigned char* bytes, size_t count);

}  // namespace detail

// Philox4x32-10: ten rounds, the key bumped by the two key steps before rounds 2 to 10.
// Pure; inline because tensor fills call it once per four words.
inline std::array<uint32_t, 4> philox4x32_10(std::array<uint32_t, 4> counter,
                                             std::array<uint32_t, 2> key) {
  uint32_t c[4] = {counter[0], counter[1], counter[2], counter[3]};
  uint32_t k0 = key[0], k1 = key[1];
  detail::philox_round(c, k0, k1);
  for (int round = 2; round <= 10; ++round) {
    k0 += detail::kPhiloxKeyStep0;
    k1 += detail::kPhiloxKeyStep1;
    detail::philox_round(c, k0, k1);
  }
  return {c[0], c[1], c[2], c[3]};
}

// A stream identifier for `purpose` under `base` (a run seed or a parent stream):
// FNV-1a 64 over the 8 bytes of `base`, least significant first, followed by the bytes of
// `purpose` without its terminating zero. Stable across platforms.
// These values reach saved runs and checkpoints: the definition must never change.
// Precondition: purpose is a non-null, zero-terminated string (raises kBadArgument if null).
uint64_t derive_stream(uint64_t base, const char* purpose);

class Rng {
 public:
  // Position starts at block 0.
  Rng(uint64_t seed, uint64_t stream);

  uint64_t seed() const { return seed_; }
  uint64_t stream() const { return stream_; }
  // The index of the next unused block. Any value may be set; the index wraps after 2^64
  // blocks (not reachable in practice).
  uint64_t position() const { return position_; }
  void set_position(uint64_t position) { position_ = position; }

  // Row-major fill with values in [low, high).
  //   float:  element i is word i%4 of block position+i/4;  u = (word >> 8) * 2^-24.
  //   double: element i uses words 2(i%2) (high part) and 2(i%2)+1 (low part) of block
  //           position+i/2;  u = ((w_hi >> 5) * 2^26 + (w_lo >> 6)) * 2^-53.
  // The value is low + (high - low) * u, exactly u for the defaults; a result that rounds
  // up to high is replaced by the largest value below high. Advances the position by
  // ceil(n/4) (float) or ceil(n/2) (double) blocks; unused words of the last block are
  // discarded. Raises kBadArgument unless low < high and low, high and high - low are finite.
  template <class T>
  Tensor<T> uniform(const Shape& shape, T low = T(0), T high = T(1));

  // Row-major fill with normal values of the given mean and standard deviation, by the
  // Box–Muller transform: from uniforms u1 in (0, 1] (never 0, so the log is finite) and
  // u2 in [0, 1), r = sqrt(-2 ln u1), t = 2 pi u2, the pair is (r cos t, r sin t).
  //   float:  block position+j feeds elements 4j..4j+3:
  //           u1 = ((w0 >> 8) + 1) * 2^-24, u2 = (w1 >> 8) * 2^-24 -> elements 4j, 4j+1;
  //           u1 from w2 and u2 from w3 the same way        -> elements 4j+2, 4j+3.
  //   double: block position+j feeds elements 2j, 2j+1:
  //           u1 = ((w0 >> 5) * 2^26 + (w1 >> 6) + 1) * 2^-53,
  //           u2 = ((w2 >> 5) * 2^26 + (w3 >> 6)) * 2^-53.
  // Float outputs are computed in float arithmetic, double outputs in double. The element is
  // mean + stddev * z. Advances the position by ceil(n/4) (float) or ceil(n/2) (double)
  // blocks; outputs of the last block past the end are discarded. Raises kBadArgument unless
  // mean is finite and stddev is finite and >= 0. The bits depend on the C library's log,
  // sin and cos: identical for any thread count, possibly not across C libraries.
  template <class T>
  Tensor<T> normal(const Shape& shape, T mean = T(0), T stddev = T(1));

  // Scalar draws. Each call consumes one whole block, so the state stays a block index.
  // next_u32 returns word 0. next_uniform returns a double in [0, 1) from words 0 and 1, the
  // same value uniform<double>(Shape{1}) would give at this position.
  uint32_t next_u32();
  double next_uniform();

  // A uniform integer in [0, n), without modulo bias, for shuffles: each block gives two
  // 64-bit candidates x = w0 + 2^32 w1, then x = w2 + 2^32 w3; a candidate below
  // 2^64 mod n is rejected (so the accepted range is a whole multiple of n), otherwise the
  // result is x mod n. Consumes one block per pair of candidates; a candidate is rejected
  // with probability below n / 2^64. Raises kBadArgument when n == 0.
  uint64_t below(uint64_t n);

 private:
  std::array<uint32_t, 4> block(uint64_t index) const;

  uint64_t seed_;
  uint64_t stream_;
  uint64_t position_ = 0;
  std::array<uint32_t, 2> key_;
};

extern template Tensor<float> Rng::uniform<float>(const Shape&, float, float);
extern template Tensor<double> Rng::uniform<double>(const Shape&, double, double);
extern template Tensor<float> Rng::normal<float>(const Shape&, float, float);
extern template Tensor<double> Rng::normal<double>(const Shape&, double, double);

}  // namespace spar
