// Each case feeds the input and every parameter of a layer as variables, so both the input
// gradient and the parameter gradients are checked. Layers that draw random numbers get a
// fresh stream with the same seed at each evaluation, so the function being differentiated
// is fixed.
#include "layers/gradient_cases.h"

#include <memory>

#include "layers/activation.h"
#include "layers/convolution.h"
#include "layers/dense.h"
#include "layers/layer_stack.h"
#include "layers/normalisation.h"

namespace spar {
namespace {

using V = Var<double>;
using D = Tensor<double>;

class LayerCases {
 public:
  // Checks `layer` on input x in training or evaluation steps.
  void check(const std::string& name, std::shared_ptr<Layer<double>> layer, const D& x,
             bool training) {
    // Evaluation steps use state that training steps build (running statistics, the power
    // iteration's vectors); build it first, as training would.
    if (!training) {
      NoRecordScope no_record;
      Context<double> warm_up(nullptr, true);
      for (int i = 0; i < 30; ++i) layer->run(V(x), warm_up);
    }
    std::vector<NamedTensor<double>> params;
    layer->collect_parameters("", params);
    std::vector<D> inputs{x};
    for (const NamedTensor<double>& p : params) inputs.push_back(*p.tensor);
    auto op = [layer, params, training](const std::vector<V>& v) {
      Rng stream(99, 1);  // same draws at every evaluation
      Context<double> ctx(nullptr, training, &stream);
      for (size_t i = 0; i < params.size(); ++i) ctx.bind(*params[i].tensor, v[i + 1]);
      return layer->run(v[0], ctx);
    };
    cases_.push_back(folded_case(name + (training ? " (training)" : " (evaluation)"), op,
                                 std::move(inputs), rng_));
  }
  D any(const Shape& s) { return rng_.uniform<double>(s, -2, 2); }
  Rng& rng() { return rng_; }
  std::vector<GradientCase> take() { return std::move(cases_); }

 private:
  Rng rng_{20240612, 1};
  std::vector<GradientCase> cases_;
};

template <class L, class... Args>
std::shared_ptr<Layer<double>> make(Args&&... args) {
  return std::make_shared<L>(std::forward<Args>(args)...);
}

}  // namespace

std::vector<GradientCase> layer_gradient_cases() {
  LayerCases c;
  Rng& r = c.rng();
  DenseOptions dense;
  dense.init = Init::kGlorotUniform;
  c.check("dense 3→4", make<Dense<double>>(3, 4, dense, r), c.any({5, 3}), true);
  DenseOptions dense_sn = dense;
  dense_sn.spectral_normalisation = true;
  c.check("dense 3→4, spectral normalisation", make<Dense<double>>(3, 4, dense_sn, r),
          c.any({5, 3}), false);

  ConvOptions conv;
  conv.init = Init::kGlorotUniform;
  conv.geometry = {1, 1, 1, 1};
  c.check("convolution 2→3, 3×3, stride 1, padding 1", make<Convolution<double>>(2, 3, conv, r),
          c.any({2, 2, 5, 4}), true);
  ConvOptions strided = conv;
  strided.kernel_rows = strided.kernel_cols = 4;
  strided.geometry = {2, 2, 1, 1};
  strided.spectral_normalisation = true;
  c.check("convolution 3→2, 4×4, stride 2, spectral normalisation",
          make<Convolution<double>>(3, 2, strided, r), c.any({2, 3, 6, 6}), false);
  strided.spectral_normalisation = false;
  ConvOptions up = conv;
  up.kernel_rows = up.kernel_cols = 4;
  up.geometry = {2, 2, 1, 1};
  c.check("transposed convolution 3→2, 4×4, stride 2",
          make<TransposedConvolution<double>>(3, 2, up, r), c.any({2, 3, 3, 3}), true);
  ConvOptions up_pad = conv;
  up_pad.geometry = {2, 2, 1, 1};
  up_pad.output_pad_rows = up_pad.output_pad_cols = 1;
  up_pad.bias = false;
  c.check("transposed convolution 2→2, 3×3, stride 2, output padding 1",
          make<TransposedConvolution<double>>(2, 2, up_pad, r), c.any({1, 2, 3, 2}), true);
  c.check("average pool 2×2", make<AveragePooling<double>>(2), c.any({2, 2, 4, 6}), true);
  c.check("upsample ×2", make<NearestUpsampling<double>>(2), c.any({1, 2, 2, 3}), true);
  c.check("batch normalisation [N, C]", make<BatchNormalisation<double>>(3), c.any({6, 3}), true);
  c.check("batch normalisation [N, C, H, W]", make<BatchNormalisation<double>>(2),
          c.any({3, 2, 2, 3}), true);
  c.check("batch normalisation [N, C, H, W]", make<BatchNormalisation<double>>(2),
          c.any({3, 2, 2, 3}), false);
  c.check("dropout 0.3", make<Dropout<double>>(0.3), c.any({4, 5}), true);
  c.check("embedding 4 classes → 3", make<ClassEmbedding<double>>(4, 3, r),
          one_hot<double>({2, 0, 3}, 4), true);
  c.check("minibatch stddev [N, F]", make<MinibatchStddev<double>>(), c.any({4, 3}), true);
  c.check("minibatch stddev [N, C, H, W]", make<MinibatchStddev<double>>(), c.any({3, 2, 2, 2}),
          true);
  c.check("tanh", make<Nonlinearity<double>>(NonlinearityKind::kTanh), c.any({3, 4}), true);
  c.check("sigmoid", make<Nonlinearity<double>>(NonlinearityKind::kSigmoid), c.any({3, 4}), true);

  // A small discriminator: convolution, batch normalisation, leaky relu, reshape, dense.
  auto net = std::make_shared<LayerStack<double>>();
  net->emplace<Convolution<double>>("conv", 1, 2, strided, r);
  net->emplace<BatchNormalisation<double>>("norm", 2);
  net->emplace<Nonlinearity<double>>("act", NonlinearityKind::kLeakyRelu, 0.2);
  net->emplace<PerSampleReshape<double>>("flat", Shape{2 * 3 * 3});
  net->emplace<Dense<double>>("out", 18, 1, dense, r);
  c.check("layer stack critic", net, c.any({4, 1, 6, 6}), true);
  return c.take();
}

}  // namespace spar
