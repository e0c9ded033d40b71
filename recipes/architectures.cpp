#include "recipes/architectures.h"

#include "engine/error.h"
#include "layers/activation.h"
#include "layers/convolution.h"
#include "layers/dense.h"
#include "layers/normalisation.h"

namespace spar {
namespace {
using S = LayerStack<float>;
std::string numbered(const char* base, int i) {
  return base + std::to_string(i);
}
// x [N, F] or [N, C, H, W] with one_hot(labels) appended along axis 1: as F+K features, or
// as C+K channels, channel C+k being 1 everywhere for samples of class k.
Var<float> with_classes(const Var<float>& x, const std::vector<int64_t>& labels, int64_t classes,
                        const char* who) {
  if (classes == 0) {
    if (!labels.empty())
      raise(ErrorKind::kBadArgument, std::string(who) + ": labels given to an unconditional model");
    return x;
  }
  const Shape& s = x.shape();
  if (static_cast<int64_t>(labels.size()) != s[0])
    raise(ErrorKind::kBadArgument, std::string(who) + ": " + std::to_string(labels.size()) +
                                       " labels for " + std::to_string(s[0]) + " samples");
  Var<float> codes(one_hot<float>(labels, classes));
  if (s.rank() == 4)
    codes =
        broadcast_to(reshape(codes, Shape{s[0], classes, 1, 1}), Shape{s[0], classes, s[2], s[3]});
  return concat(std::vector<Var<float>>{x, codes}, 1);
}

}  // namespace

Var<float> run_generator(GanPair& pair, const Var<float>& z, const std::vector<int64_t>& labels,
                         Context<float>& ctx) {
  return pair.generator->run(with_classes(z, labels, pair.classes, "generator"), ctx);
}

Var<float> run_critic(GanPair& pair, const Var<float>& x, const std::vector<int64_t>& labels,
                      Context<float>& ctx) {
  return pair.critic->run(with_classes(x, labels, pair.classes, "critic"), ctx);
}

GanPair make_mlp_pair(const MlpPairOptions& o, Rng& rng) {
  GanPair pair{std::make_unique<S>(), std::make_unique<S>(), o.latent, Shape{o.data}, o.classes};
  DenseOptions plain;
  DenseOptions critic_dense = plain;
  critic_dense.spectral_normalisation = o.spectral_normalisation;
  int64_t in = o.latent + o.classes;
  for (int i = 1; i <= o.depth; ++i) {
    pair.generator->emplace<Dense<float>>(numbered("hidden", i), in, o.width, plain, rng);
    pair.generator->emplace<Nonlinearity<float>>(numbered("act", i), NonlinearityKind::kRelu);
    in = o.width;
  }
  pair.generator->emplace<Dense<float>>("out", in, o.data, plain, rng);
  in = o.data + o.classes;
  for (int i = 1; i <= o.depth; ++i) {
    pair.critic->emplace<Dense<float>>(numbered("hidden", i), in, o.width, critic_dense, rng);
    pair.critic->emplace<Nonlinearity<float>>(numbered("act", i), NonlinearityKind::kLeakyRelu,
                                              0.2);
    in = o.width;
  }
  pair.critic->emplace<Dense<float>>("out", in, 1, critic_dense, rng);
  return pair;
}

GanPair make_dcgan_pair(const DcganPairOptions& o, Rng& rng) {
  int doublings = 0;
  int64_t start = 0;
  if (o.image_size == 28)
    doublings = 2, start = 7;
  else if (o.image_size == 32)
    doublings = 3, start = 4;
  else if (o.image_size == 64)
    doublings = 4, start = 4;
  else
    raise(ErrorKind::kBadArgument,
          "image size " + std::to_string(o.image_size) + " is not one of 28, 32, 64");
  if (o.channels != 1 && o.channels != 3)
    raise(ErrorKind::kBadArgument, "channels " + std::to_string(o.channels) + " is not 1 or 3");
  GanPair pair{std::make_unique<S>(), std::make_unique<S>(), o.latent,
               Shape{o.channels, o.image_size, o.image_size}, o.classes};
  ConvOptions up;
  up.kernel_rows = up.kernel_cols = 4;
  up.geometry.stride_rows = up.geometry.stride_cols = 2;
  up.geometry.pad_rows = up.geometry.pad_cols = 1;
  up.bias = false;                                 // followed by batch normalisation
  const int64_t top = o.width << (doublings - 1);  // channels of the smallest map

  S& g = *pair.generator;
  DenseOptions project;
  project.bias = false;  // followed by batch normalisation
  g.emplace<Dense<float>>("project", o.latent + o.classes, top * start * start, project, rng);
  g.emplace<PerSampleReshape<float>>("map", Shape{top, start, start});
  g.emplace<BatchNormalisation<float>>("norm0", top);
  g.emplace<Nonlinearity<float>>("act0", NonlinearityKind::kRelu);
  int64_t c = top;
  for (int i = 1; i <= doublings; ++i) {
    const bool last = i == doublings;
    ConvOptions layer = up;
    layer.bias = last;
    const int64_t next = last ? o.channels : c / 2;
    g.emplace<TransposedConvolution<float>>(numbered("up", i), c, next, layer, rng);
    if (!last) {
      g.emplace<BatchNormalisation<float>>(numbered("norm", i), next);
      g.emplace<Nonlinearity<float>>(numbered("act", i), NonlinearityKind::kRelu);
    }
    c = next;
  }
  g.emplace<Nonlinearity<float>>("out", NonlinearityKind::kTanh);

  S& d = *pair.critic;
  ConvOptions down = up;
  down.spectral_normalisation = o.spectral_normalisation;
  c = o.channels + o.classes;
  int64_t size = o.image_size;
  for (int i = 1; i <= doublings; ++i) {
    const int64_t next = o.width << (i - 1);
    ConvOptions layer = down;
    layer.bias = i == 1 || o.spectral_normalisation;  // no bias before batch normalisation
    d.emplace<Convolution<float>>(numbered("down", i), c, next, layer, rng);
    if (i > 1 && !o.spectral_normalisation)
      d.emplace<BatchNormalisation<float>>(numbered("norm", i), next);
    d.emplace<Nonlinearity<float>>(numbered("act", i), NonlinearityKind::kLeakyRelu, 0.2);
    c = next;
    size /= 2;
  }
  d.emplace<PerSampleReshape<float>>("flat", Shape{c * size * size});
  DenseOptions score;
  score.spectral_normalisation = o.spectral_normalisation;
  d.emplace<Dense<float>>("score", c * size * size, 1, score, rng);
  return pair;
}

}  // namespace spar
