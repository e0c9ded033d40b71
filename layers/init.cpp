#include "layers/init.h"

#include <cmath>

namespace spar {

template <class T>
Tensor<T> initial_weight(const Shape& shape, int64_t fan_in, int64_t fan_out, Init init, Rng& rng) {
  switch (init) {
    case Init::kDcganNormal:
      return rng.normal<T>(shape, T(0), T(0.02));
    case Init::kGlorotUniform: {
      const T a = static_cast<T>(std::sqrt(6.0 / static_cast<double>(fan_in + fan_out)));
      return rng.uniform<T>(shape, -a, a);
    }
    case Init::kHeNormal:
      return rng.normal<T>(shape, T(0),
                           static_cast<T>(std::sqrt(2.0 / static_cast<double>(fan_in))));
  }
  return Tensor<T>();
}

template Tensor<float> initial_weight(const Shape&, int64_t, int64_t, Init, Rng&);
template Tensor<double> initial_weight(const Shape&, int64_t, int64_t, Init, Rng&);

}  // namespace spar
