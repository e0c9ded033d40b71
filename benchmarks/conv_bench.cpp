// Convolution benchmarks: convolution, its input gradient (transposed_convolution) and its weight
// gradient at the shapes of a DCGAN discriminator and generator (batch 64, 4 × 4 kernels,
// stride 2, padding 1), against a raw Eigen GEMM of the same FLOPs, plus the speed-up from
// one thread to two.
//
// FLOPs: each of the three operations does 2·N·O·C·KH·KW·OH·OW, where [N, C, H, W] →
// [N, O, OH, OW] is the convolution view (for a generator layer the transposed convolution's
// output is the convolution's input). The ceiling is one float product
// [O × C·KH·KW]·[C·KH·KW × N·OH·OW] — what the convolution lowers to — with Eigen's own
// threading over all threads, timed in alternation with ours (paired_seconds_per_call).
#include <Eigen/Core>
#include <functional>
#include <string>

#include "benchmarks/bench.h"
#include "engine/kernels.h"
#include "engine/parallel.h"
#include "engine/random.h"

namespace spar {
namespace bench {
namespace {

// One layer in the convolution view: input [n, c, h, h] → output [n, o, h/2, h/2].
struct ConvLayer {
  int64_t n, c, o, h;
  bool generator;  // forward is transposed_convolution (o channels at h/2 → c channels at h)
};

constexpr int64_t kKernel = 4;

std::string layer_size(const ConvLayer& l) {
  const std::string side = std::to_string(l.h / 2), big = std::to_string(l.h);
  if (l.generator)
    return "N" + std::to_string(l.n) + " " + std::to_string(l.o) + "→" + std::to_string(l.c) + " " +
           side + "²→" + big + "²";
  return "N" + std::to_string(l.n) + " " + std::to_string(l.c) + "→" + std::to_string(l.o) + " " +
         big + "²→" + side + "²";
}

void conv_layer(const BenchOptions& opt, const ConvLayer& l, std::vector<BenchRow>& rows) {
  const double min_seconds = opt.quick ? 0.005 : 0.06;
  ConvGeometry g;
  g.stride_rows = g.stride_cols = 2;
  g.pad_rows = g.pad_cols = 1;
  const int64_t oh = conv_output_extent(l.h, kKernel, 2, 1, "conv bench");
  Rng rng(7, 7);
  // The convolution view: x [n, c, h, h], w [o, c, 4, 4], y [n, o, oh, oh].
  const Tensor<float> x = rng.uniform<float>({l.n, l.c, l.h, l.h}, -1, 1);
  const Tensor<float> w = rng.uniform<float>({l.o, l.c, kKernel, kKernel}, -0.1f, 0.1f);
  const Tensor<float> y = rng.uniform<float>({l.n, l.o, oh, oh}, -1, 1);
  const double flops = 2.0 * l.n * l.o * l.c * kKernel * kKernel * oh * oh;

  // The three operations as a layer runs them: forward, then the gradients with respect to
  // its input and its weight, given the adjoint of its output.
  Tensor<float> sink;
  std::function<void()> forward, input_gradient, weight_gradient;
  if (!l.generator) {
    forward = [&] { sink = kernels::convolution(x, w, g); };
    input_gradient = [&] { sink = kernels::transposed_convolution(y, w, g, l.h, l.h); };
    weight_gradient = [&] {
      sink = kernels::convolution_weight_gradient(x, y, g, kKernel, kKernel);
    };
  } else {  // z = y is the layer's input, x its output adjoint
    forward = [&] { sink = kernels::transposed_convolution(y, w, g, l.h, l.h); };
    input_gradient = [&] { sink = kernels::convolution(x, w, g); };
    weight_gradient = [&] {
      sink = kernels::convolution_weight_gradient(x, y, g, kKernel, kKernel);
    };
  }
  auto all_three = [&] {
    forward();
    input_gradient();
    weight_gradient();
  };

  using M = Eigen::Matrix<float, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor>;
  const int64_t ckk = l.c * kKernel * kKernel, cols = l.n * oh * oh;
  const M a = M::Random(l.o, ckk), b = M::Random(ckk, cols);
  M product(l.o, cols);
  auto gemm = [&](int times) {
    Eigen::setNbThreads(thread_count());  // Eigen's own threading: its best on these cores
    for (int i = 0; i < times; ++i) product.noalias() = a * b;
    Eigen::setNbThreads(1);  // spar runs Eigen single-threaded inside its own groups
  };

  const std::string size = layer_size(l);
  const std::string kind = l.generator ? "transposed conv layer " : "conv layer ";
  struct Part {
    const char* name;
    std::function<void()>* call;
  };
  const Part parts[] = {
      {l.generator ? "forward (transposed_convolution)" : "forward (convolution)", &forward},
      {l.generator ? "input gradient (convolution)" : "input gradient (transposed_convolution)",
       &input_gradient},
      {"weight gradient", &weight_gradient},
  };
  for (const Part& p : parts) {
    const auto [ours, raw] = paired_seconds_per_call(
        *p.call, [&] { gemm(1); }, min_seconds);
    rows.push_back(
        {kind + p.name, size, "GFLOP/s", flops / ours / 1e9, flops / raw / 1e9, 0, true});
  }
  const auto [ours, raw] = paired_seconds_per_call(
      all_three, [&] { gemm(3); }, min_seconds);
  rows.push_back({kind + "forward + both gradients", size, "GFLOP/s", 3 * flops / ours / 1e9,
                  3 * flops / raw / 1e9, 0.7, true});

  // Speed-up of the three from one thread to two (results are bit-identical, parallel.h),
  // timed in alternation so that both see the same conditions on a shared host.
  const int previous = thread_count();
  const auto [one, two] = paired_seconds_per_call(
      [&] {
        set_thread_count(1);
        all_three();
      },
      [&] {
        set_thread_count(2);
        all_three();
      },
      min_seconds);
  set_thread_count(previous);
  rows.push_back({kind + "1→2 thread speed-up (all three)", size, "×", one / two, 0, 1.7, true});
}

void conv(const BenchOptions& o, std::vector<BenchRow>& rows) {
  // Discriminator: c → o channels, h × h → h/2 × h/2. Generator: o → c channels,
  // h/2 × h/2 → h × h (the transposed convolution of the same view). A generator layer runs
  // the same three kernels on the same shapes as the discriminator layer with the same view,
  // only in another role, so its rows also repeat that measurement.
  const std::vector<ConvLayer> layers =
      o.quick ? std::vector<ConvLayer>{{4, 3, 8, 8, false}, {4, 3, 8, 8, true}}
              : std::vector<ConvLayer>{
                    {64, 3, 64, 32, false},  {64, 64, 128, 16, false}, {64, 128, 256, 8, false},
                    {64, 128, 256, 8, true}, {64, 64, 128, 16, true},  {64, 3, 64, 32, true},
                };
  for (const ConvLayer& l : layers) conv_layer(o, l, rows);
}

}  // namespace

void register_conv_benchmarks(std::vector<std::pair<std::string, Benchmark>>& list) {
  list.emplace_back("conv", conv);
}

}  // namespace bench
}  // namespace spar
