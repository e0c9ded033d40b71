// Batch normalisation as one operation: fused kernels (kernels_norm.cpp) forward and, when
// the backward pass is not recorded, backward too (tape.h, invariant 8).
#include "engine/kernels.h"
#include "engine/ops.h"
#include "engine/ops_detail.h"

namespace spar {
namespace {

using detail::constant;
using detail::input;

// Inputs: x, scale, shift. n.saved: the batch statistics [2, C]; n.args.scalar: ε.
SPAR_ADJOINT(batch_normalise_adjoint) {
  const Var<T>& x = input(n, 0);
  const Var<T>& gamma = input(n, 1);
  const double epsilon = n.args.scalar;
  if (!recording_enabled()) {
    kernels::NormaliseGradients<T> r =
        kernels::normalise_channels_adjoint(g.value(), x.value(), n.saved, gamma.value(), epsilon);
    gi[0] = constant(std::move(r.x));
    gi[1] = constant(std::move(r.scale));
    gi[2] = constant(std::move(r.shift));
    return;
  }
  // Recorded: the same formula in differentiable operations, with the statistics computed
  // again from x so that second derivatives see how they depend on x.
  const Shape& s = x.shape();
  const Shape stat = s.rank() == 2 ? Shape{1, s[1]} : Shape{1, s[1], 1, 1};
  const double m = static_cast<double>(s.element_count() / s[1]);
  const Var<T> mean = scale(sum_into_shape(x, stat), 1 / m);
  const Var<T> centred = subtract(x, mean);
  const Var<T> variance = scale(sum_into_shape(square(centred), stat), 1 / m);
  const Var<T> inverse = power(add_scalar(variance, epsilon), -0.5);
  const Var<T> normalised = multiply(centred, inverse);
  const Var<T> sum_g = sum_into_shape(g, stat);
  const Var<T> sum_g_normalised = sum_into_shape(multiply(g, normalised), stat);
  if (needs[0]) {
    const Var<T> mixed = scale(add(sum_g, multiply(normalised, sum_g_normalised)), 1 / m);
    gi[0] = multiply(multiply(reshape(gamma, stat), inverse), subtract(g, mixed));
  }
  if (needs[1]) gi[1] = reshape(sum_g_normalised, gamma.shape());
  if (needs[2]) gi[2] = reshape(sum_g, input(n, 2).shape());
}

}  // namespace

template <class T>
Var<T> batch_normalise(const Var<T>& x, const Var<T>& gamma, const Var<T>& beta, double epsilon,
                       Tensor<T>* statistics) {
  Tensor<T> st = kernels::channel_statistics(x.value());
  Tensor<T> y = kernels::normalise_channels(x.value(), st, gamma.value(), beta.value(), epsilon);
  if (statistics) *statistics = st;
  return detail::record<T>("batch_normalise", batch_normalise_adjoint<T>, {x, gamma, beta},
                           std::move(y), detail::scalar_args(epsilon), std::move(st));
}

#define SPAR_INSTANTIATE(T) \
  template Var<T> batch_normalise(const Var<T>&, const Var<T>&, const Var<T>&, double, Tensor<T>*);
SPAR_INSTANTIATE(float)
SPAR_INSTANTIATE(double)
#undef SPAR_INSTANTIATE

}  // namespace spar
