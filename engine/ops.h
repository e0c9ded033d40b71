// The differentiable operations on Var<T>.
//
// Each operation computes its value with a kernel (kernels.h) and, when recorded, stores
// what its adjoint needs in a tape node (tape.h; the nodes are in tape_detail.h). Every
// adjoint is written with these same operations, so gradients can be differentiated again.
// Each operation's forward and adjoint stand together in one place: ops_elementwise.cpp,
// ops_shape.cpp, ops_reduce.cpp, ops_conv.cpp and ops_norm.cpp.
// Composite operations (mean, softmax, the cross-entropies) are built from the others and
// need no adjoint of their own.
//
// Broadcasting follows numpy's rule (shape.h): scalars, per-row and per-channel operands
// combine with full tensors, and the adjoint sums back to the operand's shape.
// Thread safety: as for Tape (one thread per tape); kernels may use several cores.
#pragma once

#include <vector>

#include "engine/conv_geometry.h"
#include "engine/tape.h"

namespace spar {

// ---- elementwise, with broadcasting ----
template <class T>
Var<T> add(const Var<T>& a, const Var<T>& b);
template <class T>
Var<T> subtract(const Var<T>& a, const Var<T>& b);
template <class T>
Var<T> multiply(const Var<T>& a, const Var<T>& b);
template <class T>
Var<T> divide(const Var<T>& a, const Var<T>& b);

// ---- elementwise, one operand ----
template <class T>
Var<T> negate(const Var<T>& x);
template <class T>
Var<T> exp(const Var<T>& x);
template <class T>
Var<T> log(const Var<T>& x);
template <class T>
Var<T> sqrt(const Var<T>& x);
template <class T>
Var<T> square(const Var<T>& x);
template <class T>
Var<T> power(const Var<T>& x, double p);  // x^p for a constant p
template <class T>
Var<T> abs(const Var<T>& x);  // derivative sign(x), 0 at 0
template <class T>
Var<T> tanh(const Var<T>& x);
template <class T>
Var<T> sigmoid(const Var<T>& x);  // stable for large |x|
template <class T>
Var<T> relu(const Var<T>& x);  // derivative 0 at 0
template <class T>
Var<T> leaky_relu(const Var<T>& x, double slope);
template <class T>
Var<T> softplus(const Var<T>& x);  // log(1 + e^x), stable
template <class T>
Var<T> log_sigmoid(const Var<T>& x);  // log(sigmoid(x)), stable
template <class T>
Var<T> scale(const Var<T>& x, double c);  // c·x
template <class T>
Var<T> add_scalar(const Var<T>& x, double c);  // x + c

// ---- products and shapes ----
// op(a)·op(b) for matrices; op transposes when the flag is set (no copy is made).
template <class T>
Var<T> matmul(const Var<T>& a, const Var<T>& b, bool transpose_a = false, bool transpose_b = false);
template <class T>
Var<T> transpose(const Var<T>& x);  // of a matrix
template <class T>
Var<T> permute(const Var<T>& x, const std::vector<int>& perm);
template <class T>
Var<T> reshape(const Var<T>& x, const Shape& shape);  // shares storage
template <class T>
Var<T> concat(const std::vector<Var<T>>& xs, int axis);
template <class T>
Var<T> slice(const Var<T>& x, int axis, int64_t begin, int64_t end);
template <class T>
Var<T> pad(const Var<T>& x, int axis, int64_t before, int64_t after);
template <class T>
Var<T> broadcast_to(const Var<T>& x, const Shape& shape);
template <class T>
Var<T> sum_into_shape(const Var<T>& x, const Shape& shape);  // adjoint of broadcast_to

// ---- 2-D convolutions, NCHW (ops_conv.cpp) ----
// ConvGeometry and the output-size rule are in conv_geometry.h, the formulas in kernels.h.
// x: [N,C,H,W], w: [O,C,KH,KW] → [N,O,OH,OW] (cross-correlation with stride and zero padding).
template <class T>
Var<T> convolution(const Var<T>& x, const Var<T>& w, const ConvGeometry& g);
// The transposed convolution (convolution's adjoint in its input): z: [N,O,OH,OW], w: [O,C,KH,KW]
// → [N,C,out_h,out_w].
template <class T>
Var<T> transposed_convolution(const Var<T>& z, const Var<T>& w, const ConvGeometry& g,
                              int64_t out_h, int64_t out_w);
// convolution's adjoint in its weight: x: [N,C,H,W], dy: [N,O,OH,OW] →
// [O,C,kernel_rows,kernel_cols].
template <class T>
Var<T> convolution_weight_gradient(const Var<T>& x, const Var<T>& dy, const ConvGeometry& g,
                                   int64_t kernel_rows, int64_t kernel_cols);

// ---- batch normalisation (ops_norm.cpp) ----
// Per channel (axis 1 of [N, C] or [N, C, H, W]): (x − mean)/√(variance + ε)·scale + shift,
// with the batch's own mean and biased variance over every other axis (Ioffe & Szegedy
// 2015), so gradients also flow through the statistics. scale and shift: [C]. When
// `statistics` is given it receives the batch mean and variance as a [2, C] tensor.
template <class T>
Var<T> batch_normalise(const Var<T>& x, const Var<T>& scale, const Var<T>& shift, double epsilon,
                       Tensor<T>* statistics = nullptr);

// ---- reductions (an axis may be negative: -1 is the last) ----
template <class T>
Var<T> sum(const Var<T>& x);  // all elements, rank-0 result
template <class T>
Var<T> sum(const Var<T>& x, int axis, bool keep_axis = false);
template <class T>
Var<T> mean(const Var<T>& x);
template <class T>
Var<T> mean(const Var<T>& x, int axis, bool keep_axis = false);
template <class T>
Var<T> max(const Var<T>& x, int axis, bool keep_axis = false);  // ties: first
template <class T>
Var<T> log_sum_exp(const Var<T>& x, int axis, bool keep_axis = false);
template <class T>
Var<T> softmax(const Var<T>& x, int axis);
// Per-lane −Σ targets·log softmax(logits) along `axis` (targets are probabilities, for
// example one-hot rows); the axis is removed.
template <class T>
Var<T> class_cross_entropy(const Var<T>& logits, const Var<T>& targets, int axis);
// Elementwise −[t·log σ(z) + (1−t)·log(1−σ(z))] = softplus(z) − t·z, stable for any z.
template <class T>
Var<T> logistic_cross_entropy(const Var<T>& logits, const Var<T>& targets);

// ---- operators, for readable formulas ----
template <class T>
Var<T> operator+(const Var<T>& a, const Var<T>& b) {
  return add(a, b);
}
template <class T>
Var<T> operator-(const Var<T>& a, const Var<T>& b) {
  return subtract(a, b);
}
template <class T>
Var<T> operator*(const Var<T>& a, const Var<T>& b) {
  return multiply(a, b);
}
template <class T>
Var<T> operator/(const Var<T>& a, const Var<T>& b) {
  return divide(a, b);
}
template <class T>
Var<T> operator-(const Var<T>& x) {
  return negate(x);
}
template <class T>
Var<T> operator*(double c, const Var<T>& x) {
  return scale(x, c);
}
template <class T>
Var<T> operator*(const Var<T>& x, double c) {
  return scale(x, c);
}
template <class T>
Var<T> operator+(const Var<T>& x, double c) {
  return add_scalar(x, c);
}
template <class T>
Var<T> operator-(const Var<T>& x, double c) {
  return add_scalar(x, -c);
}

}  // namespace spar
