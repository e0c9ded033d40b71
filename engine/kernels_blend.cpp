// The blend kernel, wa·a + wb·b, in a file of its own because it is compiled with
// -ffp-contract=off (engine/CMakeLists.txt). GCC contracts a·b + c into one fused multiply-add
// by default, even across statements, and a fused result is rounded once instead of twice, so
// it would differ in the last bit from scale, scale and add done as three kernels. Without
// contraction the loop computes exactly their products and sum; clang contracts only within
// an expression by default and honours the pragma below.
#include <string>

#include "engine/error.h"
#include "engine/kernels.h"
#include "engine/parallel.h"

namespace spar {
namespace kernels {
namespace {

// One chunk, on restrict-qualified pointers and weights held by value, so it vectorises.
template <class T>
void blend_run(const T* __restrict a, T wa, const T* __restrict b, T wb, T* __restrict out,
               int64_t n) {
#ifdef __clang__
#pragma clang fp contract(off)
#endif
  for (int64_t i = 0; i < n; ++i) out[i] = wa * a[i] + wb * b[i];
}

}  // namespace

template <class T>
Tensor<T> blend(const Tensor<T>& a, double wa, const Tensor<T>& b, double wb) {
  if (a.shape() != b.shape())
    raise(ErrorKind::kBadShape,
          "blend: shapes " + a.shape().str() + " and " + b.shape().str() + " differ");
  Tensor<T> out = Tensor<T>::uninitialised(a.shape());
  const T ka = static_cast<T>(wa), kb = static_cast<T>(wb);  // as scale() rounds its factor
  const T* pa = a.data();
  const T* pb = b.data();
  T* po = out.mutable_data();
  parallel_for_chunks(a.element_count(), [pa, ka, pb, kb, po](int64_t begin, int64_t end) {
    blend_run(pa + begin, ka, pb + begin, kb, po + begin, end - begin);
  });
  return out;
}

template Tensor<float> blend(const Tensor<float>&, double, const Tensor<float>&, double);
template Tensor<double> blend(const Tensor<double>&, double, const Tensor<double>&, double);

}  // namespace kernels
}  // namespace spar
