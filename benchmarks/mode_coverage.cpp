// Mode coverage on the built-in 2-D mixtures under the protocol of Srivastava et al. 2017
// (2,500 samples, high quality within 3σ of the nearest mode, averaged over seeds), for the
// MLP pair trained with spar's loop. Prints one line per seed and the average.
// Usage: spar_mode_coverage ring8|grid25 [steps] [seeds] [objective]
#include <cstdio>
#include <cstdlib>
#include <string>

#include "recipes/training.h"

using namespace spar;

int main(int argc, char** argv) {
  const std::string name = argc > 1 ? argv[1] : "ring8";
  const int steps = argc > 2 ? std::atoi(argv[2]) : 5000;
  const int seeds = argc > 3 ? std::atoi(argv[3]) : 5;
  const Objective objective = objective_from_string(argc > 4 ? argv[4] : "non-saturating");
  const Mixture mixture = mixture_by_name(name);
  double modes = 0, quality = 0;
  for (int seed = 1; seed <= seeds; ++seed) {
    Rng init(seed, derive_stream(seed, "initialisation"));
    MlpPairOptions mlp;
    TrainingOptions options;
    options.seed = seed;
    options.batch = 256;
    options.objective = objective;
    options.generator_optimiser.learning_rate = options.critic_optimiser.learning_rate = 1e-4;
    TrainingRun trainer(make_mlp_pair(mlp, init), std::make_unique<MixtureSource>(mixture, seed),
                        options);
    for (int s = 0; s < steps; ++s) trainer.step();
    Rng z(seed, derive_stream(seed, "evaluation"));
    const ModeCoverage c = mode_coverage(mixture, trainer.generate(trainer.draw_latent(2500, z)));
    std::printf("%s seed %d: %d of %d modes, %.1f%% high quality\n", name.c_str(), seed,
                c.modes_captured, c.modes_total, 100 * c.high_quality_fraction);
    modes += c.modes_captured;
    quality += c.high_quality_fraction;
  }
  std::printf("%s average over %d seeds after %d steps: %.2f modes, %.1f%% high quality\n",
              name.c_str(), seeds, steps, modes / seeds, 100 * quality / seeds);
  return 0;
}
