// WeightAndBias<T>: the parameters dense and convolution layers share.
// Thread safety: as for layers (one thread at a time).
#pragma once

#include "layers/layer.h"
#include "layers/spectral_normalisation.h"

namespace spar {

// The weight, optional bias and optional spectral normaliser that dense and convolution layers
// share: one place for their initialisation order, their names ("matrix" or "filters",
// "offset", "singular_left", "singular_right"; layer.h) and the normalised weight a step uses.
template <class T>
struct WeightAndBias {
  WeightAndBias() = default;
  // The weight is drawn first, then the normaliser's vectors (rows × cols view of the weight).
  WeightAndBias(const Tensor<T>& initial_weight, int64_t bias_size, bool spectral_normalisation,
                int64_t rows, int64_t cols, Rng& rng);
  // The step's weight variable, divided by its spectral norm when enabled.
  Var<T> weight_for(Context<T>& ctx);
  bool has_bias() const { return bias.has_value(); }
  void collect_parameters(const std::string& prefix, std::vector<NamedTensor<T>>& out);
  void collect_state(const std::string& prefix, std::vector<NamedTensor<T>>& out);

  Tensor<T> weight, bias;  // bias holds no value when the layer has none
  SpectralNormaliser<T> normaliser;
};

extern template struct WeightAndBias<float>;
extern template struct WeightAndBias<double>;

}  // namespace spar
