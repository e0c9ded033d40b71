// Prints inputs and outputs of batch normalisation and spectral normalisation for
// tests/reference/check_layers.py, which recomputes them with numpy.
// Each line: "<name> <rank> <extents...> <values...>" with %.17g values.
#include <cstdio>

#include "layers/convolution.h"
#include "layers/normalisation.h"
#include "layers/spectral_normalisation.h"

using namespace spar;

namespace {
void print(const char* name, const Tensor<double>& t) {
  std::printf("%s %d", name, t.rank());
  for (int i = 0; i < t.rank(); ++i) std::printf(" %lld", static_cast<long long>(t.dim(i)));
  for (int64_t i = 0; i < t.element_count(); ++i) std::printf(" %.17g", t.data()[i]);
  std::printf("\n");
}
}  // namespace

int main() {
  Rng rng(31, 1);
  // Batch normalisation: one training step (batch statistics, running statistics updated
  // from their initial 0 and 1), then an evaluation step on other data.
  BatchNormalisationOptions options;
  options.epsilon = 1e-5;
  options.running_rate = 0.1;
  BatchNormalisation<double> norm(3, options);
  std::vector<NamedTensor<double>> params;
  norm.collect_parameters("", params);
  *params[0].tensor = rng.uniform<double>({3}, 0.5, 2.0);   // scale γ
  *params[1].tensor = rng.uniform<double>({3}, -1.0, 1.0);  // shift β
  // 13 samples: the kernels sum over slabs of 1 or 2 samples (engine/kernels_norm.cpp).
  const Tensor<double> x = rng.normal<double>({13, 3, 4, 5}, 1.5, 2.0);
  const Tensor<double> x_eval = rng.normal<double>({2, 3, 4, 5}, 1.5, 2.0);
  Context<double> train(nullptr, true), eval(nullptr, false);
  print("bn_x", x);
  print("bn_scale", *params[0].tensor);
  print("bn_shift", *params[1].tensor);
  print("bn_train_y", norm.run(Var<double>(x), train).value());
  std::vector<NamedTensor<double>> state;
  norm.collect_state("", state);
  print("bn_running_mean", *state[0].tensor);
  print("bn_running_variance", *state[1].tensor);
  print("bn_eval_x", x_eval);
  print("bn_eval_y", norm.run(Var<double>(x_eval), eval).value());

  // Spectral normalisation of a convolution weight [5, 3, 3, 3] viewed as 5 × 27: the σ after
  // the first training step and after 60, and the normalised weight. Its own random stream,
  // so that its inputs do not change with the batch normalisation case above.
  Rng sn_rng(31, 2);
  const Tensor<double> w = sn_rng.normal<double>({5, 3, 3, 3});
  SpectralNormaliser<double> sn(5, 27, sn_rng);
  print("sn_w", w);
  Tensor<double> normalised;
  for (int step = 1; step <= 60; ++step) {
    normalised = sn.apply(Var<double>(w), train).value();
    if (step == 1) print("sn_sigma_first", Tensor<double>::scalar(sn.last_sigma()));
  }
  print("sn_sigma", Tensor<double>::scalar(sn.last_sigma()));
  print("sn_normalised", normalised);
  return 0;
}
