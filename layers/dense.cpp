#include "layers/dense.h"

#include <string>

#include "engine/error.h"

namespace spar {

template <class T>
Dense<T>::Dense(int64_t in, int64_t out, const DenseOptions& options, Rng& rng)
    : in_(in), out_(out), options_(options) {
  if (in < 1 || out < 1)
    raise(ErrorKind::kBadArgument,
          "dense: sizes " + std::to_string(in) + "→" + std::to_string(out) + " must be positive");
  params_ = WeightAndBias<T>(initial_weight<T>({in, out}, in, out, options.init, rng),
                             options.bias ? out : 0, options.spectral_normalisation, in, out, rng);
}

template <class T>
Var<T> Dense<T>::run(const Var<T>& x, Context<T>& ctx) {
  if (x.shape().rank() != 2 || x.shape()[1] != in_)
    raise(ErrorKind::kBadShape, "dense " + std::to_string(in_) + "→" + std::to_string(out_) +
                                    ": input has shape " + x.shape().str() + ", expected [N, " +
                                    std::to_string(in_) + "]");
  const Var<T> y = matmul(x, params_.weight_for(ctx));
  return params_.has_bias() ? add(y, ctx.use(params_.bias)) : y;
}

template <class T>
void Dense<T>::collect_parameters(const std::string& prefix, std::vector<NamedTensor<T>>& out) {
  params_.collect_parameters(prefix, out);
}

template <class T>
void Dense<T>::collect_state(const std::string& prefix, std::vector<NamedTensor<T>>& out) {
  params_.collect_state(prefix, out);
}

template <class T>
std::string Dense<T>::describe() const {
  return "dense " + std::to_string(in_) + "→" + std::to_string(out_) +
         (options_.bias ? "" : ", no bias") +
         (options_.spectral_normalisation ? ", spectral normalisation" : "");
}

template <class T>
ClassEmbedding<T>::ClassEmbedding(int64_t classes, int64_t dim, Rng& rng)
    : classes_(classes), dim_(dim), table_(rng.normal<T>({classes, dim})) {}

template <class T>
Var<T> ClassEmbedding<T>::run(const Var<T>& one_hot_rows, Context<T>& ctx) {
  if (one_hot_rows.shape().rank() != 2 || one_hot_rows.shape()[1] != classes_)
    raise(ErrorKind::kBadShape, "embedding: input has shape " + one_hot_rows.shape().str() +
                                    ", expected one-hot rows [N, " + std::to_string(classes_) +
                                    "]");
  return matmul(one_hot_rows, ctx.use(table_));
}

template <class T>
void ClassEmbedding<T>::collect_parameters(const std::string& prefix,
                                           std::vector<NamedTensor<T>>& out) {
  out.push_back({join_name(prefix, "table"), &table_});
}

template <class T>
std::string ClassEmbedding<T>::describe() const {
  return "embedding " + std::to_string(classes_) + " classes → " + std::to_string(dim_);
}

template <class T>
Tensor<T> one_hot(const std::vector<int64_t>& labels, int64_t classes) {
  Tensor<T> t = Tensor<T>::zeros({static_cast<int64_t>(labels.size()), classes});
  for (size_t i = 0; i < labels.size(); ++i) {
    if (labels[i] < 0 || labels[i] >= classes)
      raise(ErrorKind::kBadArgument, "one_hot: label " + std::to_string(labels[i]) +
                                         " outside 0.." + std::to_string(classes - 1));
    t.mutable_data()[static_cast<int64_t>(i) * classes + labels[i]] = T(1);
  }
  return t;
}

template class Dense<float>;
template class Dense<double>;
template class ClassEmbedding<float>;
template class ClassEmbedding<double>;
template Tensor<float> one_hot(const std::vector<int64_t>&, int64_t);
template Tensor<double> one_hot(const std::vector<int64_t>&, int64_t);

}  // namespace spar
