#include "engine/parallel.h"

#include <Eigen/Core>
#include <string>

#include "engine/error.h"

#ifdef _OPENMP
#include <omp.h>
#endif

namespace spar {
int thread_count() {
#ifdef _OPENMP
  return omp_get_max_threads();
#else
  return 1;
#endif
}

void set_thread_count(int n) {
  if (n < 1)
    raise(ErrorKind::kBadArgument, "threads: " + std::to_string(n) + " is not a positive count");
#ifdef _OPENMP
  omp_set_num_threads(n);
#endif
}

namespace detail {
void ensure_eigen_single_threaded() {
  static const bool done = (Eigen::setNbThreads(1), true);
  (void)done;
}
}  // namespace detail

}  // namespace spar
