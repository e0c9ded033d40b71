// spar_table_reference: loads a numeric CSV table with load_table (recipes/datasets.h) and
// prints what tests/reference/check_table.py recomputes with numpy.loadtxt.
//
// Usage: spar_table_reference PATH LABEL_COLUMN LOW HIGH
// Output lines, values printed with %.17g (which reads back as the same double):
//   shape N F
//   classes K
//   labels y0 .. y(N-1)
//   mean m0 .. m(F-1)      per-column means of the loaded floats, summed in double
//   min a0 .. a(F-1)
//   max b0 .. b(F-1)
//   count c0 .. c(K-1)     samples per class
//   row i v0 .. v(F-1)     every sample, i = 0 .. N-1
// Exit status: 0 done; 1 the loader raised an error; 2 bad usage (one line on stderr).
#include <algorithm>
#include <cstdio>
#include <cstdlib>
#include <string>
#include <vector>

#include "engine/error.h"
#include "recipes/datasets.h"

namespace {

void print_line(const char* name, const std::vector<double>& values) {
  std::printf("%s", name);
  for (double v : values) std::printf(" %.17g", v);
  std::printf("\n");
}

}  // namespace

int main(int argc, char** argv) {
  if (argc != 5) {
    std::fprintf(stderr, "usage: spar_table_reference PATH LABEL_COLUMN LOW HIGH\n");
    return 2;
  }
  spar::TableOptions options;
  options.label_column = std::strtoll(argv[2], nullptr, 10);
  options.low = std::strtod(argv[3], nullptr);
  options.high = std::strtod(argv[4], nullptr);
  spar::Dataset d;
  try {
    d = spar::load_table(argv[1], options);
  } catch (const spar::Error& e) {
    std::fprintf(stderr, "spar_table_reference: %s\n", e.what());
    return 1;
  }
  const int64_t n = d.samples.dim(0), f = d.samples.dim(1);
  const float* v = d.samples.data();
  std::printf("shape %lld %lld\n", static_cast<long long>(n), static_cast<long long>(f));
  std::printf("classes %lld\n", static_cast<long long>(d.classes()));
  print_line("labels", std::vector<double>(d.labels.begin(), d.labels.end()));
  std::vector<double> mean(static_cast<size_t>(f), 0.0), low(v, v + f), high(v, v + f);
  for (int64_t i = 0; i < n; ++i)
    for (int64_t k = 0; k < f; ++k) {
      const double x = v[i * f + k];
      mean[static_cast<size_t>(k)] += x;
      low[static_cast<size_t>(k)] = std::min(low[static_cast<size_t>(k)], x);
      high[static_cast<size_t>(k)] = std::max(high[static_cast<size_t>(k)], x);
    }
  for (double& m : mean) m /= static_cast<double>(n);
  print_line("mean", mean);
  print_line("min", low);
  print_line("max", high);
  std::vector<double> count(static_cast<size_t>(d.classes()), 0.0);
  for (int64_t y : d.labels) count[static_cast<size_t>(y)] += 1;
  print_line("count", count);
  for (int64_t i = 0; i < n; ++i) {
    std::printf("row %lld", static_cast<long long>(i));
    for (int64_t k = 0; k < f; ++k) std::printf(" %.17g", static_cast<double>(v[i * f + k]));
    std::printf("\n");
  }
  return 0;
}
