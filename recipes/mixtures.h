// The built-in 2-D mixtures and the mode-coverage measure used to judge generators on them.
//
// Data as in Lin et al. 2018 (PacGAN): a ring of 8 Gaussians with means
// (cos 2πi/8, sin 2πi/8), i = 0..7, σ = 0.01; a grid of 25 with means {−4,−2,0,2,4}², σ = 0.05.
// Protocol of Srivastava et al. 2017 (VEEGAN): a sample is of high quality if it lies within
// 3σ of its nearest mode; a mode is captured if it is the nearest mode of at least one
// high-quality sample; they draw 2,500 samples and average over 5 runs.
//
// Thread safety: pure functions; distinct Rngs may be used from distinct threads.
#pragma once

#include <string>
#include <vector>

#include "engine/random.h"
#include "recipes/datasets.h"

namespace spar {

struct Mixture {
  std::string name;
  std::vector<std::pair<double, double>> means;
  double stddev;
};

Mixture ring_of_8();
Mixture grid_of_25();

// n points [n, 2]: each picks a mode uniformly, then adds N(0, σ²) noise per coordinate.
Tensor<float> sample_mixture(const Mixture& mixture, int64_t n, Rng& rng);

struct ModeCoverage {
  int modes_captured = 0;
  int modes_total = 0;
  double high_quality_fraction = 0;
  std::vector<int64_t> high_quality_per_mode;  // how many high-quality samples each mode has
};

// Judges generated points [n, 2] by the protocol above.
ModeCoverage mode_coverage(const Mixture& mixture, const Tensor<float>& points);

// Endless fresh samples of a mixture, unlabelled, drawn from stream "data" of the run seed.
class MixtureSource final : public DataSource {
 public:
  MixtureSource(Mixture mixture, uint64_t seed);
  Shape sample_shape() const override { return {2}; }
  Batch next_batch(int64_t n) override { return {sample_mixture(mixture_, n, rng_), {}}; }
  void save(Archive& archive, const std::string& prefix) const override;
  void load(const Archive& archive, const std::string& prefix) override;
  const Mixture& mixture() const { return mixture_; }

 private:
  Mixture mixture_;
  Rng rng_;
};

}  // namespace spar
