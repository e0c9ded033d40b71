// Engine benchmarks: the matrix product through the tape against raw Eigen GEMM, and the
// tape's cost per recorded operation.
#include <Eigen/Core>

#include "benchmarks/bench.h"
#include "engine/ops.h"
#include "engine/parallel.h"
#include "engine/random.h"

namespace spar {
namespace bench {
namespace {

// C = A·B, then the two products of its backward pass (gA = G·Bᵀ, gB = Aᵀ·G), through the
// tape; the ceiling is the same three products as raw Eigen GEMM calls with Eigen's own
// threading on the same number of threads.
void matmul_through_tape(const BenchOptions& o, std::vector<BenchRow>& rows) {
  const std::vector<int64_t> sizes =
      o.quick ? std::vector<int64_t>{64, 128} : std::vector<int64_t>{256, 512, 1024};
  const double min_seconds = o.quick ? 0.01 : 0.15;
  for (int64_t n : sizes) {
    Rng rng(1, 1);
    const Tensor<float> a = rng.uniform<float>({n, n}, -1, 1),
                        b = rng.uniform<float>({n, n}, -1, 1);
    const Tensor<float> w = rng.uniform<float>({n, n}, -1, 1);
    const double flops = 3 * 2.0 * n * n * n;

    Tape<float> tape;
    auto ours = [&] {
      tape.clear();
      Var<float> va = tape.variable(a), vb = tape.variable(b);
      tape.vector_jacobian_product(matmul(va, vb), {va, vb}, Var<float>(w));  // g = W
    };
    using M = Eigen::Matrix<float, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor>;
    M A = Eigen::Map<const M>(a.data(), n, n), B = Eigen::Map<const M>(b.data(), n, n);
    M G = Eigen::Map<const M>(w.data(), n, n), C(n, n), GA(n, n), GB(n, n);
    auto raw_gemm = [&] {
      Eigen::setNbThreads(thread_count());  // Eigen's own threading: its best on these cores
      C.noalias() = A * B;
      GA.noalias() = G * B.transpose();
      GB.noalias() = A.transpose() * G;
      Eigen::setNbThreads(1);  // spar runs Eigen single-threaded inside its own panels
    };
    const auto [ours_s, raw_s] = paired_seconds_per_call(ours, raw_gemm, min_seconds);
    rows.push_back({"matmul forward+backward (tape)", std::to_string(n) + "³", "GFLOP/s",
                    flops / ours_s / 1e9, flops / raw_s / 1e9, 0.9, true});
  }
}

// Forward: record a chain of one-element operations; backward: differentiate it.
void tape_overhead(const BenchOptions& o, std::vector<BenchRow>& rows) {
  const int kOps = 1000;
  const double min_seconds = o.quick ? 0.01 : 0.3;
  const Tensor<float> one = Tensor<float>::scalar(1.0f), half = Tensor<float>::scalar(0.5f);
  Tape<float> tape;
  Var<float> x, y;
  auto forward = [&] {
    tape.clear();
    x = tape.variable(one);
    y = x;
    const Var<float> c(half);
    for (int i = 0; i < kOps / 2; ++i) y = multiply(add(y, x), c);
  };
  const double fwd = seconds_per_call(forward, min_seconds);
  const double both = seconds_per_call(
      [&] {
        forward();
        tape.gradient(y, {x});
      },
      min_seconds);
  rows.push_back({"tape: record one-element op", "1", "µs/op", fwd / kOps * 1e6, 0, 1.0, false});
  rows.push_back({"tape: backward per one-element op", "1", "µs/op", (both - fwd) / kOps * 1e6, 0,
                  1.0, false});
}

}  // namespace

void register_engine_benchmarks(std::vector<std::pair<std::string, Benchmark>>& list) {
  list.emplace_back("matmul", matmul_through_tape);
  list.emplace_back("tape", tape_overhead);
}

}  // namespace bench
}  // namespace spar
