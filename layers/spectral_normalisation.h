// SpectralNormaliser<T>: divides a weight by an estimate of its largest singular value,
// Miyato et al. 2018, "Spectral normalization for generative adversarial networks",
// Algorithm 1.
//
// The weight is viewed as a matrix of `rows` × `cols` (a convolution's [O, C, KH, KW] as
// O × C·KH·KW, as in the paper). Persistent vectors u (rows) and v (cols) carry the power
// iteration across steps. In a training step one iteration runs first, outside the tape:
//   v ← Wᵀu / ‖Wᵀu‖,  u ← W v / ‖W v‖;
// then σ = uᵀ W v is recorded (so the gradient flows through σ into W, with u and v held
// constant, as in the paper) and the layer uses W / σ. Evaluation steps use u and v as they
// are. Thread safety: as for layers.
#pragma once

#include "layers/layer.h"

namespace spar {

template <class T>
class SpectralNormaliser {
 public:
  SpectralNormaliser() = default;
  SpectralNormaliser(int64_t rows, int64_t cols, Rng& rng);

  bool enabled() const { return u_.has_value(); }
  // w / σ(w), advancing the power iteration first when ctx.training().
  Var<T> apply(const Var<T>& w, Context<T>& ctx);
  // σ from the latest apply() (for monitoring); 0 before the first.
  double last_sigma() const { return last_sigma_; }
  void collect_state(const std::string& prefix, std::vector<NamedTensor<T>>& out);

 private:
  int64_t rows_ = 0, cols_ = 0;
  Tensor<T> u_, v_;  // [rows, 1], [cols, 1]
  double last_sigma_ = 0;
};

extern template class SpectralNormaliser<float>;
extern template class SpectralNormaliser<double>;

}  // namespace spar
