#include "layers/convolution.h"

#include <string>

#include "engine/error.h"

namespace spar {
namespace {

std::string geometry_text(const ConvOptions& o) {
  auto pair = [](int64_t a, int64_t b) {
    return a == b ? std::to_string(a) : std::to_string(a) + "×" + std::to_string(b);
  };
  return std::to_string(o.kernel_rows) + "×" + std::to_string(o.kernel_cols) + ", stride " +
         pair(o.geometry.stride_rows, o.geometry.stride_cols) + ", padding " +
         pair(o.geometry.pad_rows, o.geometry.pad_cols);
}

void require_channels(const Shape& x, int64_t channels, const std::string& who) {
  if (x.rank() != 4 || x[1] != channels)
    raise(ErrorKind::kBadShape, who + ": input has shape " + x.str() + ", expected [N, " +
                                    std::to_string(channels) + ", H, W]");
}

template <class T>
Var<T> add_channel_bias(const Var<T>& y, Tensor<T>& bias, int64_t channels, Context<T>& ctx) {
  return add(y, reshape(ctx.use(bias), {1, channels, 1, 1}));
}

}  // namespace

template <class T>
Convolution<T>::Convolution(int64_t in, int64_t out, const ConvOptions& options, Rng& rng)
    : in_(in), out_(out), options_(options) {
  const int64_t area = options.kernel_rows * options.kernel_cols;
  params_ =
      WeightAndBias<T>(initial_weight<T>({out, in, options.kernel_rows, options.kernel_cols},
                                         in * area, out * area, options.init, rng),
                       options.bias ? out : 0, options.spectral_normalisation, out, in * area, rng);
}

template <class T>
Var<T> Convolution<T>::run(const Var<T>& x, Context<T>& ctx) {
  require_channels(x.shape(), in_, describe());
  const Var<T> y = convolution(x, params_.weight_for(ctx), options_.geometry);
  return params_.has_bias() ? add_channel_bias(y, params_.bias, out_, ctx) : y;
}

template <class T>
void Convolution<T>::collect_parameters(const std::string& prefix,
                                        std::vector<NamedTensor<T>>& out) {
  params_.collect_parameters(prefix, out);
}

template <class T>
void Convolution<T>::collect_state(const std::string& prefix, std::vector<NamedTensor<T>>& out) {
  params_.collect_state(prefix, out);
}

template <class T>
std::string Convolution<T>::describe() const {
  return "convolution " + std::to_string(in_) + "→" + std::to_string(out_) + ", " +
         geometry_text(options_) +
         (options_.spectral_normalisation ? ", spectral normalisation" : "");
}

template <class T>
TransposedConvolution<T>::TransposedConvolution(int64_t in, int64_t out, const ConvOptions& options,
                                                Rng& rng)
    : in_(in), out_(out), options_(options) {
  const int64_t area = options.kernel_rows * options.kernel_cols;
  params_ =
      WeightAndBias<T>(initial_weight<T>({in, out, options.kernel_rows, options.kernel_cols},
                                         in * area, out * area, options.init, rng),
                       options.bias ? out : 0, options.spectral_normalisation, in, out * area, rng);
}

template <class T>
Var<T> TransposedConvolution<T>::run(const Var<T>& x, Context<T>& ctx) {
  require_channels(x.shape(), in_, describe());
  const ConvGeometry& g = options_.geometry;
  const int64_t out_h =
      conv_transpose_output_extent(x.shape()[2], options_.kernel_rows, g.stride_rows, g.pad_rows,
                                   options_.output_pad_rows, "transposed_convolution");
  const int64_t out_w =
      conv_transpose_output_extent(x.shape()[3], options_.kernel_cols, g.stride_cols, g.pad_cols,
                                   options_.output_pad_cols, "transposed_convolution");
  const Var<T> y = transposed_convolution(x, params_.weight_for(ctx), g, out_h, out_w);
  return params_.has_bias() ? add_channel_bias(y, params_.bias, out_, ctx) : y;
}

template <class T>
void TransposedConvolution<T>::collect_parameters(const std::string& prefix,
                                                  std::vector<NamedTensor<T>>& out) {
  params_.collect_parameters(prefix, out);
}

template <class T>
void TransposedConvolution<T>::collect_state(const std::string& prefix,
                                             std::vector<NamedTensor<T>>& out) {
  params_.collect_state(prefix, out);
}

template <class T>
std::string TransposedConvolution<T>::describe() const {
  return "transposed convolution " + std::to_string(in_) + "→" + std::to_string(out_) + ", " +
         geometry_text(options_) +
         (options_.spectral_normalisation ? ", spectral normalisation" : "");
}

template <class T>
Var<T> AveragePooling<T>::run(const Var<T>& x, Context<T>&) {
  const Shape& s = x.shape();
  const int64_t f = factor_;
  if (s.rank() != 4 || f < 1 || s[2] % f != 0 || s[3] % f != 0)
    raise(ErrorKind::kBadShape, describe() + ": input shape " + s.str() +
                                    " is not [N, C, H, W] with H and W multiples of " +
                                    std::to_string(f));
  // [N, C, H/f, f, W/f, f], summed over the two window axes in one pass.
  const Var<T> windows = reshape(x, {s[0], s[1], s[2] / f, f, s[3] / f, f});
  const Var<T> summed = sum_into_shape(windows, {s[0], s[1], s[2] / f, 1, s[3] / f, 1});
  return scale(reshape(summed, {s[0], s[1], s[2] / f, s[3] / f}), 1.0 / static_cast<double>(f * f));
}

template <class T>
std::string AveragePooling<T>::describe() const {
  return "average pool " + std::to_string(factor_) + "×" + std::to_string(factor_);
}

template <class T>
Var<T> NearestUpsampling<T>::run(const Var<T>& x, Context<T>&) {
  const Shape& s = x.shape();
  const int64_t f = factor_;
  if (s.rank() != 4 || f < 1)
    raise(ErrorKind::kBadShape, describe() + ": input shape " + s.str() + " is not [N, C, H, W]");
  const Var<T> spread =
      broadcast_to(reshape(x, {s[0], s[1], s[2], 1, s[3], 1}), {s[0], s[1], s[2], f, s[3], f});
  return reshape(spread, {s[0], s[1], s[2] * f, s[3] * f});
}

template <class T>
std::string NearestUpsampling<T>::describe() const {
  return "nearest-neighbour upsample ×" + std::to_string(factor_);
}

template class Convolution<float>;
template class Convolution<double>;
template class TransposedConvolution<float>;
template class TransposedConvolution<double>;
template class AveragePooling<float>;
template class AveragePooling<double>;
template class NearestUpsampling<float>;
template class NearestUpsampling<double>;

}  // namespace spar
