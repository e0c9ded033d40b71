// Dense (fully connected) and ClassEmbedding layers.
// Thread safety: as for layers (one thread at a time).
#pragma once

#include "layers/init.h"
#include "layers/layer.h"
#include "layers/weight_and_bias.h"

namespace spar {

struct DenseOptions {
  bool bias = true;                // a learned offset per output. Default on.
  Init init = Init::kDcganNormal;  // the weight's initial distribution; the bias starts at 0
  bool spectral_normalisation =
      false;  // divide the weight by its largest singular value. Default off.
};

// y = x·W + b for x: [N, in], W: [in, out], b: [out]. Parameters "matrix" (W) and "offset" (b).
template <class T>
class Dense final : public Layer<T> {
 public:
  Dense(int64_t in, int64_t out, const DenseOptions& options, Rng& rng);
  Var<T> run(const Var<T>& x, Context<T>& ctx) override;
  void collect_parameters(const std::string& prefix, std::vector<NamedTensor<T>>& out) override;
  void collect_state(const std::string& prefix, std::vector<NamedTensor<T>>& out) override;
  std::string describe() const override;

 private:
  int64_t in_, out_;
  DenseOptions options_;
  WeightAndBias<T> params_;
};

// A learned vector per class, for class-conditional models: the input is one-hot rows
// [N, classes] (see one_hot) and the output is [N, dim] = one_hot · E. Parameter "table",
// initialised N(0, 1).
template <class T>
class ClassEmbedding final : public Layer<T> {
 public:
  ClassEmbedding(int64_t classes, int64_t dim, Rng& rng);
  Var<T> run(const Var<T>& one_hot_rows, Context<T>& ctx) override;
  void collect_parameters(const std::string& prefix, std::vector<NamedTensor<T>>& out) override;
  std::string describe() const override;

 private:
  int64_t classes_, dim_;
  Tensor<T> table_;
};

// Rows of zeros with a one at each label: [labels.size(), classes]. Raises kBadArgument for a
// label outside 0..classes-1.
template <class T>
Tensor<T> one_hot(const std::vector<int64_t>& labels, int64_t classes);

extern template class Dense<float>;
extern template class Dense<double>;
extern template class ClassEmbedding<float>;
extern template class ClassEmbedding<double>;

}  // namespace spar
