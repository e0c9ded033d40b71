// 2-D convolutions (engine/conv_geometry.h, engine/kernels.h): output sizes against the
// relations of Dumoulin & Visin (2016), "A guide to convolution arithmetic for deep learning";
// the adjoint identity that ties convolution, transposed_convolution and
// convolution_weight_gradient together (a fact of linear algebra); shape errors that name the
// operation and the shapes; and bit-identical results with 1 and 2 threads. Values and gradients
// against scipy live in tests/reference/check_conv.py.
#include <catch2/catch.hpp>
#include <cmath>
#include <functional>
#include <string>

#include "engine/conv_geometry.h"
#include "engine/error.h"
#include "engine/kernels.h"
#include "engine/parallel.h"
#include "engine/random.h"
#include "tests/support.h"

using namespace spar;

namespace {

// o = ⌊(i + 2p − k)/s⌋ + 1, Dumoulin & Visin 2016, relation 6, evaluated in floating point
// (exact for these small integers) rather than with the engine's integer division.
int64_t relation_conv(int64_t i, int64_t k, int64_t s, int64_t p) {
  return static_cast<int64_t>(std::floor(static_cast<double>(i + 2 * p - k) / s)) + 1;
}
// o' = s(i' − 1) + a + k − 2p, Dumoulin & Visin 2016 (transposed convolution, output padding a).
int64_t relation_transposed(int64_t i, int64_t k, int64_t s, int64_t p, int64_t a) {
  return s * (i - 1) + a + k - 2 * p;
}

ConvGeometry geometry(int64_t sh, int64_t sw, int64_t ph, int64_t pw) {
  ConvGeometry g;
  g.stride_rows = sh;
  g.stride_cols = sw;
  g.pad_rows = ph;
  g.pad_cols = pw;
  return g;
}

bool raises_bad_shape(const std::function<void()>& fn) {
  return testing::error_kind_of(fn) == ErrorKind::kBadShape;
}

}  // namespace

TEST_CASE("conv output extent follows relation 6 of Dumoulin and Visin", "[conv][shape]") {
  // Worked examples of the guide (Dumoulin & Visin 2016; values from memory, each also
  // satisfying relation 6): {i, k, s, p, o}.
  const int64_t examples[][5] = {
      {4, 3, 1, 0, 2},  // no padding, unit strides
      {5, 4, 1, 2, 6},  // arbitrary padding
      {5, 3, 1, 1, 5},  // half padding: o = i
      {5, 3, 1, 2, 7},  // full padding: o = i + k − 1
      {5, 3, 2, 0, 2},  // no padding, stride 2
      {5, 3, 2, 1, 3},  // padding and stride 2
      {6, 3, 2, 1, 3},  // the same, where the stride does not divide i + 2p − k
  };
  for (const auto& e : examples) {
    INFO("i " << e[0] << " k " << e[1] << " s " << e[2] << " p " << e[3]);
    CHECK(relation_conv(e[0], e[1], e[2], e[3]) == e[4]);
    CHECK(conv_output_extent(e[0], e[1], e[2], e[3], "test") == e[4]);
  }

  // A sweep, along the height and (separately) the width axis, comparing the relation with
  // conv_output_extent and with the shape kernels::convolution actually produces.
  for (int64_t i = 1; i <= 12; ++i)
    for (int64_t k = 1; k <= 6; ++k)
      for (int64_t s = 1; s <= 4; ++s)
        for (int64_t p = 0; p <= 3; ++p) {
          INFO("i " << i << " k " << k << " s " << s << " p " << p);
          const auto x_h = Tensor<float>::zeros({1, 2, i, 3});
          const auto w_h = Tensor<float>::zeros({3, 2, k, 1});
          const auto x_w = Tensor<float>::zeros({1, 2, 3, i});
          const auto w_w = Tensor<float>::zeros({3, 2, 1, k});
          if (i + 2 * p < k) {  // the kernel does not fit the padded input
            CHECK(raises_bad_shape([&] { conv_output_extent(i, k, s, p, "test"); }));
            CHECK(raises_bad_shape([&] { kernels::convolution(x_h, w_h, geometry(s, 1, p, 0)); }));
            CHECK(raises_bad_shape([&] { kernels::convolution(x_w, w_w, geometry(1, s, 0, p)); }));
            continue;
          }
          const int64_t o = relation_conv(i, k, s, p);
          CHECK(conv_output_extent(i, k, s, p, "test") == o);
          CHECK(kernels::convolution(x_h, w_h, geometry(s, 1, p, 0)).shape() == Shape{1, 3, o, 3});
          CHECK(kernels::convolution(x_w, w_w, geometry(1, s, 0, p)).shape() == Shape{1, 3, 3, o});
        }
}

TEST_CASE("transposed conv output extent follows the relation of Dumoulin and Visin",
          "[conv][shape]") {
  // Transposes of the worked examples above (Dumoulin & Visin 2016; values from memory, each
  // also satisfying the relation): {i', k, s, p, a, o'}.
  const int64_t examples[][6] = {
      {2, 3, 1, 0, 0, 4},  // of i = 4, k = 3: a full-padding convolution of the 2 × 2 output
      {6, 4, 1, 2, 0, 5},  // of arbitrary padding
      {5, 3, 1, 1, 0, 5},  // of half padding
      {7, 3, 1, 2, 0, 5},  // of full padding
      {2, 3, 2, 0, 0, 5},  // of i = 5, k = 3, s = 2
      {3, 3, 2, 1, 0, 5},  // of i = 5, k = 3, s = 2, p = 1
      {3, 3, 2, 1, 1, 6},  // of i = 6: the output padding a = 1 recovers the lost row
  };
  for (const auto& e : examples) {
    INFO("i' " << e[0] << " k " << e[1] << " s " << e[2] << " p " << e[3] << " a " << e[4]);
    CHECK(relation_transposed(e[0], e[1], e[2], e[3], e[4]) == e[5]);
    CHECK(conv_transpose_output_extent(e[0], e[1], e[2], e[3], e[4], "test") == e[5]);
  }

  for (int64_t i = 1; i <= 8; ++i)
    for (int64_t k = 1; k <= 6; ++k)
      for (int64_t s = 1; s <= 4; ++s)
        for (int64_t p = 0; p <= 3; ++p)
          for (int64_t a = 0; a < s; ++a) {
            INFO("i' " << i << " k " << k << " s " << s << " p " << p << " a " << a);
            const int64_t o = relation_transposed(i, k, s, p, a);
            if (o < 1) {
              CHECK(raises_bad_shape([&] { conv_transpose_output_extent(i, k, s, p, a, "t"); }));
              continue;
            }
            CHECK(conv_transpose_output_extent(i, k, s, p, a, "test") == o);
            // The two relations are inverse: a convolution of an o'-input gives back i'.
            CHECK(conv_output_extent(o, k, s, p, "test") == i);
            // Along the height axis, and along the width axis, through the kernels.
            const auto w_h = Tensor<float>::zeros({2, 3, k, 1});
            const auto w_w = Tensor<float>::zeros({2, 3, 1, k});
            const ConvGeometry g_h = geometry(s, 1, p, 0), g_w = geometry(1, s, 0, p);
            const auto y_h =
                kernels::transposed_convolution(Tensor<float>::zeros({1, 2, i, 2}), w_h, g_h, o, 2);
            const auto y_w =
                kernels::transposed_convolution(Tensor<float>::zeros({1, 2, 2, i}), w_w, g_w, 2, o);
            CHECK(y_h.shape() == Shape{1, 3, o, 2});
            CHECK(y_w.shape() == Shape{1, 3, 2, o});
            CHECK(kernels::convolution(y_h, w_h, g_h).shape() == Shape{1, 2, i, 2});
            CHECK(kernels::convolution(y_w, w_w, g_w).shape() == Shape{1, 2, 2, i});
            // An output padding of s or more (o' + s − a) is not a transposed output of i'.
            CHECK(raises_bad_shape([&] {
              kernels::transposed_convolution(Tensor<float>::zeros({1, 2, i, 2}), w_h, g_h,
                                              o + s - a, 2);
            }));
          }
}

namespace {

// Σ a·b over all elements, left to right in double.
double inner(const Tensor<double>& a, const Tensor<double>& b) {
  REQUIRE(a.shape() == b.shape());
  double sum = 0;
  for (int64_t k = 0; k < a.element_count(); ++k) sum += a.data()[k] * b.data()[k];
  return sum;
}

Tensor<double> absolute(const Tensor<double>& a) {
  return kernels::unary(kernels::Unary::kAbs, a);
}

// γ_K = K·u / (1 − K·u) (Higham, Accuracy and Stability of Numerical Algorithms, 2nd ed.,
// section 3.1; from memory).
double summation_gamma(double k) {
  const double u = std::ldexp(1.0, -53);
  return k * u / (1 - k * u);
}

struct AdjointCase {
  Shape x, w;
  ConvGeometry g;
};

}  // namespace

TEST_CASE("convolution and transposed_convolution and convolution_weight_gradient are adjoint",
          "[conv][adjoint]") {
  // For the bilinear map y = conv(x, w): ⟨convolution(x, w), z⟩ = ⟨x, transposed_convolution(z, w)⟩
  // = ⟨w, convolution_weight_gradient(x, z)⟩, all three being Σ x·w·z over the same index triples
  // (linear algebra: the definition of the adjoint). Each side is computed as inner sums then
  // an outer sum, so each is within γ_K·Σ|x||w||z| of the exact value, K the total number of
  // terms added on its path (Higham, the dot-product bound); two sides differ by at most
  // twice that. Σ|x||w||z| is the first side on absolute values, a sum of non-negative terms
  // within a factor 1/(1 − γ_K) of exact.
  const std::vector<AdjointCase> cases = {
      {{2, 3, 8, 8}, {4, 3, 4, 4}, geometry(2, 2, 1, 1)},
      {{5, 7, 9, 11}, {3, 7, 3, 5}, geometry(3, 2, 2, 1)},
      {{1, 1, 7, 5}, {1, 1, 3, 2}, geometry(1, 1, 0, 0)},
      {{5, 1, 7, 8}, {7, 1, 1, 1}, geometry(3, 3, 2, 2)},
      {{1, 2, 3, 2}, {3, 2, 7, 6}, geometry(1, 1, 2, 2)},
      {{10, 4, 13, 6}, {6, 4, 5, 2}, geometry(3, 1, 2, 0)},  // uneven sample groups
      {{3, 6, 6, 6}, {5, 6, 3, 3}, geometry(1, 1, 1, 1)},
      {{6, 2, 34, 20}, {3, 2, 3, 3}, geometry(1, 1, 1, 1)},  // 680 positions: per-sample GEMMs
  };
  Rng rng(2016, 7);
  for (const AdjointCase& c : cases) {
    const Tensor<double> x = rng.uniform<double>(c.x, -1, 1), w = rng.uniform<double>(c.w, -1, 1);
    const int64_t n = c.x[0], ch = c.x[1], h = c.x[2], wd = c.x[3];
    const int64_t o = c.w[0], kh = c.w[2], kw = c.w[3];
    const int64_t oh = conv_output_extent(h, kh, c.g.stride_rows, c.g.pad_rows, "test");
    const int64_t ow = conv_output_extent(wd, kw, c.g.stride_cols, c.g.pad_cols, "test");
    const Tensor<double> z = rng.uniform<double>({n, o, oh, ow}, -1, 1);

    const double forward = inner(kernels::convolution(x, w, c.g), z);
    const double transposed = inner(x, kernels::transposed_convolution(z, w, c.g, h, wd));
    const double weight = inner(w, kernels::convolution_weight_gradient(x, z, c.g, kh, kw));
    const double magnitude =
        inner(kernels::convolution(absolute(x), absolute(w), c.g), absolute(z));
    const double k = static_cast<double>(ch * kh * kw + n * o * oh * ow + o * kh * kw +
                                         n * ch * h * wd + n * oh * ow + o * ch * kh * kw);
    const double tol = 2 * summation_gamma(k) * magnitude / (1 - summation_gamma(k));
    INFO("x " << c.x.str() << " w " << c.w.str() << " forward " << forward << " magnitude "
              << magnitude << " tolerance " << tol);
    CHECK(std::abs(forward - transposed) <= tol);
    CHECK(std::abs(forward - weight) <= tol);
    CHECK(std::abs(transposed - weight) <= tol);
    // The identity is not met trivially: the inner product is far from zero relative to tol.
    CHECK(std::abs(forward) > 1e6 * tol);
  }
}

namespace {

// The message of the kBadShape error `fn` raises (the test fails on any other outcome).
std::string bad_shape_message(const std::function<void()>& fn) {
  std::string message;
  CHECK(testing::error_kind_of(fn, &message) == ErrorKind::kBadShape);
  return message;
}

}  // namespace

TEST_CASE("convolution shape errors name the operation and the shapes", "[conv][shape]") {
  using F = Tensor<float>;
  const ConvGeometry s1 = geometry(1, 1, 0, 0), s2 = geometry(2, 2, 0, 0);

  // Mismatched channels: the input has 3, the weight expects 2.
  std::string m = bad_shape_message([&] {
    kernels::convolution(F::zeros({2, 3, 5, 5}), F::zeros({4, 2, 3, 3}), s1);
  });
  CHECK_THAT(m, Catch::Contains("convolution") && Catch::Contains("[2, 3, 5, 5]") &&
                    Catch::Contains("[4, 2, 3, 3]"));
  m = bad_shape_message([&] {
    kernels::transposed_convolution(F::zeros({2, 4, 3, 3}), F::zeros({5, 2, 3, 3}), s1, 5, 5);
  });
  CHECK_THAT(m, Catch::Contains("transposed_convolution") && Catch::Contains("[2, 4, 3, 3]") &&
                    Catch::Contains("[5, 2, 3, 3]"));
  m = bad_shape_message([&] {
    kernels::convolution_weight_gradient(F::zeros({2, 3, 5, 5}), F::zeros({2, 4, 3, 4}), s1, 3, 3);
  });
  CHECK_THAT(m, Catch::Contains("convolution_weight_gradient") && Catch::Contains("[2, 3, 5, 5]") &&
                    Catch::Contains("[2, 4, 3, 4]"));

  // A kernel that does not fit: 6 rows over 3 input rows with no padding.
  m = bad_shape_message([&] {
    kernels::convolution(F::zeros({1, 2, 3, 4}), F::zeros({1, 2, 6, 2}), s1);
  });
  CHECK_THAT(m, Catch::Contains("convolution") && Catch::Contains("[1, 2, 3, 4]") &&
                    Catch::Contains("[1, 2, 6, 2]"));
  // The same kernel fits once padded: 3 + 2·2 ≥ 6.
  CHECK(kernels::convolution(F::zeros({1, 2, 3, 4}), F::zeros({1, 2, 6, 2}), geometry(1, 1, 2, 0))
            .shape() == Shape{1, 1, 2, 3});

  // Bad output padding: with stride 2 a 3 × 3 input has transposed outputs 7 or 8 rows
  // (a = 0 or 1, k = 3, p = 0); 9 would need a = 2.
  CHECK_THAT(bad_shape_message([&] { conv_transpose_output_extent(3, 3, 2, 0, 2, "layer"); }),
             Catch::Contains("layer") && Catch::Contains("output padding 2"));
  CHECK_THAT(bad_shape_message([&] { conv_transpose_output_extent(3, 3, 2, 0, -1, "layer"); }),
             Catch::Contains("layer") && Catch::Contains("output padding -1"));
  m = bad_shape_message([&] {
    kernels::transposed_convolution(F::zeros({1, 2, 3, 3}), F::zeros({2, 1, 3, 3}), s2, 9, 7);
  });
  CHECK_THAT(m, Catch::Contains("transposed_convolution") && Catch::Contains("[1, 2, 3, 3]") &&
                    Catch::Contains("9") && Catch::Contains("7"));
  CHECK(kernels::transposed_convolution(F::zeros({1, 2, 3, 3}), F::zeros({2, 1, 3, 3}), s2, 8, 7)
            .shape() == Shape{1, 1, 8, 7});

  // Not rank 4.
  m = bad_shape_message([&] {
    kernels::convolution(F::zeros({3, 5, 5}), F::zeros({4, 3, 3, 3}), s1);
  });
  CHECK_THAT(m, Catch::Contains("convolution") && Catch::Contains("[3, 5, 5]"));
  // Stride 0 and negative padding.
  CHECK(raises_bad_shape([&] {
    kernels::convolution(F::zeros({1, 1, 5, 5}), F::zeros({1, 1, 3, 3}), geometry(0, 1, 0, 0));
  }));
  CHECK(raises_bad_shape([&] {
    kernels::convolution(F::zeros({1, 1, 5, 5}), F::zeros({1, 1, 3, 3}), geometry(1, 1, 0, -1));
  }));
}

namespace {

// Runs `compute` with one thread and with two and compares the bits.
void check_thread_independent(const std::string& what,
                              const std::function<Tensor<float>()>& compute) {
  const int previous = thread_count();
  set_thread_count(1);
  const Tensor<float> one = compute();
  set_thread_count(2);
  const Tensor<float> two = compute();
  set_thread_count(previous);
  INFO(what);
  CHECK(testing::same_bits(one, two));
}

}  // namespace

TEST_CASE("convolutions are bit-identical with 1 and 2 threads at batch 64", "[conv][parallel]") {
  // DCGAN discriminator shapes: 4 × 4 kernels, stride 2, padding 1; C → O at H × H.
  const int64_t shapes[][3] = {{3, 64, 32}, {64, 128, 16}, {128, 256, 8}};
  const ConvGeometry g = geometry(2, 2, 1, 1);
  Rng rng(64, 3);
  for (const auto& sh : shapes) {
    const int64_t c = sh[0], o = sh[1], h = sh[2], oh = h / 2;
    const Tensor<float> x = rng.uniform<float>({64, c, h, h}, -1, 1);
    const Tensor<float> w = rng.uniform<float>({o, c, 4, 4}, -1, 1);
    const Tensor<float> z = rng.uniform<float>({64, o, oh, oh}, -1, 1);
    const std::string tag = std::to_string(c) + "→" + std::to_string(o) + " at " +
                            std::to_string(h) + "×" + std::to_string(h);
    check_thread_independent("convolution " + tag, [&] { return kernels::convolution(x, w, g); });
    check_thread_independent("transposed_convolution " + tag,
                             [&] { return kernels::transposed_convolution(z, w, g, h, h); });
    check_thread_independent("convolution_weight_gradient " + tag,
                             [&] { return kernels::convolution_weight_gradient(x, z, g, 4, 4); });
  }
}
