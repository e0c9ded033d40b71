// Initial weights for dense and convolution layers.
// Pure functions of their arguments and the Rng position; thread-safe for distinct Rngs.
#pragma once

#include <cstdint>

#include "engine/random.h"

namespace spar {

enum class Init {
  kDcganNormal,    // N(0, 0.02²), as in Radford et al. 2015 (DCGAN)
  kGlorotUniform,  // U(−a, a), a = √(6 / (fan_in + fan_out)), Glorot & Bengio 2010
  kHeNormal,       // N(0, 2 / fan_in), He et al. 2015, for layers followed by (leaky) relu
};

// A weight tensor of `shape` drawn by `init`. fan_in and fan_out count the inputs and
// outputs of one unit (for a convolution: channels × kernel area).
template <class T>
Tensor<T> initial_weight(const Shape& shape, int64_t fan_in, int64_t fan_out, Init init, Rng& rng);

}  // namespace spar
