#include "layers/weight_and_bias.h"

namespace spar {

template <class T>
WeightAndBias<T>::WeightAndBias(const Tensor<T>& initial_weight, int64_t bias_size,
                                bool spectral_normalisation, int64_t rows, int64_t cols, Rng& rng)
    : weight(initial_weight) {
  if (bias_size > 0) bias = Tensor<T>::zeros({bias_size});
  if (spectral_normalisation) normaliser = SpectralNormaliser<T>(rows, cols, rng);
}

template <class T>
Var<T> WeightAndBias<T>::weight_for(Context<T>& ctx) {
  const Var<T> w = ctx.use(weight);
  return normaliser.enabled() ? normaliser.apply(w, ctx) : w;
}

template <class T>
void WeightAndBias<T>::collect_parameters(const std::string& prefix,
                                          std::vector<NamedTensor<T>>& out) {
  out.push_back({join_name(prefix, weight_role(weight.shape())), &weight});
  if (has_bias()) out.push_back({join_name(prefix, "offset"), &bias});
}

template <class T>
void WeightAndBias<T>::collect_state(const std::string& prefix, std::vector<NamedTensor<T>>& out) {
  normaliser.collect_state(prefix, out);
}

template struct WeightAndBias<float>;
template struct WeightAndBias<double>;

}  // namespace spar
