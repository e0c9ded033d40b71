// TrainingRun: the adversarial training loop for one generator-critic pair.
//
// One step() is one generator step preceded by `critic_steps` critic steps (Goodfellow et al.
// 2014, Algorithm 1, with k = critic_steps), each on a fresh batch of data and of latent
// vectors. The two networks have separate Adam optimisers (as in Heusel et al. 2017's two
// time-scale rule). After each generator step an exponential moving average of the generator's
// weights is updated (Yazıcı et al. 2019); sampling uses the average.
//
// Randomness comes from streams derived from the run seed, one per purpose ("latent",
// "dropout", "penalty"; data sources keep their own), so the same seed gives the same bits,
// and save()/load() carry every stream's position: 100 steps, save, load, 100 more equals
// 200 steps straight.
//
// Sampling uses the average in evaluation mode. The running statistics of the generator's
// batch normalisation are refitted to the averaged weights first (one statistics pass over
// a fixed batch of latent vectors), because statistics gathered while training describe the
// live weights, not their average. They are used by nothing else, and the refit depends only
// on the averaged weights, so it does not disturb an exact resume.
//
// A class-conditional pair (GanPair::classes > 0) needs labelled data with that many classes.
// Real samples are judged with their own labels; generated ones are made for labels drawn
// uniformly from the "latent" stream and judged with those (Mirza and Osindero 2014).
// Thread safety: one thread at a time; kernels inside use the engine's threads.
#pragma once

#include <memory>

#include "engine/optimizer.h"
#include "recipes/architectures.h"
#include "recipes/datasets.h"
#include "recipes/mixtures.h"
#include "recipes/objectives.h"

namespace spar {

// Adam as DCGAN trains (Radford et al. 2015): learning rate 2e-4, β1 = 0.5, the rest Adam's.
inline AdamOptions dcgan_adam() {
  AdamOptions o;
  o.learning_rate = 2e-4;
  o.beta1 = 0.5;
  return o;
}

struct TrainingOptions {
  Objective objective = Objective::kNonSaturating;
  LeastSquaresTargets least_squares;  // used by Objective::kLeastSquares only
  double gradient_penalty = 0;        // λ of the gradient penalty (Gulrajani et al.: 10); 0 off
  double r1 = 0;                      // γ of the R1 penalty (Mescheder et al.: 10 common); 0 off
  int critic_steps = 1;               // critic steps per generator step (k)
  int64_t batch = 64;                 // samples per batch, real and generated alike
  AdamOptions generator_optimiser = dcgan_adam();
  AdamOptions critic_optimiser = dcgan_adam();
  double average_decay = 0.999;  // β of the generator's weight average; 0 off. At generator
                                 // step t the decay used is min(β, (1 + t)/(10 + t)).
  uint64_t seed = 1;
};

// What one step measured: the losses, and the critic's mean output on real and generated
// samples of the last critic step: for minimax and non-saturating, D's probability that a
// sample is real, σ(score) (Goodfellow et al.'s D(x) and D(G(z))); for the others, the raw
// score.
struct StepReport {
  int64_t step = 0;
  double critic_loss = 0, generator_loss = 0;
  double real_score = 0, fake_score = 0;
};

// The run format: how state.spar and generator.spar name their records (docs/file-formats.md).
// 2: model tensors named as layer.h says ("critic/down2/filters"), under "average/" and
// "optimiser/" prefixes, and a "run.format" record holding 2. 1: no "run.format" record,
// dotted names ("critic.down2.weight", "average.generator.up1.weight",
// "optimiser.generator/m/0").
constexpr int64_t kRunFormat = 2;
// Gives the records of a file in an older run format their current names, so that every
// reader sees one format; returns the format the file was written in. Raises
// kCorruptCheckpoint for a format this code does not know (a newer spar's file).
int64_t upgrade_run_records(Archive& archive);

class TrainingRun {
 public:
  TrainingRun(GanPair pair, std::unique_ptr<DataSource> data, const TrainingOptions& options);

  StepReport step();
  int64_t steps_done() const { return steps_; }

  // Generated samples from the averaged generator (evaluation step) for latent vectors z
  // [n, latent]; draw_latent gives z ~ N(0, I).
  // For a conditional pair, `labels` gives each sample's class (n of them); otherwise empty.
  Tensor<float> generate(const Tensor<float>& z, const std::vector<int64_t>& labels = {});
  Tensor<float> draw_latent(int64_t n, Rng& rng) const {
    return rng.normal<float>({n, pair_.latent});
  }

  // Every tensor, optimiser moment, stream position and count needed to continue exactly.
  void save(Archive& archive);
  // Raises kCorruptCheckpoint naming what is missing or does not fit this architecture.
  void load(const Archive& archive);
  // What sampling needs: the generator with its averaged weights, as "generator/..." records
  // (LayerStack::save), loadable by a generator of the same architecture.
  void save_generator(Archive& archive);

  GanPair& pair() { return pair_; }

 private:
  double critic_step();
  void swap_average();
  void fit_statistics_to_average();
  std::vector<int64_t> draw_labels(int64_t n);
  void average_generator();

  GanPair pair_;
  std::unique_ptr<DataSource> data_;
  TrainingOptions options_;
  std::vector<NamedTensor<float>> generator_params_, critic_params_;
  std::vector<Tensor<float>>
      average_;  // the generator's weight average, parallel to generator_params_
  Adam<float> generator_adam_, critic_adam_;
  Rng latent_rng_, dropout_rng_, penalty_rng_;
  uint64_t seed_;
  Tape<float> tape_;
  int64_t steps_ = 0;
  int64_t statistics_fitted_at_ = -1;  // the step whose average the statistics fit; -1 none
  StepReport last_;
};

}  // namespace spar
