// How spar uses the cores: one place for the thread count and the work-splitting rule.
//
// spar owns all threading. Kernels parallelise with OpenMP over fixed chunks whose size
// depends only on the tensor shapes, never on the thread count, so every result is
// bit-identical with 1, 2 or more threads. Eigen's own GEMM threading is switched off
// (every kernel that runs a GEMM first calls detail::ensure_eigen_single_threaded, below, which
// sets Eigen::setNbThreads(1) once): spar splits each matrix product into fixed panels itself, so
// there is exactly one level of parallelism per kernel and no oversubscription. docs/threading.md
// says which operations run in parallel.
//
// Thread safety: set_thread_count() changes a process-wide setting; call it between steps, not
// while kernels run.
#pragma once

#include <algorithm>
#include <cstdint>
#include <vector>

namespace spar {

// Kernels with fewer elements than this run on the calling thread alone.
constexpr int64_t kParallelGrain = int64_t{1} << 15;

// Runs body(i) for i in 0..count-1: split statically over the threads when `parallel` is
// true and count > 1, otherwise in order on the calling thread without touching the
// thread pool (entering an OpenMP region costs about a microsecond even for one thread).
// body must be safe to run concurrently for distinct i.
template <class Body>
void parallel_for(int64_t count, bool parallel, Body&& body) {
  if (!parallel || count < 2) {
    for (int64_t i = 0; i < count; ++i) body(i);
    return;
  }
#pragma omp parallel for schedule(static)
  for (int64_t i = 0; i < count; ++i) body(i);
}

// Runs body(begin, end) over the element indices 0..n-1 in fixed chunks of kParallelGrain
// spread over the threads (one chunk: the calling thread alone). For elementwise work: the
// body's own loop over begin..end-1, on local pointers, is what the compiler vectorises.
template <class Body>
void parallel_for_chunks(int64_t n, Body&& body) {
  const int64_t chunks = (n + kParallelGrain - 1) / kParallelGrain;
  parallel_for(chunks, true, [&](int64_t c) {
    body(c * kParallelGrain, n < (c + 1) * kParallelGrain ? n : (c + 1) * kParallelGrain);
  });
}

// Runs body(t, begin, end) over the elements of several arrays, sizes[t] elements each, as
// if they were laid end to end: fixed chunks of kParallelGrain of that joint range (a chunk
// that spans arrays calls body once per piece), all in one parallel region. For work over a
// list of small and large tensors, such as an optimiser's update of every parameter.
template <class Body>
void parallel_for_chunks_of(const std::vector<int64_t>& sizes, Body&& body) {
  std::vector<int64_t> start(sizes.size() + 1, 0);  // start[t]: first joint index of array t
  for (size_t t = 0; t < sizes.size(); ++t) start[t + 1] = start[t] + sizes[t];
  const int64_t total = start.back(), chunks = (total + kParallelGrain - 1) / kParallelGrain;
  parallel_for(chunks, true, [&](int64_t c) {
    int64_t lo = c * kParallelGrain;
    const int64_t hi = std::min(total, lo + kParallelGrain);
    // The last array starting at or before lo (past any empty arrays that start there too).
    auto t =
        static_cast<size_t>(std::upper_bound(start.begin(), start.end(), lo) - start.begin() - 1);
    for (; lo < hi; ++t) {
      const int64_t end = std::min(hi, start[t + 1]);
      if (end > lo) body(t, lo - start[t], end - start[t]);
      lo = end;
    }
  });
}

// The number of threads kernels use; 1 when spar was built without OpenMP.
int thread_count();
// Sets the number of threads kernels use (n >= 1; raises kBadArgument otherwise).
// Results do not depend on it.
void set_thread_count(int n);

namespace detail {
// Switches Eigen's own GEMM threading off, once per process (see the top of this file).
// Every kernel that calls Eigen's GEMM calls this first.
void ensure_eigen_single_threaded();
}  // namespace detail

}  // namespace spar
