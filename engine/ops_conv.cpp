// 2-D convolutions: forward kernels and adjoints, side by side.
//
// The three operations are bilinear and close under differentiation: the adjoints of each
// are the other two. Writing them this way gives second-order gradients through convolutional
// networks (gradient penalties on a convolutional critic) with no further code.
#include "engine/kernels.h"
#include "engine/ops.h"
#include "engine/ops_detail.h"

namespace spar {
namespace {

using detail::input;

// A node keeps its geometry; the extents an adjoint needs are those of its operands.
detail::OpArgs conv_args(const ConvGeometry& g) {
  detail::OpArgs args;
  args.conv = g;
  return args;
}

// y = convolution(x, w)
SPAR_ADJOINT(conv2d_adjoint) {
  const Var<T>& x = input(n, 0);
  const Var<T>& w = input(n, 1);
  const ConvGeometry geo = n.args.conv;
  if (needs[0]) gi[0] = transposed_convolution(g, w, geo, x.shape()[2], x.shape()[3]);
  if (needs[1]) gi[1] = convolution_weight_gradient(x, g, geo, w.shape()[2], w.shape()[3]);
}
// y = transposed_convolution(z, w): ⟨g, y⟩ = ⟨convolution(g, w), z⟩, and as a function of w it is
// the weight gradient of a convolution whose input is g and whose output adjoint is z.
SPAR_ADJOINT(conv2d_transpose_adjoint) {
  const Var<T>& z = input(n, 0);
  const Var<T>& w = input(n, 1);
  const ConvGeometry geo = n.args.conv;
  if (needs[0]) gi[0] = convolution(g, w, geo);
  if (needs[1]) gi[1] = convolution_weight_gradient(g, z, geo, w.shape()[2], w.shape()[3]);
}
// W = convolution_weight_gradient(x, dy): ⟨G, W⟩ = Σ_n ⟨dy_n, G·columns(x_n)⟩.
SPAR_ADJOINT(conv2d_weight_gradient_adjoint) {
  const Var<T>& x = input(n, 0);
  const Var<T>& dy = input(n, 1);
  const ConvGeometry geo = n.args.conv;
  if (needs[0]) gi[0] = transposed_convolution(dy, g, geo, x.shape()[2], x.shape()[3]);
  if (needs[1]) gi[1] = convolution(x, g, geo);
}

}  // namespace

template <class T>
Var<T> convolution(const Var<T>& x, const Var<T>& w, const ConvGeometry& g) {
  return detail::record<T>("convolution", conv2d_adjoint<T>, {x, w},
                           kernels::convolution(x.value(), w.value(), g), conv_args(g));
}

template <class T>
Var<T> transposed_convolution(const Var<T>& z, const Var<T>& w, const ConvGeometry& g,
                              int64_t out_h, int64_t out_w) {
  return detail::record<T>("transposed_convolution", conv2d_transpose_adjoint<T>, {z, w},
                           kernels::transposed_convolution(z.value(), w.value(), g, out_h, out_w),
                           conv_args(g));
}

template <class T>
Var<T> convolution_weight_gradient(const Var<T>& x, const Var<T>& dy, const ConvGeometry& g,
                                   int64_t kernel_rows, int64_t kernel_cols) {
  return detail::record<T>(
      "convolution_weight_gradient", conv2d_weight_gradient_adjoint<T>, {x, dy},
      kernels::convolution_weight_gradient(x.value(), dy.value(), g, kernel_rows, kernel_cols),
      conv_args(g));
}

#define SPAR_INSTANTIATE(T)                                                                      \
  template Var<T> convolution(const Var<T>&, const Var<T>&, const ConvGeometry&);                \
  template Var<T> transposed_convolution(const Var<T>&, const Var<T>&, const ConvGeometry&,      \
                                         int64_t, int64_t);                                      \
  template Var<T> convolution_weight_gradient(const Var<T>&, const Var<T>&, const ConvGeometry&, \
                                              int64_t, int64_t);
SPAR_INSTANTIATE(float)
SPAR_INSTANTIATE(double)
#undef SPAR_INSTANTIATE

}  // namespace spar
