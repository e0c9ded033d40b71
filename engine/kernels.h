// Kernels: the tensor-in, tensor-out computations behind the operations in ops.h.
//
// Kernels know nothing of tapes or gradients; each returns a freshly allocated tensor and
// never writes into its inputs (tape.h, invariant 2). Large kernels split their work into
// fixed chunks (parallel.h), so results are bit-identical for any thread count. Layers may
// call kernels directly for work that is not differentiated (sampling, statistics).
//
// Thread safety: kernels may be called from several threads on distinct outputs; inputs
// are only read.
#pragma once

#include <vector>

#include "engine/conv_geometry.h"
#include "engine/tensor.h"

namespace spar {
namespace kernels {

enum class Unary {
  kNegate,
  kExp,
  kLog,
  kSqrt,
  kSquare,
  kAbs,
  kSign,  // -1, 0 or 1
  kTanh,
  kSigmoid,
  kRelu,
  kSoftplus,    // log(1 + e^x), computed as max(x, 0) + log1p(e^-|x|)
  kLogSigmoid,  // log(sigmoid(x)) = min(x, 0) - log1p(e^-|x|)
};
template <class T>
Tensor<T> unary(Unary f, const Tensor<T>& x);

// x^p elementwise; c·x; x + c; leaky relu (x for x > 0, slope·x otherwise) and its
// derivative (1 or slope).
template <class T>
Tensor<T> power(const Tensor<T>& x, double p);
template <class T>
Tensor<T> scale(const Tensor<T>& x, double c);
template <class T>
Tensor<T> add_scalar(const Tensor<T>& x, double c);
template <class T>
Tensor<T> leaky_relu(const Tensor<T>& x, double slope);
template <class T>
Tensor<T> leaky_relu_slope(const Tensor<T>& x, double slope);
// g·leaky_relu_slope(x, slope) in one pass: the adjoint of leaky relu (relu: slope 0).
template <class T>
Tensor<T> leaky_relu_adjoint(const Tensor<T>& g, const Tensor<T>& x, double slope);
// g·(1 − y²) in one pass: the adjoint of tanh, from its output y.
template <class T>
Tensor<T> tanh_adjoint(const Tensor<T>& g, const Tensor<T>& y);

// wa·a + wb·b elementwise, for a and b of one shape (raises kBadShape otherwise), with the
// weights rounded to T first: the same two products and one sum, rounded in the same order,
// as binary(kAdd, scale(a, wa), scale(b, wb)), so bit-identical to it, in one pass
// (kernels_blend.cpp, compiled without contraction into fused multiply-adds). For running
// averages: batch statistics, a generator's weight average.
template <class T>
Tensor<T> blend(const Tensor<T>& a, double wa, const Tensor<T>& b, double wb);

enum class Binary { kAdd, kSubtract, kMultiply, kDivide };
// Elementwise with numpy broadcasting; `op` names the operation in shape errors.
template <class T>
Tensor<T> binary(Binary f, const Tensor<T>& a, const Tensor<T>& b, const char* op);

// Repeats x along its size-1 (or missing leading) axes to `shape`.
template <class T>
Tensor<T> broadcast_to(const Tensor<T>& x, const Shape& shape);
// The adjoint of broadcast_to: sums x over the axes where `shape` has extent 1 (or lacks
// leading axes). Accumulates in double; summation order depends only on the shapes.
template <class T>
Tensor<T> sum_into_shape(const Tensor<T>& x, const Shape& shape);

// Maximum along `axis`, keeping it with extent 1. When `first_max` is given it receives a
// tensor shaped like x holding 1 at the first maximum of each lane and 0 elsewhere.
template <class T>
Tensor<T> max_along(const Tensor<T>& x, int axis, Tensor<T>* first_max);
// log Σ exp(x) along `axis`, keeping it with extent 1, computed as m + log Σ exp(x - m).
template <class T>
Tensor<T> log_sum_exp_along(const Tensor<T>& x, int axis);

// Floating-point operations done so far in this process by matrix_product and the three
// convolution kernels: 2·m·n·k per product, a convolution counting as its im2col product
// (2·N·O·OH·OW·C·KH·KW). A relaxed atomic added to once per call; benchmarks read it to
// express a training step's speed as a fraction of raw GEMM speed.
uint64_t product_flops();
void add_product_flops(int64_t flops);  // for kernels that run products themselves

// op(a)·op(b) for rank-2 a and b, op = transpose when the flag is set; Eigen's GEMM over
// fixed row panels of the result (parallel.h).
template <class T>
Tensor<T> matrix_product(const Tensor<T>& a, const Tensor<T>& b, bool transpose_a,
                         bool transpose_b);

// Axis permutation: output axis i is input axis perm[i].
template <class T>
Tensor<T> permute(const Tensor<T>& x, const std::vector<int>& perm);
// Entries begin..end-1 along `axis`.
template <class T>
Tensor<T> slice(const Tensor<T>& x, int axis, int64_t begin, int64_t end);
// x with `before` zeros in front and `after` zeros behind along `axis`.
template <class T>
Tensor<T> pad(const Tensor<T>& x, int axis, int64_t before, int64_t after);
// Joins tensors along `axis`; all other extents must agree.
template <class T>
Tensor<T> concatenate(const std::vector<Tensor<T>>& xs, int axis);

// ---- 2-D convolution (NCHW), lowered to Eigen's GEMM (kernels_conv.cpp) ----

// y[n,o,i,j] = Σ_{c,p,q} w[o,c,p,q] · x[n, c, i·s_h + p − pad_rows, j·s_w + q − pad_cols]
// (cross-correlation, zero outside x). x: [N,C,H,W], w: [O,C,KH,KW] → [N,O,OH,OW].
template <class T>
Tensor<T> convolution(const Tensor<T>& x, const Tensor<T>& w, const ConvGeometry& g);
// The adjoint of convolution with respect to its input, which is also the transposed
// convolution: z: [N,O,OH,OW], w: [O,C,KH,KW] → [N,C,out_h,out_w], where convolution of an
// out_h × out_w input must give OH × OW (out_h − (s(OH−1) + KH − 2p) is the output padding).
template <class T>
Tensor<T> transposed_convolution(const Tensor<T>& z, const Tensor<T>& w, const ConvGeometry& g,
                                 int64_t out_h, int64_t out_w);
// The adjoint of convolution with respect to its weight: x: [N,C,H,W], dy: [N,O,OH,OW] →
// [O,C,kernel_rows,kernel_cols] = Σ_n dy_n · columns(x_n)ᵀ, summed over n in a fixed order.
template <class T>
Tensor<T> convolution_weight_gradient(const Tensor<T>& x, const Tensor<T>& dy,
                                      const ConvGeometry& g, int64_t kernel_rows,
                                      int64_t kernel_cols);

// ---- batch normalisation, per channel: axis 1 of [N, C] or [N, C, H, W] (kernels_norm.cpp) ----
// Each channel's statistics are taken over every other axis, accumulated in double; the work
// is split over channels, so results do not depend on the thread count.

// The batch mean and biased variance of each channel, as rows 0 and 1 of a [2, C] tensor.
template <class T>
Tensor<T> channel_statistics(const Tensor<T>& x);
// (x − mean)/√(variance + ε)·scale + shift per channel; statistics from channel_statistics,
// scale and shift of shape [C].
template <class T>
Tensor<T> normalise_channels(const Tensor<T>& x, const Tensor<T>& statistics,
                             const Tensor<T>& scale, const Tensor<T>& shift, double epsilon);
// The adjoint of normalise_channels when the statistics are x's own (so they depend on x):
// for the output gradient g, with x̂ = (x − mean)/√(variance + ε) and m values per channel,
//   shift: Σ g    scale: Σ g·x̂    x: scale/√(variance + ε) · (g − (Σ g + x̂·Σ g·x̂)/m).
template <class T>
struct NormaliseGradients {
  Tensor<T> x, scale, shift;
};
template <class T>
NormaliseGradients<T> normalise_channels_adjoint(const Tensor<T>& g, const Tensor<T>& x,
                                                 const Tensor<T>& statistics,
                                                 const Tensor<T>& scale, double epsilon);

// Σ x, accumulated in double over fixed chunks.
template <class T>
double sum_all(const Tensor<T>& x);

// The index of the first NaN or ±∞ in x, or −1 when every element is finite. One vectorised
// pass (Σ 0·x is NaN exactly when some element is not finite); the scan for the index runs
// only when one is found. Cheap enough to run on every parameter and gradient each step.
template <class T>
int64_t first_non_finite(const Tensor<T>& x);

}  // namespace kernels
}  // namespace spar
