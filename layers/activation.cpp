#include "layers/activation.h"

#include <string>

#include "engine/error.h"

namespace spar {

template <class T>
Var<T> Nonlinearity<T>::run(const Var<T>& x, Context<T>&) {
  switch (kind_) {
    case NonlinearityKind::kRelu:
      return relu(x);
    case NonlinearityKind::kLeakyRelu:
      return leaky_relu(x, slope_);
    case NonlinearityKind::kTanh:
      return tanh(x);
    case NonlinearityKind::kSigmoid:
      return sigmoid(x);
  }
  return x;
}

template <class T>
std::string Nonlinearity<T>::describe() const {
  switch (kind_) {
    case NonlinearityKind::kRelu:
      return "relu";
    case NonlinearityKind::kLeakyRelu:
      return "leaky relu, slope " + std::to_string(slope_).substr(0, 4);
    case NonlinearityKind::kTanh:
      return "tanh";
    case NonlinearityKind::kSigmoid:
      return "sigmoid";
  }
  return "activation";
}

template <class T>
Dropout<T>::Dropout(double p) : p_(p) {
  if (!(p >= 0 && p < 1))
    raise(ErrorKind::kBadArgument,
          "dropout: probability " + std::to_string(p) + " is outside [0, 1)");
}

template <class T>
Var<T> Dropout<T>::run(const Var<T>& x, Context<T>& ctx) {
  if (!ctx.training() || p_ == 0) return x;
  Tensor<T> mask = ctx.rng("dropout").template uniform<T>(x.shape());
  T* m = mask.mutable_data();
  const T keep = static_cast<T>(1 / (1 - p_)), p = static_cast<T>(p_);
  for (int64_t i = 0; i < mask.element_count(); ++i) m[i] = m[i] < p ? T(0) : keep;
  return multiply(x, Var<T>(mask));
}

template <class T>
std::string Dropout<T>::describe() const {
  return "dropout " + std::to_string(p_).substr(0, 4);
}

template <class T>
Var<T> PerSampleReshape<T>::run(const Var<T>& x, Context<T>&) {
  Shape s;
  s.push_back(x.shape()[0]);
  for (int64_t d : per_sample_) s.push_back(d);
  if (s.element_count() != x.element_count())
    raise(ErrorKind::kBadShape,
          describe() + ": input of shape " + x.shape().str() + " does not fit " + s.str());
  return reshape(x, s);
}

template <class T>
std::string PerSampleReshape<T>::describe() const {
  return "reshape to [N, " + per_sample_.str().substr(1);
}

template class Nonlinearity<float>;
template class Nonlinearity<double>;
template class Dropout<float>;
template class Dropout<double>;
template class PerSampleReshape<float>;
template class PerSampleReshape<double>;

}  // namespace spar
