#include "benchmarks/bench.h"

#include <algorithm>
#include <chrono>

#include "engine/parallel.h"

namespace spar {
namespace bench {

void register_engine_benchmarks(std::vector<std::pair<std::string, Benchmark>>& list);
void register_conv_benchmarks(std::vector<std::pair<std::string, Benchmark>>& list);
void register_training_benchmarks(std::vector<std::pair<std::string, Benchmark>>& list);
void register_export_benchmarks(std::vector<std::pair<std::string, Benchmark>>& list);

namespace {
// Seconds per call of one timed batch lasting at least min_seconds.
double one_batch(const std::function<void()>& call, double min_seconds) {
  using Clock = std::chrono::steady_clock;
  int64_t calls = 0;
  const auto start = Clock::now();
  double elapsed = 0;
  do {
    call();
    ++calls;
    elapsed = std::chrono::duration<double>(Clock::now() - start).count();
  } while (elapsed < min_seconds);
  return elapsed / static_cast<double>(calls);
}
}  // namespace

double seconds_per_call(const std::function<void()>& call, double min_seconds) {
  call();  // warm-up: pools filled, caches warm
  double best = 1e300;
  for (int rep = 0; rep < 3; ++rep) best = std::min(best, one_batch(call, min_seconds));
  return best;
}

std::pair<double, double> paired_seconds_per_call(const std::function<void()>& ours,
                                                  const std::function<void()>& ceiling,
                                                  double min_seconds) {
  ours();
  ceiling();
  double best_ours = 1e300, best_ceiling = 1e300;
  for (int rep = 0; rep < 5; ++rep) {
    best_ours = std::min(best_ours, one_batch(ours, min_seconds));
    best_ceiling = std::min(best_ceiling, one_batch(ceiling, min_seconds));
  }
  return {best_ours, best_ceiling};
}

const std::vector<std::pair<std::string, Benchmark>>& benchmarks() {
  static const std::vector<std::pair<std::string, Benchmark>> list = [] {
    std::vector<std::pair<std::string, Benchmark>> l;
    register_engine_benchmarks(l);
    register_conv_benchmarks(l);
    register_training_benchmarks(l);
    register_export_benchmarks(l);
    return l;
  }();
  return list;
}

std::vector<BenchRow> run_all(const BenchOptions& options, const std::string& only) {
  const int previous = thread_count();
  if (options.threads > 0) set_thread_count(options.threads);
  std::vector<BenchRow> rows;
  for (const auto& b : benchmarks())
    if (only.empty() || b.first.find(only) != std::string::npos) b.second(options, rows);
  set_thread_count(previous);
  return rows;
}

}  // namespace bench
}  // namespace spar
