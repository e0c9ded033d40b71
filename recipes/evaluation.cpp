#include "recipes/evaluation.h"

#include <cmath>
#include <limits>

#include "engine/error.h"
#include "engine/kernels.h"

namespace spar {

NearestMatch nearest_training_samples(const Dataset& data, const Tensor<float>& samples) {
  if (data.labels.empty())
    raise(ErrorKind::kBadArgument, data.origin + ": has no labels to compare samples with");
  const int64_t n = samples.shape()[0], m = data.size();
  const int64_t width = data.sample_shape().element_count();
  if (samples.element_count() != n * width)
    raise(ErrorKind::kBadShape, "nearest training samples: samples of shape " +
                                    samples.shape().str() + " against data of sample shape " +
                                    data.sample_shape().str());
  const Tensor<float> a = samples.reshape({n, width});
  NearestMatch match;
  match.labels.assign(static_cast<size_t>(n), -1);
  match.distances.assign(static_cast<size_t>(n), std::numeric_limits<double>::infinity());
  std::vector<double> sample_norm(static_cast<size_t>(n));
  for (int64_t i = 0; i < n; ++i) {
    double s = 0;
    for (int64_t k = 0; k < width; ++k)
      s += double(a.data()[i * width + k]) * a.data()[i * width + k];
    sample_norm[static_cast<size_t>(i)] = s;
  }
  // ‖a − b‖² = ‖a‖² − 2a·b + ‖b‖², with the products in blocks of training samples by GEMM.
  const int64_t block = 4096;
  for (int64_t begin = 0; begin < m; begin += block) {
    const int64_t end = std::min(m, begin + block);
    const Tensor<float> b = data.samples.leading_slice(begin, end).reshape({end - begin, width});
    const Tensor<float> dots = kernels::matrix_product(a, b, false, true);
    for (int64_t j = 0; j < end - begin; ++j) {
      double norm = 0;
      for (int64_t k = 0; k < width; ++k)
        norm += double(b.data()[j * width + k]) * b.data()[j * width + k];
      for (int64_t i = 0; i < n; ++i) {
        const double d2 =
            sample_norm[static_cast<size_t>(i)] - 2.0 * dots.data()[i * (end - begin) + j] + norm;
        const double d = std::sqrt(std::max(0.0, d2));
        if (d < match.distances[static_cast<size_t>(i)]) {
          match.distances[static_cast<size_t>(i)] = d;
          match.labels[static_cast<size_t>(i)] = data.labels[static_cast<size_t>(begin + j)];
        }
      }
    }
  }
  return match;
}

}  // namespace spar
