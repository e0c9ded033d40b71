// Products and shape operations: forward kernels and adjoints, side by side.
#include <string>

#include "engine/error.h"
#include "engine/kernels.h"
#include "engine/ops.h"
#include "engine/ops_detail.h"

namespace spar {
namespace {

using detail::input;

// C = op(A)·op(B). For each combination of transposes the adjoints are again products of
// g with the other operand, chosen so that no transpose is ever materialised.
SPAR_ADJOINT(matmul_adjoint) {
  const Var<T>& a = input(n, 0);
  const Var<T>& b = input(n, 1);
  const bool ta = n.args.flag_a, tb = n.args.flag_b;
  if (needs[0]) {
    if (!ta)
      gi[0] = matmul(g, b, false, !tb);  // gA = g·op(B)ᵀ
    else
      gi[0] = matmul(b, g, tb, true);  // gA = (g·op(B)ᵀ)ᵀ = op(B)·gᵀ
  }
  if (needs[1]) {
    if (!tb)
      gi[1] = matmul(a, g, !ta, false);  // gB = op(A)ᵀ·g
    else
      gi[1] = matmul(g, a, true, ta);  // gB = (op(A)ᵀ·g)ᵀ = gᵀ·op(A)
  }
}

std::vector<int> inverse(const std::array<int8_t, kMaxRank>& perm, int rank) {
  std::vector<int> inv(rank);
  for (int i = 0; i < rank; ++i) inv[perm[i]] = i;
  return inv;
}
SPAR_ADJOINT(permute_adjoint) {
  gi[0] = permute(g, inverse(n.args.perm, g.shape().rank()));
}
SPAR_ADJOINT(reshape_adjoint) {
  gi[0] = reshape(g, input(n, 0).shape());
}
SPAR_ADJOINT(concat_adjoint) {
  int64_t at = 0;
  for (size_t k = 0; k < n.inputs.size(); ++k) {
    const int64_t len = n.inputs[k].shape()[n.args.axis];
    if (needs[k]) gi[k] = slice(g, n.args.axis, at, at + len);
    at += len;
  }
}
SPAR_ADJOINT(slice_adjoint) {
  const int64_t extent = input(n, 0).shape()[n.args.axis];
  gi[0] = pad(g, n.args.axis, n.args.begin, extent - n.args.end);
}
SPAR_ADJOINT(pad_adjoint) {
  gi[0] = slice(g, n.args.axis, n.args.begin, n.args.begin + input(n, 0).shape()[n.args.axis]);
}
SPAR_ADJOINT(broadcast_to_adjoint) {
  gi[0] = sum_into_shape(g, input(n, 0).shape());
}
SPAR_ADJOINT(sum_to_adjoint) {
  gi[0] = broadcast_to(g, input(n, 0).shape());
}

detail::OpArgs axis_args(int axis, int64_t begin = 0, int64_t end = 0) {
  detail::OpArgs a;
  a.axis = axis;
  a.begin = begin;
  a.end = end;
  return a;
}

}  // namespace

template <class T>
Var<T> matmul(const Var<T>& a, const Var<T>& b, bool transpose_a, bool transpose_b) {
  detail::OpArgs args;
  args.flag_a = transpose_a;
  args.flag_b = transpose_b;
  return detail::record<T>("matmul", matmul_adjoint<T>, {a, b},
                           kernels::matrix_product(a.value(), b.value(), transpose_a, transpose_b),
                           args);
}

template <class T>
Var<T> transpose(const Var<T>& x) {
  if (x.shape().rank() != 2)
    raise(ErrorKind::kBadShape, "transpose: expects a matrix, got shape " + x.shape().str());
  return permute(x, {1, 0});
}

template <class T>
Var<T> permute(const Var<T>& x, const std::vector<int>& perm) {
  Tensor<T> value = kernels::permute(x.value(), perm);  // validates perm
  detail::OpArgs args;
  for (size_t i = 0; i < perm.size(); ++i) args.perm[i] = static_cast<int8_t>(perm[i]);
  return detail::record<T>("permute", permute_adjoint<T>, {x}, std::move(value), args);
}

template <class T>
Var<T> reshape(const Var<T>& x, const Shape& shape) {
  return detail::record<T>("reshape", reshape_adjoint<T>, {x}, x.value().reshape(shape));
}

template <class T>
Var<T> concat(const std::vector<Var<T>>& xs, int axis) {
  std::vector<Tensor<T>> values;
  values.reserve(xs.size());
  for (const Var<T>& x : xs) values.push_back(x.value());
  Tensor<T> value = kernels::concatenate(values, axis);
  return detail::record<T>("concat", concat_adjoint<T>, xs, std::move(value),
                           axis_args(value.shape().normalise_axis(axis, "concat")));
}

template <class T>
Var<T> slice(const Var<T>& x, int axis, int64_t begin, int64_t end) {
  Tensor<T> value = kernels::slice(x.value(), axis, begin, end);
  return detail::record<T>("slice", slice_adjoint<T>, {x}, std::move(value),
                           axis_args(x.shape().normalise_axis(axis, "slice"), begin, end));
}

template <class T>
Var<T> pad(const Var<T>& x, int axis, int64_t before, int64_t after) {
  Tensor<T> value = kernels::pad(x.value(), axis, before, after);
  return detail::record<T>("pad", pad_adjoint<T>, {x}, std::move(value),
                           axis_args(x.shape().normalise_axis(axis, "pad"), before, after));
}

template <class T>
Var<T> broadcast_to(const Var<T>& x, const Shape& shape) {
  if (x.shape() == shape) return x;
  return detail::record<T>("broadcast_to", broadcast_to_adjoint<T>, {x},
                           kernels::broadcast_to(x.value(), shape));
}

template <class T>
Var<T> sum_into_shape(const Var<T>& x, const Shape& shape) {
  if (x.shape() == shape) return x;
  return detail::record<T>("sum_into_shape", sum_to_adjoint<T>, {x},
                           kernels::sum_into_shape(x.value(), shape));
}

#define SPAR_INSTANTIATE(T)                                         \
  template Var<T> matmul(const Var<T>&, const Var<T>&, bool, bool); \
  template Var<T> transpose(const Var<T>&);                         \
  template Var<T> permute(const Var<T>&, const std::vector<int>&);  \
  template Var<T> reshape(const Var<T>&, const Shape&);             \
  template Var<T> concat(const std::vector<Var<T>>&, int);          \
  template Var<T> slice(const Var<T>&, int, int64_t, int64_t);      \
  template Var<T> pad(const Var<T>&, int, int64_t, int64_t);        \
  template Var<T> broadcast_to(const Var<T>&, const Shape&);        \
  template Var<T> sum_into_shape(const Var<T>&, const Shape&);
SPAR_INSTANTIATE(float)
SPAR_INSTANTIATE(double)
#undef SPAR_INSTANTIATE

}  // namespace spar
