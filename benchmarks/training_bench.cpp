// Training-step benchmarks: whole adversarial steps of the shipped image presets, in images
// per second and as a fraction of raw GEMM speed measured in the same run.
//
// FLOPs are those the engine's products and convolutions actually executed during the timed
// steps (kernels::product_flops), so the fraction says how much of a step's time goes to
// useful matrix work at GEMM speed; elementwise work, normalisation, im2col, the optimiser and
// data handling all count as time but not as FLOPs. The ceiling is one raw Eigen GEMM of
// 512³ (with Eigen's own threading), timed in alternation with the steps.
#include <Eigen/Core>

#include "benchmarks/bench.h"
#include "engine/kernels.h"
#include "engine/parallel.h"
#include "recipes/run_parts.h"

namespace spar {
namespace bench {
namespace {

void training_preset(const BenchOptions& o, const std::string& preset,
                     std::vector<BenchRow>& rows) {
  Recipe r = load_recipe(preset);
  if (o.quick) {
    r.data.swatch_count = 64;
    r.training.batch = 8;
    r.model.width = 4;
    if (r.data.source == "idx") return;  // loading 60,000 images is not a smoke run
  }
  std::unique_ptr<DataSource> data = make_data_source(r);
  const Shape shape = data->sample_shape();
  const int64_t classes = data->classes();
  TrainingRun run(make_gan_pair(r, shape, classes), std::move(data), training_options(r));
  run.step();  // warm-up: the buffer pool fills

  const int64_t n = 512;
  using M = Eigen::Matrix<float, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor>;
  const M a = M::Random(n, n), b = M::Random(n, n);
  M c(n, n);
  const double gemm_flops = 2.0 * n * n * n;
  uint64_t step_flops = 0;
  const auto [step_s, gemm_s] = paired_seconds_per_call(
      [&] {
        const uint64_t before = kernels::product_flops();
        run.step();
        step_flops = kernels::product_flops() - before;
      },
      [&] {
        Eigen::setNbThreads(thread_count());
        c.noalias() = a * b;
        Eigen::setNbThreads(1);
      },
      o.quick ? 0.01 : 0.5);
  const std::string size = "batch " + std::to_string(r.training.batch) + ", " + shape.str() +
                           ", width " + std::to_string(r.model.width);
  rows.push_back({"training step, " + preset + " preset", size, "GFLOP/s",
                  static_cast<double>(step_flops) / step_s / 1e9, gemm_flops / gemm_s / 1e9, 0.5,
                  true});
  rows.push_back({"training images per second, " + preset + " preset", size, "images/s",
                  static_cast<double>(r.training.batch * r.objective.critic_steps) / step_s, 0, 0,
                  true});
}

void training(const BenchOptions& o, std::vector<BenchRow>& rows) {
  training_preset(o, "swatches", rows);
  training_preset(o, "fashion", rows);
}

}  // namespace

void register_training_benchmarks(std::vector<std::pair<std::string, Benchmark>>& list) {
  list.emplace_back("training", training);
}

}  // namespace bench
}  // namespace spar
