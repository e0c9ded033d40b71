// Reference architectures: generator and discriminator pairs built from layers/.
//
//   MLP pair, for 2-D points and tables: latent → [dense, relu] × depth → dense → data;
//     data → [dense, leaky relu 0.2] × depth → dense → one score.
//   DCGAN-style pair (Radford et al. 2015) for 28, 32 and 64-pixel images, grayscale or RGB:
//     the generator maps the latent vector with a dense layer to a 7×7 (28 px) or 4×4 map and
//     doubles it with 4×4 stride-2 transposed convolutions (batch normalisation and relu
//     between, tanh at the output); the discriminator halves the size with 4×4 stride-2
//     convolutions (leaky relu 0.2; batch normalisation except after the first, or spectral
//     normalisation instead) and ends in a dense layer to one score.
// Weights start N(0, 0.02²) as in DCGAN. Names: "generator/..." and "critic/..." in checkpoints.
//
// Class-conditional variants (classes > 0) follow the conditional GAN of Mirza and Osindero
// 2014: the generator sees [z, one_hot(y)] and the critic sees the sample with one_hot(y)
// appended, as extra features (MLP) or as extra constant channels, one per class (DCGAN).
// run_generator and run_critic add the labels, so callers never build those inputs.
// Thread safety: construction only; the models follow the layers' rule.
#pragma once

#include <memory>

#include "layers/layer_stack.h"

namespace spar {

struct GanPair {
  std::unique_ptr<LayerStack<float>> generator;
  std::unique_ptr<LayerStack<float>> critic;
  int64_t latent = 0;
  Shape sample_shape;   // one generated sample, e.g. [2] or [1, 28, 28]
  int64_t classes = 0;  // 0: unconditional
};

// The pair's generator on latent vectors z [N, latent] and the critic on samples x [N, ...],
// with N labels for a conditional pair (none otherwise; raises kBadArgument on a mismatch).
Var<float> run_generator(GanPair& pair, const Var<float>& z, const std::vector<int64_t>& labels,
                         Context<float>& ctx);
Var<float> run_critic(GanPair& pair, const Var<float>& x, const std::vector<int64_t>& labels,
                      Context<float>& ctx);

struct MlpPairOptions {
  int64_t latent = 8;                   // latent vector size
  int64_t data = 2;                     // features per sample
  int64_t width = 128;                  // units per hidden layer
  int depth = 3;                        // hidden layers in each network
  bool spectral_normalisation = false;  // spectral normalisation in the critic's dense layers
  int64_t classes = 0;                  // > 0: class-conditional
};
GanPair make_mlp_pair(const MlpPairOptions& options, Rng& rng);

struct DcganPairOptions {
  int64_t image_size = 32;  // 28, 32 or 64
  int64_t channels = 3;     // 1 (grayscale) or 3 (RGB)
  int64_t latent = 100;     // latent vector size
  int64_t width = 64;       // channels of the critic's first convolution; doubled per step
  bool spectral_normalisation = false;  // critic: spectral instead of batch normalisation
  int64_t classes = 0;                  // > 0: class-conditional
};
// Raises kBadArgument for an image size other than 28, 32 or 64, or channels other than 1 or 3.
GanPair make_dcgan_pair(const DcganPairOptions& options, Rng& rng);

}  // namespace spar
