#include "layers/normalisation.h"

#include <string>

#include "engine/error.h"
#include "engine/kernels.h"

namespace spar {

template <class T>
BatchNormalisation<T>::BatchNormalisation(int64_t channels,
                                          const BatchNormalisationOptions& options)
    : channels_(channels),
      options_(options),
      scale_(Tensor<T>::full({channels}, T(1))),
      shift_(Tensor<T>::zeros({channels})),
      running_mean_(Tensor<T>::zeros({channels})),
      running_variance_(Tensor<T>::full({channels}, T(1))) {}

template <class T>
Var<T> BatchNormalisation<T>::run(const Var<T>& x, Context<T>& ctx) {
  const Shape& s = x.shape();
  if ((s.rank() != 2 && s.rank() != 4) || s[1] != channels_)
    raise(ErrorKind::kBadShape, describe() + ": input has shape " + s.str() + ", expected [N, " +
                                    std::to_string(channels_) + "] or [N, " +
                                    std::to_string(channels_) + ", H, W]");
  const Shape stat = s.rank() == 2 ? Shape{1, channels_} : Shape{1, channels_, 1, 1};
  if (ctx.training() || ctx.statistics_pass()) {
    const int64_t m = s.element_count() / channels_;  // values per channel
    if (m < 2)
      raise(ErrorKind::kBadShape,
            describe() + ": a training batch needs two or more values per channel, got " + s.str());
    // Without a learned scale and shift: scale 1 and shift 0 as constants (they get no gradient).
    const Var<T> gamma = options_.learn_scale_and_shift
                             ? ctx.use(scale_)
                             : Var<T>(Tensor<T>::full({channels_}, T(1)));
    const Var<T> beta =
        options_.learn_scale_and_shift ? ctx.use(shift_) : Var<T>(Tensor<T>::zeros({channels_}));
    Tensor<T> batch;  // [2, C]: mean, biased variance
    Var<T> y = batch_normalise(x, gamma, beta, options_.epsilon, &batch);
    const double r = ctx.statistics_pass() ? 1.0 : options_.running_rate,
                 unbiased = static_cast<double>(m) / static_cast<double>(m - 1);
    running_mean_ = kernels::blend(running_mean_, 1 - r,
                                   kernels::slice(batch, 0, 0, 1).reshape({channels_}), r);
    running_variance_ =
        kernels::blend(running_variance_, 1 - r,
                       kernels::slice(batch, 0, 1, 2).reshape({channels_}), r * unbiased);
    return y;
  }
  // Inference: the running statistics, constants.
  const Var<T> mean(running_mean_.reshape(stat)), variance(running_variance_.reshape(stat));
  Var<T> normalised = divide(subtract(x, mean), sqrt(add_scalar(variance, options_.epsilon)));
  if (!options_.learn_scale_and_shift) return normalised;
  return add(multiply(normalised, reshape(ctx.use(scale_), stat)), reshape(ctx.use(shift_), stat));
}

template <class T>
void BatchNormalisation<T>::collect_parameters(const std::string& prefix,
                                               std::vector<NamedTensor<T>>& out) {
  if (!options_.learn_scale_and_shift) return;
  out.push_back({join_name(prefix, "scale"), &scale_});
  out.push_back({join_name(prefix, "shift"), &shift_});
}

template <class T>
void BatchNormalisation<T>::collect_state(const std::string& prefix,
                                          std::vector<NamedTensor<T>>& out) {
  out.push_back({join_name(prefix, "population_mean"), &running_mean_});
  out.push_back({join_name(prefix, "population_variance"), &running_variance_});
}

template <class T>
std::string BatchNormalisation<T>::describe() const {
  return "batch normalisation, " + std::to_string(channels_) + " channels";
}

template <class T>
Var<T> MinibatchStddev<T>::run(const Var<T>& x, Context<T>&) {
  const Shape& s = x.shape();
  if ((s.rank() != 2 && s.rank() != 4) || s[0] < 2)
    raise(ErrorKind::kBadShape, describe() + ": input has shape " + s.str() +
                                    ", expected [N, F] or [N, C, H, W] with N ≥ 2");
  const Var<T> centred = subtract(x, mean(x, 0, true));
  const Var<T> stddev = sqrt(add_scalar(mean(square(centred), 0, true), epsilon_));
  const Var<T> average = mean(stddev);  // one number for the batch
  const Shape column = s.rank() == 2 ? Shape{s[0], 1} : Shape{s[0], 1, s[2], s[3]};
  return concat<T>({x, broadcast_to(average, column)}, 1);
}

template <class T>
std::string MinibatchStddev<T>::describe() const {
  return "minibatch standard deviation feature";
}

template class BatchNormalisation<float>;
template class BatchNormalisation<double>;
template class MinibatchStddev<float>;
template class MinibatchStddev<double>;

}  // namespace spar
