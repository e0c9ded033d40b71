#include "recipes/mixtures.h"

#include <cmath>

#include "engine/error.h"

namespace spar {

Mixture ring_of_8() {
  Mixture m{"ring8", {}, 0.01};
  const double pi = std::acos(-1.0);
  for (int i = 0; i < 8; ++i)
    m.means.emplace_back(std::cos(2 * pi * i / 8), std::sin(2 * pi * i / 8));
  return m;
}

Mixture grid_of_25() {
  Mixture m{"grid25", {}, 0.05};
  for (int i = -2; i <= 2; ++i)
    for (int j = -2; j <= 2; ++j) m.means.emplace_back(2.0 * i, 2.0 * j);
  return m;
}

Tensor<float> sample_mixture(const Mixture& mixture, int64_t n, Rng& rng) {
  const Tensor<float> noise = rng.normal<float>({n, 2}, 0.0f, static_cast<float>(mixture.stddev));
  Tensor<float> out = Tensor<float>::uninitialised({n, 2});
  const uint64_t modes = mixture.means.size();
  for (int64_t i = 0; i < n; ++i) {
    const auto& mean = mixture.means[rng.below(modes)];
    out.mutable_data()[2 * i] = static_cast<float>(mean.first) + noise.data()[2 * i];
    out.mutable_data()[2 * i + 1] = static_cast<float>(mean.second) + noise.data()[2 * i + 1];
  }
  return out;
}

ModeCoverage mode_coverage(const Mixture& mixture, const Tensor<float>& points) {
  if (points.rank() != 2 || points.dim(1) != 2)
    raise(ErrorKind::kBadShape,
          "mode coverage: points have shape " + points.shape().str() + ", expected [N, 2]");
  ModeCoverage c;
  c.modes_total = static_cast<int>(mixture.means.size());
  c.high_quality_per_mode.assign(mixture.means.size(), 0);
  int64_t high_quality = 0;
  const double radius = 3 * mixture.stddev;
  for (int64_t i = 0; i < points.dim(0); ++i) {
    const double x = points.data()[2 * i], y = points.data()[2 * i + 1];
    size_t nearest = 0;
    double best = INFINITY;
    for (size_t k = 0; k < mixture.means.size(); ++k) {
      const double d = std::hypot(x - mixture.means[k].first, y - mixture.means[k].second);
      if (d < best) best = d, nearest = k;
    }
    if (best <= radius) {
      ++high_quality;
      ++c.high_quality_per_mode[nearest];
    }
  }
  for (int64_t count : c.high_quality_per_mode) c.modes_captured += count > 0;
  c.high_quality_fraction =
      points.dim(0) > 0 ? static_cast<double>(high_quality) / points.dim(0) : 0;
  return c;
}

MixtureSource::MixtureSource(Mixture mixture, uint64_t seed)
    : mixture_(std::move(mixture)), rng_(seed, derive_stream(seed, "data")) {}

// One record, "<prefix>.stream.position": where the draws go on (docs/file-formats.md).
void MixtureSource::save(Archive& archive, const std::string& prefix) const {
  archive.put_int(prefix + ".stream.position", static_cast<int64_t>(rng_.position()));
}
void MixtureSource::load(const Archive& archive, const std::string& prefix) {
  rng_.set_position(static_cast<uint64_t>(archive.integer(prefix + ".stream.position")));
}

}  // namespace spar
