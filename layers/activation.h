// Parameter-free layers: elementwise activations, dropout, and reshaping.
// Thread safety: as for layers (one thread at a time).
#pragma once

#include "layers/layer.h"

namespace spar {

enum class NonlinearityKind { kRelu, kLeakyRelu, kTanh, kSigmoid };

template <class T>
class Nonlinearity final : public Layer<T> {
 public:
  // `slope` is used by kLeakyRelu only (DCGAN discriminators use 0.2).
  explicit Nonlinearity(NonlinearityKind kind, double slope = 0.2) : kind_(kind), slope_(slope) {}
  Var<T> run(const Var<T>& x, Context<T>& ctx) override;
  std::string describe() const override;

 private:
  NonlinearityKind kind_;
  double slope_;
};

// Inverted dropout: in training steps each element is zeroed with probability p and the
// rest are scaled by 1/(1 − p), so evaluation steps pass the input through unchanged.
// Draws from the step's random stream (Context::rng).
template <class T>
class Dropout final : public Layer<T> {
 public:
  explicit Dropout(double p);
  Var<T> run(const Var<T>& x, Context<T>& ctx) override;
  std::string describe() const override;

 private:
  double p_;
};

// Reshapes each sample: [N, ...] → [N, shape...] (same number of elements per sample).
template <class T>
class PerSampleReshape final : public Layer<T> {
 public:
  explicit PerSampleReshape(Shape per_sample) : per_sample_(per_sample) {}
  Var<T> run(const Var<T>& x, Context<T>& ctx) override;
  std::string describe() const override;

 private:
  Shape per_sample_;
};

extern template class Nonlinearity<float>;
extern template class Nonlinearity<double>;
extern template class Dropout<float>;
extern template class Dropout<double>;
extern template class PerSampleReshape<float>;
extern template class PerSampleReshape<double>;

}  // namespace spar
