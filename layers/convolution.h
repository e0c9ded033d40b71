// Convolution layers (NCHW): Convolution, TransposedConvolution, and the parameter-free resampling
// layers AveragePooling and NearestUpsampling.
// Thread safety: as for layers (one thread at a time).
#pragma once

#include "engine/conv_geometry.h"
#include "layers/init.h"
#include "layers/layer.h"
#include "layers/weight_and_bias.h"

namespace spar {

struct ConvOptions {
  int64_t kernel_rows = 3, kernel_cols = 3;  // window size. Default 3×3.
  ConvGeometry geometry;  // stride and zero padding. Default stride 1, no padding.
  int64_t output_pad_rows = 0, output_pad_cols = 0;  // transposed convolution only: extra rows and
                                                     // columns at the end, 0 <= a < stride
  bool bias = true;                     // a learned offset per output channel. Default on.
  Init init = Init::kDcganNormal;       // the weight's initial distribution; the bias starts at 0
  bool spectral_normalisation = false;  // divide the weight by its largest singular value
};

// [N, in, H, W] → [N, out, OH, OW]; weight [out, in, KH, KW], bias [out].
template <class T>
class Convolution final : public Layer<T> {
 public:
  Convolution(int64_t in, int64_t out, const ConvOptions& options, Rng& rng);
  Var<T> run(const Var<T>& x, Context<T>& ctx) override;
  void collect_parameters(const std::string& prefix, std::vector<NamedTensor<T>>& out) override;
  void collect_state(const std::string& prefix, std::vector<NamedTensor<T>>& out) override;
  std::string describe() const override;

 private:
  int64_t in_, out_;
  ConvOptions options_;
  WeightAndBias<T> params_;
};

// The transposed convolution: [N, in, H, W] → [N, out, s(H−1) + a + KH − 2p, ...];
// weight [in, out, KH, KW], bias [out]. With 4×4 kernels, stride 2, padding 1 it doubles
// the spatial size, as in DCGAN generators.
template <class T>
class TransposedConvolution final : public Layer<T> {
 public:
  TransposedConvolution(int64_t in, int64_t out, const ConvOptions& options, Rng& rng);
  Var<T> run(const Var<T>& x, Context<T>& ctx) override;
  void collect_parameters(const std::string& prefix, std::vector<NamedTensor<T>>& out) override;
  void collect_state(const std::string& prefix, std::vector<NamedTensor<T>>& out) override;
  std::string describe() const override;

 private:
  int64_t in_, out_;
  ConvOptions options_;
  WeightAndBias<T> params_;
};

// Mean over non-overlapping factor × factor windows: [N, C, H, W] → [N, C, H/f, W/f]
// (H and W must be multiples of f).
template <class T>
class AveragePooling final : public Layer<T> {
 public:
  explicit AveragePooling(int64_t factor) : factor_(factor) {}
  Var<T> run(const Var<T>& x, Context<T>& ctx) override;
  std::string describe() const override;

 private:
  int64_t factor_;
};

// Nearest-neighbour upsampling: each pixel repeated factor × factor times.
template <class T>
class NearestUpsampling final : public Layer<T> {
 public:
  explicit NearestUpsampling(int64_t factor) : factor_(factor) {}
  Var<T> run(const Var<T>& x, Context<T>& ctx) override;
  std::string describe() const override;

 private:
  int64_t factor_;
};

extern template class Convolution<float>;
extern template class Convolution<double>;
extern template class TransposedConvolution<float>;
extern template class TransposedConvolution<double>;
extern template class AveragePooling<float>;
extern template class AveragePooling<double>;
extern template class NearestUpsampling<float>;
extern template class NearestUpsampling<double>;

}  // namespace spar
