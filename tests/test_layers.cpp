// Layers: every layer's gradients (first and second order, float64), parameter naming,
// saving and loading through an archive, and the initialisers' distributions against the
// formulas of their papers.
#include <catch2/catch.hpp>
#include <cmath>

#include "layers/activation.h"
#include "layers/convolution.h"
#include "layers/dense.h"
#include "layers/gradient_cases.h"
#include "layers/init.h"
#include "layers/layer_stack.h"
#include "layers/normalisation.h"
#include "tests/support.h"

using namespace spar;

TEST_CASE("every layer's gradients match central differences, first and second order",
          "[layers][gradient]") {
  for (const GradientCase& c : layer_gradient_cases()) {
    const GradientCheckResult first = check_first_order(c), second = check_second_order(c);
    INFO(c.name << ": first " << first.max_rel_error << ", second " << second.max_rel_error);
    CHECK(first.max_rel_error <= 1e-6);
    CHECK(second.max_rel_error <= 1e-4);
  }
}

namespace {
LayerStack<float> small_critic(Rng& rng) {
  LayerStack<float> net;
  ConvOptions conv;
  conv.kernel_rows = conv.kernel_cols = 4;
  conv.geometry = {2, 2, 1, 1};
  auto& block = net.emplace<LayerStack<float>>("block1");
  block.emplace<Convolution<float>>("conv", 3, 8, conv, rng);
  block.emplace<BatchNormalisation<float>>("norm", 8);
  block.emplace<Nonlinearity<float>>("act", NonlinearityKind::kLeakyRelu, 0.2);
  net.emplace<PerSampleReshape<float>>("flat", Shape{8 * 4 * 4});
  net.emplace<Dense<float>>("out", 128, 1, DenseOptions{}, rng);
  return net;
}
}  // namespace

TEST_CASE("parameters and state tensors carry stable hierarchical names", "[layers]") {
  Rng rng(1, 1);
  LayerStack<float> net = small_critic(rng);
  std::vector<std::string> names;
  for (const auto& p : net.all_parameters("critic")) names.push_back(p.name);
  CHECK(names == std::vector<std::string>{"critic/block1/conv/filters", "critic/block1/conv/offset",
                                          "critic/block1/norm/scale", "critic/block1/norm/shift",
                                          "critic/out/matrix", "critic/out/offset"});
  std::vector<std::string> state;
  for (const auto& b : net.all_state("critic")) state.push_back(b.name);
  CHECK(state == std::vector<std::string>{"critic/block1/norm/population_mean",
                                          "critic/block1/norm/population_variance"});
  CHECK_THROWS_AS(net.emplace<Nonlinearity<float>>("out", NonlinearityKind::kTanh), Error);
}

TEST_CASE("format-1 names map to today's names", "[layers]") {
  Rng rng(1, 1);
  LayerStack<float> net = small_critic(rng);
  std::vector<NamedTensor<float>> all = net.all_parameters("critic");
  for (const NamedTensor<float>& s : net.all_state("critic")) all.push_back(s);
  // The names run format 1 gave these tensors, in the same order (docs/file-formats.md).
  const std::vector<std::string> old = {"critic.block1.conv.weight",
                                        "critic.block1.conv.bias",
                                        "critic.block1.norm.scale",
                                        "critic.block1.norm.shift",
                                        "critic.out.weight",
                                        "critic.out.bias",
                                        "critic.block1.norm.running_mean",
                                        "critic.block1.norm.running_variance"};
  REQUIRE(all.size() == old.size());
  for (size_t i = 0; i < old.size(); ++i)
    CHECK(name_in_format_1(old[i], all[i].tensor->shape()) == all[i].name);
  CHECK(name_in_format_1("critic.down1.spectral_u", Shape{4, 1}) == "critic/down1/singular_left");
  CHECK(name_in_format_1("critic.down1.spectral_v", Shape{9, 1}) == "critic/down1/singular_right");
  CHECK(name_in_format_1("sample.dim0", Shape{}) == "sample.dim0");  // not a model tensor
  CHECK(name_in_format_1("step", Shape{}) == "step");
  CHECK(name_in_format_1("critic/out/matrix", Shape{4, 1}) == "critic/out/matrix");
}

TEST_CASE("a model saved to an archive loads back exactly and refuses another architecture",
          "[layers]") {
  Rng rng(2, 1);
  LayerStack<float> a = small_critic(rng), b = small_critic(rng);  // different weights
  Tape<float> tape;
  Context<float> train(&tape, true);
  a.run(Var<float>(rng.uniform<float>({4, 3, 8, 8})), train);  // running statistics move
  Archive archive;
  a.save(archive, "critic");
  b.load(Archive::from_bytes(archive.to_bytes(), "memory"), "critic");
  const auto pa = a.all_parameters(), pb = b.all_parameters();
  for (size_t i = 0; i < pa.size(); ++i) CHECK(testing::same_bits(*pa[i].tensor, *pb[i].tensor));
  CHECK(testing::same_bits(*a.all_state()[0].tensor, *b.all_state()[0].tensor));

  LayerStack<float> other;
  other.emplace<Dense<float>>("out", 64, 1, DenseOptions{}, rng);
  std::string message;
  CHECK(testing::error_kind_of([&] { other.load(archive, "critic"); }, &message) ==
        ErrorKind::kCorruptCheckpoint);
  CHECK_THAT(message, Catch::Contains("critic/out/matrix") && Catch::Contains("[128, 1]"));
}

TEST_CASE("initialisers follow their papers' distributions", "[layers][init]") {
  Rng rng(3, 1);
  const int64_t fan_in = 300, fan_out = 200;
  auto moments = [](const Tensor<double>& t) {
    double m = 0, v = 0;
    for (double x : t.to_vector()) m += x;
    m /= t.element_count();
    for (double x : t.to_vector()) v += (x - m) * (x - m);
    return std::make_pair(m, v / t.element_count());
  };
  const int64_t n = 200000;
  // DCGAN (Radford et al. 2015): N(0, 0.02²).
  auto dcgan = moments(initial_weight<double>({n}, fan_in, fan_out, Init::kDcganNormal, rng));
  CHECK(std::abs(dcgan.first) < 5 * 0.02 / std::sqrt(double(n)));
  CHECK(std::sqrt(dcgan.second) == Approx(0.02).epsilon(0.01));
  // Glorot & Bengio 2010, eq. 16: U(−a, a), a = √(6/(fan_in + fan_out)), variance a²/3.
  const Tensor<double> glorot =
      initial_weight<double>({n}, fan_in, fan_out, Init::kGlorotUniform, rng);
  const double a = std::sqrt(6.0 / (fan_in + fan_out));
  double largest = 0;
  for (double x : glorot.to_vector()) largest = std::max(largest, std::abs(x));
  CHECK(largest <= a);
  CHECK(largest > 0.99 * a);  // 200,000 draws reach the edge of the range
  CHECK(moments(glorot).second == Approx(a * a / 3).epsilon(0.01));
  // He et al. 2015: N(0, 2/fan_in).
  CHECK(moments(initial_weight<double>({n}, fan_in, fan_out, Init::kHeNormal, rng)).second ==
        Approx(2.0 / fan_in).epsilon(0.01));
}

TEST_CASE("dropout keeps the expectation and is the identity in evaluation steps", "[layers]") {
  Rng stream(4, 1);
  Dropout<double> drop(0.25);
  const Var<double> x(Tensor<double>::full({100000}, 1.0));
  Context<double> train(nullptr, true, &stream), eval(nullptr, false);
  const Tensor<double> y = drop.run(x, train).value();
  int64_t zeros = 0;
  double total = 0;
  for (double v : y.to_vector()) {
    zeros += v == 0;
    total += v;
  }
  // Binomial(1e5, 0.25): standard deviation ≈ 137 (a fact of the trade).
  CHECK(std::abs(zeros - 25000) < 5 * 137);
  CHECK(total / 1e5 == Approx(1.0).epsilon(0.01));
  CHECK(testing::same_bits(drop.run(x, eval).value(), x.value()));
  Context<double> no_stream(nullptr, true);
  CHECK_THROWS_WITH(drop.run(x, no_stream), Catch::Contains("dropout"));
}

TEST_CASE("a statistics pass replaces batch normalisation's running statistics", "[layers]") {
  // Ioffe & Szegedy 2015, Algorithms 1 and 2: the batch mean, and the unbiased variance
  // m/(m − 1)·σ²_B kept for inference. Two channels of a [3, 2] batch, by hand.
  BatchNormalisation<double> norm(2);
  const Var<double> x(Tensor<double>::from_values({3, 2}, {1, 10, 2, 20, 6, 30}));
  std::vector<NamedTensor<double>> state;
  norm.collect_state("", state);
  REQUIRE(state.size() == 2);
  Context<double> train(nullptr, true);
  norm.run(x, train);  // a training step moves the statistics by 0.1 of the way only
  CHECK((*state[0].tensor).to_vector()[0] == Approx(0.1 * 3));
  Context<double> pass(nullptr, false);
  pass.set_statistics_pass(true);
  const Tensor<double> y = norm.run(x, pass).value();
  CHECK((*state[0].tensor).to_vector() == std::vector<double>{3, 20});
  // Channel 0: values 1, 2, 6, mean 3, squared deviations 4 + 1 + 9 = 14, unbiased 14/2.
  CHECK((*state[1].tensor).to_vector()[0] == Approx(7));
  CHECK((*state[1].tensor).to_vector()[1] == Approx(100));  // 100 + 0 + 100 over 2
  // The pass normalises with the batch's own statistics: (1 − 3)/√(14/3 + ε).
  CHECK(y.to_vector()[0] == Approx(-2 / std::sqrt(14.0 / 3 + 1e-5)));
  // Evaluation afterwards uses exactly those statistics.
  Context<double> eval(nullptr, false);
  CHECK(norm.run(x, eval).value().to_vector()[0] == Approx(-2 / std::sqrt(7 + 1e-5)));
}

TEST_CASE("layer shape errors name the layer and the shapes", "[layers]") {
  Rng rng(5, 1);
  Dense<float> dense(3, 4, DenseOptions{}, rng);
  Context<float> ctx(nullptr, false);
  CHECK_THROWS_WITH(dense.run(Var<float>(Tensor<float>::zeros({2, 5})), ctx),
                    Catch::Contains("dense 3→4") && Catch::Contains("[2, 5]"));
  Convolution<float> conv(3, 8, ConvOptions{}, rng);
  CHECK_THROWS_WITH(conv.run(Var<float>(Tensor<float>::zeros({1, 2, 5, 5})), ctx),
                    Catch::Contains("convolution 3→8") && Catch::Contains("[1, 2, 5, 5]"));
  AveragePooling<float> pool(2);
  CHECK_THROWS_WITH(pool.run(Var<float>(Tensor<float>::zeros({1, 1, 5, 4})), ctx),
                    Catch::Contains("multiples of 2"));
}
