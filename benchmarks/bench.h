// Benchmarks: speed figures reported as ratios to a ceiling measured in the same run.
//
// Each benchmark counts its floating-point operations explicitly and, where a ceiling
// applies, times a raw Eigen GEMM doing the same FLOPs in the same process, so the ratio
// holds on any machine. Used by `spar bench` and by benchmarks/run_benchmarks.
// Thread safety: benchmarks change the process-wide thread count; run one at a time.
#pragma once

#include <functional>
#include <string>
#include <vector>

namespace spar {
namespace bench {

struct BenchOptions {
  bool quick = false;  // small sizes and short timings: a smoke run, not a measurement
  int threads = 0;     // 0: keep the current thread count
};

struct BenchRow {
  std::string name;    // what was measured
  std::string size;    // e.g. "512³"
  std::string unit;    // "GFLOP/s" or "µs/op"
  double value = 0;    // ours, in `unit`
  double ceiling = 0;  // the same work on raw Eigen GEMM, in `unit`; 0 when none applies
  double target = 0;   // the target for value/ceiling (or for value when no ceiling); 0 none
  bool higher_is_better = true;
};

// Times `call` (after one warm-up call): repeats it until at least `min_seconds` have
// passed, three times, and returns the best seconds per call.
double seconds_per_call(const std::function<void()>& call, double min_seconds);
// Times `ours` and `ceiling` in alternation, five rounds each (so both see the same machine
// conditions on a shared host), and returns the best seconds per call of each.
std::pair<double, double> paired_seconds_per_call(const std::function<void()>& ours,
                                                  const std::function<void()>& ceiling, double min_seconds);

// A registered benchmark: appends its rows.
using Benchmark = std::function<void(const BenchOptions&, std::vector<BenchRow>&)>;
// Every benchmark, in the order it is printed.
const std::vector<std::pair<std::string, Benchmark>>& benchmarks();

std::vector<BenchRow> run_all(const BenchOptions& options, const std::string& only = "");

}  // namespace bench
}  // namespace spar
