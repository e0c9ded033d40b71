// Internal to the kernels*.cpp files: loops shared by several kernels.
#pragma once

#include <cstdint>

namespace spar {
namespace detail {

// Σ term(i) for i in 0..n-1, in double and in a fixed order that depends only on n: eight
// interleaved partial sums (so the additions need not wait for each other and vectorise),
// added in a fixed tree, then the tail. Deterministic for any thread count.
template <class Term>
double lane_sum(int64_t n, Term term) {
  double lane[8] = {0, 0, 0, 0, 0, 0, 0, 0};
  int64_t i = 0;
  for (; i + 8 <= n; i += 8)
    for (int j = 0; j < 8; ++j) lane[j] += term(i + j);
  double s =
      ((lane[0] + lane[1]) + (lane[2] + lane[3])) + ((lane[4] + lane[5]) + (lane[6] + lane[7]));
  for (; i < n; ++i) s += term(i);
  return s;
}

}  // namespace detail
}  // namespace spar
