// Batch normalisation (Ioffe & Szegedy 2015) and the minibatch standard-deviation feature
// (Karras et al. 2018).
// Thread safety: as for layers (one thread at a time).
#pragma once

#include "layers/layer.h"

namespace spar {

struct BatchNormalisationOptions {
  double epsilon = 1e-5;              // added to the variance before the square root. Default 1e-5.
  double running_rate = 0.1;          // weight of the newest batch in the running statistics:
                                      // running ← (1 − r)·running + r·batch. Default 0.1.
  bool learn_scale_and_shift = true;  // learn a scale γ (starts at 1) and shift β (starts at 0)
};

// Normalises each channel over the batch (and the spatial axes for [N, C, H, W] input):
// x̂ = (x − μ_B) / √(σ²_B + ε), y = γ·x̂ + β (Ioffe & Szegedy 2015, Algorithm 1), with μ_B and
// σ²_B the batch mean and (biased) variance. Training steps also update the running mean and
// the running unbiased variance m/(m−1)·σ²_B (Algorithm 2); evaluation steps normalise with
// those. A statistics pass (Context::set_statistics_pass) normalises with the batch's
// statistics and replaces the running ones with them (r = 1). Accepts [N, C] and [N, C, H, W].
// Parameters "scale", "shift"; state "population_mean", "population_variance" (the running
// statistics).
template <class T>
class BatchNormalisation final : public Layer<T> {
 public:
  BatchNormalisation(int64_t channels, const BatchNormalisationOptions& options = {});
  Var<T> run(const Var<T>& x, Context<T>& ctx) override;
  void collect_parameters(const std::string& prefix, std::vector<NamedTensor<T>>& out) override;
  void collect_state(const std::string& prefix, std::vector<NamedTensor<T>>& out) override;
  std::string describe() const override;

 private:
  int64_t channels_;
  BatchNormalisationOptions options_;
  Tensor<T> scale_, shift_, running_mean_, running_variance_;
};

// Appends one feature holding the batch's average standard deviation: the standard deviation
// of each feature over the batch, √(mean((x − mean x)²) + ε), averaged over all features and
// positions, broadcast as an extra channel ([N, C, H, W] → [N, C+1, H, W]) or column
// ([N, F] → [N, F+1]). A discriminator can then see a lack of variety (Karras et al. 2018,
// with one group spanning the whole batch).
template <class T>
class MinibatchStddev final : public Layer<T> {
 public:
  explicit MinibatchStddev(double epsilon = 1e-8) : epsilon_(epsilon) {}
  Var<T> run(const Var<T>& x, Context<T>& ctx) override;
  std::string describe() const override;

 private:
  double epsilon_;
};

extern template class BatchNormalisation<float>;
extern template class BatchNormalisation<double>;
extern template class MinibatchStddev<float>;
extern template class MinibatchStddev<double>;

}  // namespace spar
