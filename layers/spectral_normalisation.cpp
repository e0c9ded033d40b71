#include "layers/spectral_normalisation.h"

#include <cmath>

#include "engine/kernels.h"

namespace spar {
namespace {

// x / ‖x‖ (a tiny floor keeps a zero vector finite).
template <class T>
Tensor<T> normalised(const Tensor<T>& x) {
  const double norm = std::sqrt(kernels::sum_all(kernels::unary(kernels::Unary::kSquare, x)));
  return kernels::scale(x, 1.0 / std::max(norm, 1e-12));
}

}  // namespace

template <class T>
SpectralNormaliser<T>::SpectralNormaliser(int64_t rows, int64_t cols, Rng& rng)
    : rows_(rows),
      cols_(cols),
      u_(normalised(rng.normal<T>({rows, 1}))),
      v_(normalised(rng.normal<T>({cols, 1}))) {}

template <class T>
Var<T> SpectralNormaliser<T>::apply(const Var<T>& w, Context<T>& ctx) {
  const Var<T> matrix = reshape(w, {rows_, cols_});
  if (ctx.training()) {
    const Tensor<T>& m = matrix.value();
    v_ = normalised(kernels::matrix_product(m, u_, true, false));
    u_ = normalised(kernels::matrix_product(m, v_, false, false));
  }
  const Var<T> u(u_), v(v_);
  const Var<T> sigma = reshape(matmul(matmul(u, matrix, true, false), v), Shape{});  // uᵀ W v
  last_sigma_ = static_cast<double>(sigma.as_scalar());
  return divide(w, sigma);
}

template <class T>
void SpectralNormaliser<T>::collect_state(const std::string& prefix,
                                          std::vector<NamedTensor<T>>& out) {
  if (!enabled()) return;
  out.push_back({join_name(prefix, "singular_left"), &u_});
  out.push_back({join_name(prefix, "singular_right"), &v_});
}

template class SpectralNormaliser<float>;
template class SpectralNormaliser<double>;

}  // namespace spar
