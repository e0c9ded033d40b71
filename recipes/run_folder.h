// A training run in its folder: the run (built from a recipe by recipes/run_parts.h) and
// the folder that records it: log, sample pictures, curves, checkpoints.
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
//   history.txt                 keys changed on purpose by `spar resume --set`, with the step
//   run.lock                    held (flock) by the one process writing the run
// state.spar and generator.spar are written atomically (temporary file, flush, rename) every
// output.checkpoint_every steps, at the end, and when the run is asked to stop; both record
// the step they hold and the run's identity.
//
// What a run folder promises (docs/reliability.md):
// - One writer: start() and reopen() hold an advisory lock on run.lock for the Run's life;
//   a second writer is refused naming the holder's process id.
// - Nothing it did not write is removed: `force` removes only the files a run writes.
// - A run knows itself: a run id (random, recorded in recipe.toml's first line, state.spar
//   and generator.spar; it never affects the numbers) and the resolved recipe. reopen()
//   refuses a state.spar of another run, and a recipe.toml edited since the run wrote it
//   unless the edit is asked for with a setting.
// - Data paths are stored absolute, so a run resumes and samples from any directory.
// - Temporary files an interrupted write left behind are removed on the next start or reopen,
//   and a generator.spar left a checkpoint behind its state.spar is written again.
//
// Thread safety: one thread at a time. The `stop` flag may be set from a signal handler.
#pragma once

#include <atomic>
#include <functional>
#include <memory>
#include <string>
#include <vector>

#include "recipes/recipe.h"
#include "recipes/training.h"

namespace spar {

struct RunProgress {
  int64_t step = 0;         // generator steps done
  int64_t total_steps = 0;  // where this call stops
  double seconds = 0;       // wall time of this call so far
  int64_t steps_this_call = 0;
  StepReport last;  // the latest step's losses and critic outputs
  // Set on the one step at which training first looks divergent (a loss above 1e6, or a
  // thousand times its largest size in the first 100 steps), for a one-line warning; the
  // run goes on.
  std::string warning;
};

enum class RunEnd { kFinished, kInterrupted, kNumericalFailure };

struct RunResult {
  RunEnd end = RunEnd::kFinished;
  int64_t step = 0;     // the step the saved state.spar holds (for a failure: the last good one)
  std::string message;  // for kNumericalFailure: which step and what went bad
};

class Run {
 public:
  // Starts a run of `recipe` in `folder`, creating it. Refuses (kBadArgument) a folder that
  // exists and is not empty, unless `force`, which first removes what a run writes there
  // (and nothing else), and a folder another process is writing. Relative data paths are
  // taken from the current directory and stored absolute.
  static Run start(const std::string& folder, const Recipe& recipe, bool force);
  // Continues the run saved in folder/state.spar. `settings` ("key=value", as apply_setting)
  // change keys of the run on purpose (learning rates, length, outputs; not data.*, model.*
  // or training.seed, which describe what was trained); each change is written to
  // history.txt. Raises kBadArgument for a state.spar of another run, a recipe.toml edited
  // without a matching setting (naming the keys), or a folder another process is writing.
  static Run reopen(const std::string& folder, const std::vector<std::string>& settings = {});

  // Trains until `total_steps` generator steps are done in all, `stop` becomes true (checked
  // between steps), or a loss, penalty, gradient or weight becomes non-finite (the run then
  // keeps its last good checkpoint and says which step and tensor failed). Calls `on_step`
  // after every step. A write that fails (a full disk) raises kIo naming the file and the
  // step of the last complete checkpoint, which is left intact.
  RunResult train_until(int64_t total_steps, const std::atomic<bool>* stop,
                        const std::function<void(const RunProgress&)>& on_step);

  // Makes `total` the run's planned length (recipe key training.steps), so that a later
  // `spar resume` without --steps continues to it; rewrites recipe.toml and notes the change
  // in history.txt.
  void plan_steps(int64_t total);

  const Recipe& recipe() const { return recipe_; }
  int64_t steps_done() const { return trainer_->steps_done(); }
  const std::string& folder() const { return folder_; }
  const std::string& run_id() const { return run_id_; }
  // The step the latest complete state.spar holds.
  int64_t checkpoint_step() const { return checkpoint_step_; }
  // The file a picture of samples at `step` goes to.
  std::string samples_path(int64_t step) const;

 private:
  // Loads the data and builds the networks; with `state`, under a budget of its tensors.
  Run(std::string folder, Recipe recipe, const Archive* state = nullptr);
  void save_checkpoints();  // save_state, then save_generator
  void save_state();
  void save_generator();
  // What both checkpoints begin with: their kind, the run's identity, recipe and sample shape.
  Archive checkpoint_header(const char* kind) const;
  void write_log_row(const StepReport& report);
  void write_samples();
  void write_curves();
  void write_recipe_file();
  void note_changes(const Recipe& before, const std::string& how);
  std::string divergence(const StepReport& report);

  std::string folder_;
  std::shared_ptr<void> lock_;  // the folder's writer lock, released with the last copy
  std::string run_id_;
  std::string history_;  // history.txt: keys changed on purpose
  int64_t checkpoint_step_ = 0;
  double early_loss_size_ = 0;  // largest |loss| of the first 100 steps
  bool warned_ = false;
  Recipe recipe_;
  std::unique_ptr<TrainingRun> trainer_;
  Shape sample_shape_;
  std::vector<std::string> class_names_;
  double elapsed_before_ = 0;  // seconds of training before this process
  double elapsed_ = 0;
};

}  // namespace spar
