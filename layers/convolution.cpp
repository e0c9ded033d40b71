#include "layers/convolution.h"

#include <string>

#include "engine/error.h"

namespace spar {
namespace {

std::string geometry_text(const ConvOptions& o) {
  auto pair = [](int64_t a, int64_t b) {
    return a == b ? std::to_string(a) : std::to_string(a) + "×" + std::to_string(b);
  };
  return std::to_string(o.kernel_h) + "×" + std::to_string(o.kernel_w) + ", stride " +
         pair(o.geometry.stride_h, o.geometry.stride_w) + ", padding " +
         pair(o.geometry.pad_h, o.geometry.pad_w);
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
Conv2d<T>::Conv2d(int64_t in, int64_t out, const ConvOptions& options, Rng& rng)
    : in_(in), out_(out), options_(options) {
  const int64_t area = options.kernel_h * options.kernel_w;
  weight_ = initial_weight<T>({out, in, options.kernel_h, options.kernel_w}, in * area, out * area,
                              options.init, rng);
  if (options.bias) bias_ = Tensor<T>::zeros({out});
  if (options.spectral_norm) normaliser_ = SpectralNormaliser<T>(out, in * area, rng);
}

template <class T>
Var<T> Conv2d<T>::forward(const Var<T>& x, Context<T>& ctx) {
  require_channels(x.shape(), in_, describe());
  Var<T> w = ctx.use(weight_);
  if (normaliser_.enabled()) w = normaliser_.apply(w, ctx);
  Var<T> y = conv2d(x, w, options_.geometry);
  return options_.bias ? add_channel_bias(y, bias_, out_, ctx) : y;
}

template <class T>
void Conv2d<T>::parameters(const std::string& prefix, std::vector<NamedTensor<T>>& out) {
  out.push_back({join_name(prefix, "weight"), &weight_});
  if (options_.bias) out.push_back({join_name(prefix, "bias"), &bias_});
}

template <class T>
void Conv2d<T>::buffers(const std::string& prefix, std::vector<NamedTensor<T>>& out) {
  normaliser_.buffers(prefix, out);
}

template <class T>
std::string Conv2d<T>::describe() const {
  return "conv2d " + std::to_string(in_) + "→" + std::to_string(out_) + ", " +
         geometry_text(options_) + (options_.spectral_norm ? ", spectral normalisation" : "");
}

template <class T>
ConvTranspose2d<T>::ConvTranspose2d(int64_t in, int64_t out, const ConvOptions& options, Rng& rng)
    : in_(in), out_(out), options_(options) {
  const int64_t area = options.kernel_h * options.kernel_w;
  weight_ = initial_weight<T>({in, out, options.kernel_h, options.kernel_w}, in * area, out * area,
                              options.init, rng);
  if (options.bias) bias_ = Tensor<T>::zeros({out});
  if (options.spectral_norm) normaliser_ = SpectralNormaliser<T>(in, out * area, rng);
}

template <class T>
Var<T> ConvTranspose2d<T>::forward(const Var<T>& x, Context<T>& ctx) {
  require_channels(x.shape(), in_, describe());
  const ConvGeometry& g = options_.geometry;
  const int64_t out_h =
      conv_transpose_output_extent(x.shape()[2], options_.kernel_h, g.stride_h, g.pad_h,
                                   options_.output_pad_h, "conv2d_transpose");
  const int64_t out_w =
      conv_transpose_output_extent(x.shape()[3], options_.kernel_w, g.stride_w, g.pad_w,
                                   options_.output_pad_w, "conv2d_transpose");
  Var<T> w = ctx.use(weight_);
  if (normaliser_.enabled()) w = normaliser_.apply(w, ctx);
  Var<T> y = conv2d_transpose(x, w, g, out_h, out_w);
  return options_.bias ? add_channel_bias(y, bias_, out_, ctx) : y;
}

template <class T>
void ConvTranspose2d<T>::parameters(const std::string& prefix, std::vector<NamedTensor<T>>& out) {
  out.push_back({join_name(prefix, "weight"), &weight_});
  if (options_.bias) out.push_back({join_name(prefix, "bias"), &bias_});
}

template <class T>
void ConvTranspose2d<T>::buffers(const std::string& prefix, std::vector<NamedTensor<T>>& out) {
  normaliser_.buffers(prefix, out);
}

template <class T>
std::string ConvTranspose2d<T>::describe() const {
  return "transposed conv2d " + std::to_string(in_) + "→" + std::to_string(out_) + ", " +
         geometry_text(options_) + (options_.spectral_norm ? ", spectral normalisation" : "");
}

template <class T>
Var<T> AveragePool2d<T>::forward(const Var<T>& x, Context<T>&) {
  const Shape& s = x.shape();
  const int64_t f = factor_;
  if (s.rank() != 4 || f < 1 || s[2] % f != 0 || s[3] % f != 0)
    raise(ErrorKind::kBadShape, describe() + ": input shape " + s.str() +
                                    " is not [N, C, H, W] with H and W multiples of " +
                                    std::to_string(f));
  // [N, C, H/f, f, W/f, f], summed over the two window axes in one pass.
  const Var<T> windows = reshape(x, {s[0], s[1], s[2] / f, f, s[3] / f, f});
  const Var<T> summed = sum_to(windows, {s[0], s[1], s[2] / f, 1, s[3] / f, 1});
  return scale(reshape(summed, {s[0], s[1], s[2] / f, s[3] / f}), 1.0 / static_cast<double>(f * f));
}

template <class T>
std::string AveragePool2d<T>::describe() const {
  return "average pool " + std::to_string(factor_) + "×" + std::to_string(factor_);
}

template <class T>
Var<T> Upsample2d<T>::forward(const Var<T>& x, Context<T>&) {
  const Shape& s = x.shape();
  const int64_t f = factor_;
  if (s.rank() != 4 || f < 1)
    raise(ErrorKind::kBadShape, describe() + ": input shape " + s.str() + " is not [N, C, H, W]");
  const Var<T> spread =
      broadcast_to(reshape(x, {s[0], s[1], s[2], 1, s[3], 1}), {s[0], s[1], s[2], f, s[3], f});
  return reshape(spread, {s[0], s[1], s[2] * f, s[3] * f});
}

template <class T>
std::string Upsample2d<T>::describe() const {
  return "nearest-neighbour upsample ×" + std::to_string(factor_);
}

template class Conv2d<float>;
template class Conv2d<double>;
template class ConvTranspose2d<float>;
template class ConvTranspose2d<double>;
template class AveragePool2d<float>;
template class AveragePool2d<double>;
template class Upsample2d<float>;
template class Upsample2d<double>;

}  // namespace spar
