// A training run on disk: building the data, networks and loop a recipe describes, and the
// run folder that records it.
//
// Run folder layout (docs/file-formats.md, "Run folders"):
//   recipe.toml                 the resolved recipe: every key with the value this run uses
//   log.csv                     one row per logged step (output.log_every)
//   samples/step-NNNNNN.png     a picture of generated samples every output.sample_every
//                               steps, always from the same latent vectors, so pictures of
//                               different steps are comparable
//   curves.svg                  losses and mean critic outputs over steps, from log.csv
//   state.spar                  everything needed to continue exactly (see TrainingRun)
//   generator.spar              what sampling needs: recipe, weight-averaged generator, shape
// state.spar and generator.spar are written atomically (temporary file, flush, rename) every
// output.checkpoint_every steps, at the end, and when the run is asked to stop.
//
// Thread safety: one thread at a time. The `stop` flag may be set from a signal handler.
#pragma once

#include <atomic>
#include <functional>
#include <memory>
#include <string>

#include "recipes/datasets.h"
#include "recipes/recipe.h"
#include "recipes/training.h"

namespace spar {

// ---- From a recipe to the pieces of a run ----

// Loads or makes the data the recipe names, with its labels when it has any. Raises kBadRecipe for
// an inconsistent recipe (naming the key) and kBadInputFile for data that cannot be read (naming
// the file).
Dataset load_dataset(const Recipe& recipe);  // not for the built-in 2-D mixtures
// The source a run trains on: a mixture's endless draws, or load_dataset's data shuffled
// from the run seed (without labels unless the recipe is conditional).
std::unique_ptr<DataSource> make_data_source(const Recipe& recipe);
// The recipe's networks for samples of `sample_shape`, with `classes` classes when the
// recipe is conditional; initial weights from the run seed.
GanPair make_gan_pair(const Recipe& recipe, const Shape& sample_shape, int64_t classes);
TrainingOptions training_options(const Recipe& recipe);

// ---- A run in its folder ----

struct RunProgress {
  int64_t step = 0;         // generator steps done
  int64_t total_steps = 0;  // where this call stops
  double seconds = 0;       // wall time of this call so far
  int64_t steps_this_call = 0;
  StepReport last;  // the latest step's losses and critic outputs
};

enum class RunEnd { kFinished, kInterrupted, kNumericalFailure };

struct RunResult {
  RunEnd end = RunEnd::kFinished;
  int64_t step = 0;     // steps done, as saved in state.spar
  std::string message;  // for kNumericalFailure: which step and what went bad
};

class Run {
 public:
  // Starts a run of `recipe` in `folder`, creating it. Refuses (kBadArgument) a folder that
  // exists and is not empty, unless `force`, which first removes what a run writes there.
  static Run start(const std::string& folder, const Recipe& recipe, bool force);
  // Continues the run saved in folder/state.spar.
  static Run reopen(const std::string& folder);

  // Trains until `total_steps` generator steps are done in all, `stop` becomes true (checked
  // between steps), or the loss becomes non-finite (the run then keeps its last good
  // checkpoint and says which step failed). Calls `on_step` after every step.
  RunResult train_until(int64_t total_steps, const std::atomic<bool>* stop,
                        const std::function<void(const RunProgress&)>& on_step);

  // Makes `total` the run's planned length (recipe key training.steps), so that a later
  // `spar resume` without --steps continues to it; rewrites recipe.toml.
  void plan_steps(int64_t total);

  const Recipe& recipe() const { return recipe_; }
  int64_t steps_done() const { return trainer_->steps_done(); }
  const std::string& folder() const { return folder_; }
  // The file a picture of samples at `step` goes to.
  std::string samples_path(int64_t step) const;

 private:
  Run(std::string folder, Recipe recipe);
  void save_checkpoints();
  void write_log_row(const StepReport& report);
  void write_samples();
  void write_curves();

  std::string folder_;
  Recipe recipe_;
  std::unique_ptr<TrainingRun> trainer_;
  Shape sample_shape_;
  std::vector<std::string> class_names_;
  double elapsed_before_ = 0;  // seconds of training before this process
  double elapsed_ = 0;
};

// ---- The saved generator ----

struct SavedGenerator {
  Recipe recipe;
  int64_t step = 0;
  Shape sample_shape;
  std::vector<std::string> class_names;  // empty for an unconditional generator
  GanPair pair;                          // the critic is built but untrained
};
// Reads generator.spar (a run folder may be given for its generator.spar). Raises
// kCorruptCheckpoint for a damaged file or one whose tensors do not fit its recipe.
SavedGenerator load_generator(const std::string& folder_or_file);
// n samples [n, ...] in [−1, 1] from latent vectors drawn from `seed`; for a conditional
// generator, of class `class_index` (−1: classes in turn, 0, 1, 2, ...).
Tensor<float> generate_samples(SavedGenerator& generator, int64_t n, uint64_t seed,
                               int64_t class_index);
// Whether samples of this recipe's data are drawn as pictures: images, 2-D mixtures, and
// tables with a data.picture_width. Other tables' samples are written as CSV instead.
bool has_pictures(const Recipe& recipe, const Shape& sample_shape);
void write_samples_table(const Tensor<float>& samples, const std::string& path);
// A picture of samples as the run folder draws them: a grid of images, a grid of table rows
// drawn as pictures, or a scatter plot of 2-D points. Writes PNG to `path`.
void write_samples_picture(const Recipe& recipe, const Tensor<float>& samples, int64_t columns,
                           const std::string& path);

}  // namespace spar
