// Elementwise operations: forward kernels and adjoints, side by side.
#include <cmath>

#include "engine/kernels.h"
#include "engine/ops.h"
#include "engine/ops_detail.h"

namespace spar {
namespace {

using detail::constant;
using detail::input;
using kernels::Binary;
using kernels::Unary;

// ---- a + b, a - b, a * b, a / b: the adjoint sums each contribution back to the operand's
// shape (sum_into_shape is the identity when no broadcasting happened).
SPAR_ADJOINT(add_adjoint) {
  if (needs[0]) gi[0] = sum_into_shape(g, input(n, 0).shape());
  if (needs[1]) gi[1] = sum_into_shape(g, input(n, 1).shape());
}
SPAR_ADJOINT(subtract_adjoint) {
  if (needs[0]) gi[0] = sum_into_shape(g, input(n, 0).shape());
  if (needs[1]) gi[1] = sum_into_shape(negate(g), input(n, 1).shape());
}
SPAR_ADJOINT(multiply_adjoint) {
  if (needs[0]) gi[0] = sum_into_shape(multiply(g, input(n, 1)), input(n, 0).shape());
  if (needs[1]) gi[1] = sum_into_shape(multiply(g, input(n, 0)), input(n, 1).shape());
}
SPAR_ADJOINT(divide_adjoint) {
  const Var<T>& b = input(n, 1);
  if (needs[0]) gi[0] = sum_into_shape(divide(g, b), input(n, 0).shape());
  if (needs[1]) gi[1] = sum_into_shape(negate(multiply(g, divide(y, b))), b.shape());  // −g·a/b²
}

// ---- one-operand functions. x is the input, y the output (both recorded Vars).
SPAR_ADJOINT(negate_adjoint) {
  gi[0] = negate(g);
}
SPAR_ADJOINT(exp_adjoint) {
  gi[0] = multiply(g, y);
}
SPAR_ADJOINT(log_adjoint) {
  gi[0] = divide(g, input(n, 0));
}
SPAR_ADJOINT(sqrt_adjoint) {
  gi[0] = divide(scale(g, 0.5), y);
}
SPAR_ADJOINT(square_adjoint) {
  gi[0] = multiply(g, scale(input(n, 0), 2.0));
}
SPAR_ADJOINT(power_adjoint) {
  const double p = n.args.scalar;
  gi[0] = multiply(g, scale(power(input(n, 0), p - 1), p));
}
SPAR_ADJOINT(abs_adjoint) {
  gi[0] = multiply(g, constant(kernels::unary(Unary::kSign, input(n, 0).value())));
}
SPAR_ADJOINT(tanh_adjoint) {  // g·(1 − y²), fused unless recorded (tape.h, invariant 8)
  if (!recording_enabled())
    gi[0] = constant(kernels::tanh_adjoint(g.value(), y.value()));
  else
    gi[0] = multiply(g, add_scalar(negate(square(y)), 1.0));
}
SPAR_ADJOINT(sigmoid_adjoint) {
  gi[0] = multiply(g, multiply(y, add_scalar(negate(y), 1.0)));  // y(1 − y)
}
// g·(1 where x > 0, else slope), the adjoint of leaky relu and (slope 0) of relu: one fused
// pass when the backward pass is not recorded (tape.h, invariant 8), else a product with the
// constant slope mask (the second derivative is zero wherever it exists).
template <class T>
Var<T> gate(const Var<T>& g, const Var<T>& x, double slope) {
  if (!recording_enabled())
    return constant(kernels::leaky_relu_adjoint(g.value(), x.value(), slope));
  return multiply(g, constant(kernels::leaky_relu_slope(x.value(), slope)));
}
SPAR_ADJOINT(relu_adjoint) {
  gi[0] = gate(g, input(n, 0), 0.0);
}
SPAR_ADJOINT(leaky_relu_adjoint) {
  gi[0] = gate(g, input(n, 0), n.args.scalar);
}
SPAR_ADJOINT(softplus_adjoint) {
  gi[0] = multiply(g, sigmoid(input(n, 0)));
}
SPAR_ADJOINT(log_sigmoid_adjoint) {
  gi[0] = multiply(g, sigmoid(negate(input(n, 0))));
}
SPAR_ADJOINT(scale_adjoint) {
  gi[0] = scale(g, n.args.scalar);
}
SPAR_ADJOINT(add_scalar_adjoint) {
  gi[0] = g;
}

template <class T>
Var<T> unary_op(const char* name, detail::AdjointFn<T> adjoint, Unary f, const Var<T>& x) {
  return detail::record<T>(name, adjoint, {x}, kernels::unary(f, x.value()));
}

}  // namespace

template <class T>
Var<T> add(const Var<T>& a, const Var<T>& b) {
  return detail::record<T>("add", add_adjoint<T>, {a, b},
                           kernels::binary(Binary::kAdd, a.value(), b.value(), "add"));
}
template <class T>
Var<T> subtract(const Var<T>& a, const Var<T>& b) {
  return detail::record<T>("subtract", subtract_adjoint<T>, {a, b},
                           kernels::binary(Binary::kSubtract, a.value(), b.value(), "subtract"));
}
template <class T>
Var<T> multiply(const Var<T>& a, const Var<T>& b) {
  return detail::record<T>("multiply", multiply_adjoint<T>, {a, b},
                           kernels::binary(Binary::kMultiply, a.value(), b.value(), "multiply"));
}
template <class T>
Var<T> divide(const Var<T>& a, const Var<T>& b) {
  return detail::record<T>("divide", divide_adjoint<T>, {a, b},
                           kernels::binary(Binary::kDivide, a.value(), b.value(), "divide"));
}

template <class T>
Var<T> negate(const Var<T>& x) {
  return unary_op<T>("negate", negate_adjoint<T>, Unary::kNegate, x);
}
template <class T>
Var<T> exp(const Var<T>& x) {
  return unary_op<T>("exp", exp_adjoint<T>, Unary::kExp, x);
}
template <class T>
Var<T> log(const Var<T>& x) {
  return unary_op<T>("log", log_adjoint<T>, Unary::kLog, x);
}
template <class T>
Var<T> sqrt(const Var<T>& x) {
  return unary_op<T>("sqrt", sqrt_adjoint<T>, Unary::kSqrt, x);
}
template <class T>
Var<T> square(const Var<T>& x) {
  return unary_op<T>("square", square_adjoint<T>, Unary::kSquare, x);
}
template <class T>
Var<T> abs(const Var<T>& x) {
  return unary_op<T>("abs", abs_adjoint<T>, Unary::kAbs, x);
}
template <class T>
Var<T> tanh(const Var<T>& x) {
  return unary_op<T>("tanh", tanh_adjoint<T>, Unary::kTanh, x);
}
template <class T>
Var<T> sigmoid(const Var<T>& x) {
  return unary_op<T>("sigmoid", sigmoid_adjoint<T>, Unary::kSigmoid, x);
}
template <class T>
Var<T> relu(const Var<T>& x) {
  return unary_op<T>("relu", relu_adjoint<T>, Unary::kRelu, x);
}
template <class T>
Var<T> softplus(const Var<T>& x) {
  return unary_op<T>("softplus", softplus_adjoint<T>, Unary::kSoftplus, x);
}
template <class T>
Var<T> log_sigmoid(const Var<T>& x) {
  return unary_op<T>("log_sigmoid", log_sigmoid_adjoint<T>, Unary::kLogSigmoid, x);
}
template <class T>
Var<T> power(const Var<T>& x, double p) {
  return detail::record<T>("power", power_adjoint<T>, {x}, kernels::power(x.value(), p),
                           detail::scalar_args(p));
}
template <class T>
Var<T> leaky_relu(const Var<T>& x, double slope) {
  return detail::record<T>("leaky_relu", leaky_relu_adjoint<T>, {x},
                           kernels::leaky_relu(x.value(), slope), detail::scalar_args(slope));
}
template <class T>
Var<T> scale(const Var<T>& x, double c) {
  return detail::record<T>("scale", scale_adjoint<T>, {x}, kernels::scale(x.value(), c),
                           detail::scalar_args(c));
}
template <class T>
Var<T> add_scalar(const Var<T>& x, double c) {
  return detail::record<T>("add_scalar", add_scalar_adjoint<T>, {x},
                           kernels::add_scalar(x.value(), c), detail::scalar_args(c));
}

#define SPAR_INSTANTIATE(T)                               \
  template Var<T> add(const Var<T>&, const Var<T>&);      \
  template Var<T> subtract(const Var<T>&, const Var<T>&); \
  template Var<T> multiply(const Var<T>&, const Var<T>&); \
  template Var<T> divide(const Var<T>&, const Var<T>&);   \
  template Var<T> negate(const Var<T>&);                  \
  template Var<T> exp(const Var<T>&);                     \
  template Var<T> log(const Var<T>&);                     \
  template Var<T> sqrt(const Var<T>&);                    \
  template Var<T> square(const Var<T>&);                  \
  template Var<T> power(const Var<T>&, double);           \
  template Var<T> abs(const Var<T>&);                     \
  template Var<T> tanh(const Var<T>&);                    \
  template Var<T> sigmoid(const Var<T>&);                 \
  template Var<T> relu(const Var<T>&);                    \
  template Var<T> leaky_relu(const Var<T>&, double);      \
  template Var<T> softplus(const Var<T>&);                \
  template Var<T> log_sigmoid(const Var<T>&);             \
  template Var<T> scale(const Var<T>&, double);           \
  template Var<T> add_scalar(const Var<T>&, double);
SPAR_INSTANTIATE(float)
SPAR_INSTANTIATE(double)
#undef SPAR_INSTANTIATE

}  // namespace spar
