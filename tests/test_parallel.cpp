// Parallel kernels give bit-identical results with 1 and 2 threads (engine/parallel.h):
// elementwise work, broadcasting, every reduction pattern, the matrix product and batch
// normalisation; and the chunks over several arrays cover each element once.
#include <catch2/catch.hpp>
#include <cmath>
#include <cstring>
#include <functional>

#include "engine/kernels.h"
#include "engine/ops.h"
#include "engine/parallel.h"
#include "engine/random.h"
#include "tests/support.h"

using namespace spar;
using F = Tensor<float>;

namespace {

// Runs `compute` with one thread and with two and compares the bits.
void check_thread_independent(const std::string& what, const std::function<F()>& compute) {
  const int previous = thread_count();
  set_thread_count(1);
  const F one = compute();
  set_thread_count(2);
  const F two = compute();
  set_thread_count(previous);
  INFO(what);
  CHECK(testing::same_bits(one, two));
}

}  // namespace

TEST_CASE("kernels are bit-identical with 1 and 2 threads", "[parallel]") {
  Rng rng(11, 1);
  const F big = rng.uniform<float>({64, 32, 16, 16}, -3, 3);  // 524,288 elements, many chunks
  const F channel = rng.uniform<float>({1, 32, 1, 1}, 0.5, 2);
  const F a = rng.uniform<float>({384, 320}, -1, 1), b = rng.uniform<float>({320, 288}, -1, 1);
  using kernels::Unary;
  check_thread_independent("tanh", [&] { return kernels::unary(Unary::kTanh, big); });
  check_thread_independent("softplus", [&] { return kernels::unary(Unary::kSoftplus, big); });
  check_thread_independent("per-channel divide", [&] {
    return kernels::binary(kernels::Binary::kDivide, big, channel, "divide");
  });
  check_thread_independent("sum to per-channel", [&] {
    return kernels::sum_into_shape(big, {1, 32, 1, 1});
  });
  check_thread_independent("sum to leading", [&] {
    return kernels::sum_into_shape(big, {32, 16, 16});
  });
  check_thread_independent("sum to per-sample", [&] {
    return kernels::sum_into_shape(big, {64, 1, 1, 1});
  });
  check_thread_independent("sum all", [&] { return kernels::sum_into_shape(big, {}); });
  check_thread_independent("max along 1",
                           [&] { return kernels::max_along<float>(big, 1, nullptr); });
  check_thread_independent("log_sum_exp along 3",
                           [&] { return kernels::log_sum_exp_along(big, 3); });
  check_thread_independent("permute", [&] { return kernels::permute(big, {1, 0, 3, 2}); });
  check_thread_independent("matmul", [&] { return kernels::matrix_product(a, b, false, false); });
  check_thread_independent("matmul aᵀ bᵀ",
                           [&] { return kernels::matrix_product(b, a, true, true); });
  // Row panels of 16 rows (a result of 64 rows), and column panels (a result of 16 rows).
  const F wide = rng.uniform<float>({320, 2000}, -1, 1),
          short_rows = rng.uniform<float>({320, 64}, -1, 1),
          narrow = rng.uniform<float>({320, 16}, -1, 1);
  check_thread_independent("matmul, short result",
                           [&] { return kernels::matrix_product(short_rows, wide, true, false); });
  check_thread_independent("matmul, wide result",
                           [&] { return kernels::matrix_product(narrow, wide, true, false); });
  const F gain = rng.uniform<float>({32}, 0.5, 2), offset = rng.uniform<float>({32}, -1, 1);
  const F statistics = kernels::channel_statistics(big);
  check_thread_independent("batch statistics", [&] { return kernels::channel_statistics(big); });
  check_thread_independent("batch normalisation", [&] {
    return kernels::normalise_channels(big, statistics, gain, offset, 1e-5);
  });
  for (int part = 0; part < 3; ++part)
    check_thread_independent("batch normalisation adjoint, part " + std::to_string(part), [&] {
      auto r = kernels::normalise_channels_adjoint(kernels::scale(big, 0.5), big, statistics, gain,
                                                   1e-5);
      return part == 0 ? r.x : part == 1 ? r.scale : r.shift;
    });
  check_thread_independent("normal draws", [] { return Rng(5, 5).normal<float>({1 << 18}); });
  check_thread_independent("a whole backward pass", [&] {
    Tape<float> tape;
    Var<float> x = tape.variable(big);
    Var<float> loss = mean(square(tanh(x * Var<float>(channel))));
    return tape.gradient(loss, {x})[0].value();
  });
}

TEST_CASE("the panelled matrix product agrees with a plain triple loop", "[parallel]") {
  // Reference: the definition C_ij = Σ_k A_ik B_kj, accumulated in double. Shapes: one panel;
  // row panels of at least 128 rows; row panels of 16 rows (a dense layer's [64, 3136]
  // result); column panels (a result of 16 rows); each with every combination of transposed
  // operands.
  Rng rng(12, 1);
  struct Case {
    int64_t m, k, n;
  };
  for (const Case& s :
       {Case{67, 45, 131}, Case{700, 64, 300}, Case{64, 64, 3136}, Case{16, 256, 4000}}) {
    const F a = rng.uniform<float>({s.m, s.k}, -1, 1), b = rng.uniform<float>({s.k, s.n}, -1, 1);
    const F at = kernels::permute(a, {1, 0}), bt = kernels::permute(b, {1, 0});
    for (int flags = 0; flags < 4; ++flags) {
      const bool ta = flags & 1, tb = flags & 2;
      const F c = kernels::matrix_product(ta ? at : a, tb ? bt : b, ta, tb);
      REQUIRE(c.shape() == Shape{s.m, s.n});
      // A float dot product of K terms is within γ_K·Σ|a_ik·b_kj| of the exact value, γ_K =
      // K·u/(1 − K·u), u = 2⁻²⁴ (Higham, Accuracy and Stability of Numerical Algorithms,
      // 2nd ed., section 3.1; from memory), whatever the order of the additions.
      const double u = std::ldexp(1.0, -24), gamma = s.k * u / (1 - s.k * u);
      double worst = 0;  // largest |error| / bound
      for (int64_t i = 0; i < s.m; ++i)
        for (int64_t j = 0; j < s.n; ++j) {
          double sum = 0, magnitude = 0;
          for (int64_t k = 0; k < s.k; ++k) {
            const double term = double(a.at({i, k})) * b.at({k, j});
            sum += term;
            magnitude += std::abs(term);
          }
          worst = std::max(worst, std::abs(sum - c.at({i, j})) / (gamma * magnitude));
        }
      INFO(s.m << "×" << s.k << "·" << s.k << "×" << s.n << (ta ? ", A transposed" : "")
               << (tb ? ", B transposed" : ""));
      CHECK(worst <= 1);
    }
  }
}

TEST_CASE("chunks over several arrays visit every element once, in range", "[parallel]") {
  // Empty arrays first, between and last; arrays shorter and longer than a chunk; a chunk
  // boundary inside an array and one exactly at an array's end.
  const std::vector<int64_t> sizes = {0, 5, 0, 40000, kParallelGrain * 2 - 40005, 0, 70000, 0};
  for (int threads : {1, 2}) {
    const int previous = thread_count();
    set_thread_count(threads);
    std::vector<std::vector<int>> seen;
    for (int64_t n : sizes) seen.emplace_back(static_cast<size_t>(n), 0);
    std::vector<int> bad(1, 0);
    parallel_for_chunks_of(sizes, [&](size_t t, int64_t begin, int64_t end) {
      if (t >= sizes.size() || begin < 0 || end > sizes[t] || begin >= end) {
        bad[0] = 1;  // only ever set to 1, so a race cannot hide it
        return;
      }
      for (int64_t k = begin; k < end; ++k) ++seen[t][static_cast<size_t>(k)];
    });
    set_thread_count(previous);
    INFO(threads << " threads");
    CHECK(bad[0] == 0);
    for (size_t t = 0; t < sizes.size(); ++t)
      for (int64_t k = 0; k < sizes[t]; ++k) {
        INFO("array " << t << ", element " << k);
        REQUIRE(seen[t][static_cast<size_t>(k)] == 1);
      }
  }
}
