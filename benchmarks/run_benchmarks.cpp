// A standalone runner for the benchmarks, for profiling without the CLI:
//   run_benchmarks [--quick] [name-filter]
// `spar bench` prints the same rows as a table or JSON.
#include <cstdio>
#include <cstring>
#include <string>

#include "benchmarks/bench.h"

int main(int argc, char** argv) {
  spar::bench::BenchOptions options;
  std::string only;
  for (int i = 1; i < argc; ++i) {
    if (std::strcmp(argv[i], "--quick") == 0)
      options.quick = true;
    else
      only = argv[i];
  }
  for (const spar::bench::BenchRow& r : spar::bench::run_all(options, only)) {
    std::printf("%-36s %-6s %10.4g %-8s", r.name.c_str(), r.size.c_str(), r.value, r.unit.c_str());
    if (r.ceiling > 0) std::printf(" ceiling %10.4g  ratio %.3f", r.ceiling, r.value / r.ceiling);
    std::printf("\n");
  }
  return 0;
}
