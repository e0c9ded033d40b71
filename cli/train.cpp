// `spar train`, `spar resume` and `spar demo`: run training in a run folder, showing progress,
// and stop cleanly (with saved checkpoints) on Ctrl-C or SIGTERM.
#include <sys/ioctl.h>
#include <unistd.h>

#include <CLI/CLI.hpp>
#include <atomic>
#include <csignal>
#include <cstdio>
#include <iostream>

#include "cli/commands.h"
#include "cli/output.h"
#include "recipes/run_folder.h"

namespace spar {
namespace cli {
namespace {

// The limits of training.steps and training.seed in recipes/recipe.cpp.
constexpr int64_t kMostSteps = 1000000000000, kLargestSeed = 9000000000000000000;

std::atomic<bool> stop_requested{false};
std::atomic<int> stop_signal{0};  // the signal that asked to stop: SIGINT or SIGTERM

extern "C" void on_stop_signal(int signal) {
  stop_signal.store(signal);
  stop_requested.store(true);
  // A second Ctrl-C ends the process at once; files are written atomically, so nothing is
  // left half-written either way.
  std::signal(signal, SIG_DFL);
}

// Shows progress: one rewritten line on a terminal (at most a few times a second), or a
// plain line at every tenth of the run otherwise; nothing when quiet.
class ProgressView {
 public:
  explicit ProgressView(bool quiet) : quiet_(quiet), terminal_(isatty(STDERR_FILENO) != 0) {}

  void update(const RunProgress& p) {
    if (!p.warning.empty()) {  // shown even when quiet: the run may be going nowhere
      if (terminal_ && !quiet_) std::fputs("\r\033[K", stderr);
      std::fprintf(stderr, "spar: warning: %s\n", p.warning.c_str());
    }
    if (quiet_) return;
    const bool last = p.step == p.total_steps;
    if (terminal_) {
      if (!last && p.seconds - shown_at_ < 0.25) return;
      shown_at_ = p.seconds;
      std::fprintf(stderr, "\r\033[K%s", line(p).c_str());
      if (last) std::fputc('\n', stderr);
    } else {
      const int64_t tenth = std::max<int64_t>(1, p.total_steps / 10);
      if (!last && p.step % tenth != 0) return;
      std::fprintf(stderr, "%s\n", line(p).c_str());
    }
    std::fflush(stderr);
  }
  void finish() {
    if (!quiet_ && terminal_) std::fputc('\n', stderr);
  }

 private:
  // "step 1200 of 2000, 41.2 steps/s, 1m05s left | losses: critic 0.412, generator 1.203 |
  // scores: real 0.810, fake 0.220", in log.csv's words; on a terminal, cut to its width so
  // that the line can be rewritten in place.
  std::string line(const RunProgress& p) const {
    const double rate = p.seconds > 0 ? p.steps_this_call / p.seconds : 0;
    const double left = rate > 0 ? (p.total_steps - p.step) / rate : 0;
    char buf[320];
    std::snprintf(buf, sizeof buf,
                  "step %lld of %lld, %.1f steps/s, %s left | losses: critic %.3f, generator "
                  "%.3f | scores: real %.3f, fake %.3f",
                  static_cast<long long>(p.step), static_cast<long long>(p.total_steps), rate,
                  format_duration(left).c_str(), p.last.critic_loss, p.last.generator_loss,
                  p.last.real_score, p.last.fake_score);
    std::string text = buf;
    if (terminal_) {
      winsize size{};
      if (::ioctl(STDERR_FILENO, TIOCGWINSZ, &size) == 0 && size.ws_col > 1 &&
          text.size() >= size.ws_col)
        text.resize(size.ws_col - 1);
    }
    return text;
  }
  bool quiet_, terminal_;
  double shown_at_ = -1;
};

struct TrainOptions {
  std::string recipe, out;
  int64_t steps = 0, seed = -1;
  std::vector<std::string> settings;
  bool force = false, quiet = false;
};

// Trains `run` to `total` steps and reports how it ended. Exit code: 0 finished, 1 a
// numerical failure, 130 stopped by SIGINT (Ctrl-C), 143 by SIGTERM (the shell's 128 + signal).
int train_to(Run& run, int64_t total, bool quiet) {
  stop_requested.store(false);
  stop_signal.store(0);
  std::signal(SIGINT, on_stop_signal);
  std::signal(SIGTERM, on_stop_signal);
  ProgressView view(quiet);
  const RunResult result =
      run.train_until(total, &stop_requested, [&](const RunProgress& p) { view.update(p); });
  std::signal(SIGINT, SIG_DFL);
  std::signal(SIGTERM, SIG_DFL);
  switch (result.end) {
    case RunEnd::kFinished:
      if (!quiet)
        std::cerr << "spar: " << result.step << " steps done; samples in " << run.folder()
                  << "/samples, curves in " << run.folder() << "/curves.svg\n";
      return 0;
    case RunEnd::kInterrupted:
      view.finish();
      std::cerr << "spar: stopped at step " << result.step << "; state saved in " << run.folder()
                << "/state.spar. Continue with: spar resume " << run.folder() << "\n";
      return stop_signal.load() == SIGTERM ? 143 : 130;
    case RunEnd::kNumericalFailure:
      view.finish();
      std::cerr << "spar: " << result.message << "; the last good checkpoint (step " << result.step
                << ") is kept in " << run.folder() << "\n";
      return 1;
  }
  return 1;
}

int run_train(const TrainOptions& o) {
  std::vector<std::string> notes;  // keys given under an old name
  Recipe recipe = load_recipe(o.recipe, &notes);
  for (const std::string& s : o.settings) apply_setting(recipe, s, "--set " + s, &notes);
  for (const std::string& note : notes) std::cerr << "spar: note: " << note << "\n";
  if (o.steps > 0) recipe.training.steps = o.steps;
  if (o.seed >= 0) recipe.training.seed = o.seed;
  Run run = Run::start(o.out, recipe, o.force);
  return train_to(run, recipe.training.steps, o.quiet);
}

Subcommand add_train(CLI::App& parent) {
  auto o = std::make_shared<TrainOptions>();
  CLI::App* app = parent.add_subcommand(
      "train",
      "Train a GAN from a recipe (a preset name or a TOML file) into a run folder.\n"
      "Presets: ring8, grid25, swatches, swatches-conditional, fashion, fashion-conditional,\n"
      "digits, folder. Ctrl-C stops cleanly; `spar resume` continues.\n"
      "Example: spar train swatches --out trained/swatches --steps 2000 --set training.batch=32");
  app->add_option("recipe", o->recipe, "Preset name or recipe file (.toml)")->required();
  app->add_option("--out", o->out, "Run folder to create")->required();
  add_integer_option(*app, "--steps", o->steps, "Total generator steps (default: the recipe's)", 1,
                     kMostSteps);
  add_integer_option(*app, "--seed", o->seed, "Run seed (default: the recipe's)", 0, kLargestSeed);
  add_threads_option(*app);
  app->add_option("--set", o->settings, "Override a recipe key, e.g. --set objective.name=hinge")
      ->take_all()
      ->allow_extra_args(false);
  app->add_flag("--force", o->force,
                "Replace the run in an existing, non-empty folder (removes only the files a run "
                "writes)");
  app->add_flag("--quiet", o->quiet, "Print no progress");
  return {app, [o] { return run_train(*o); }};
}

struct ResumeOptions {
  std::string folder;
  int64_t steps = 0;
  std::vector<std::string> settings;
  bool quiet = false;
};

Subcommand add_resume(CLI::App& parent) {
  auto o = std::make_shared<ResumeOptions>();
  CLI::App* app = parent.add_subcommand(
      "resume",
      "Continue a stopped or finished run from its state.spar, exactly as if it had not\n"
      "stopped.\nExample: spar resume trained/swatches --steps 5000");
  app->add_option("folder", o->folder, "Run folder")->required();
  add_integer_option(*app, "--steps", o->steps,
                     "Continue until this many steps are done in all (default: the recipe's)", 1,
                     kMostSteps);
  add_threads_option(*app);
  app->add_option("--set", o->settings,
                  "Change a key of the run on purpose, e.g. --set "
                  "critic_optimiser.learning_rate=1e-4 (noted in history.txt; not data.*, "
                  "model.* or training.seed)")
      ->take_all()
      ->allow_extra_args(false);
  app->add_flag("--quiet", o->quiet, "Print no progress");
  return {app, [o] {
            Run run = Run::reopen(o->folder, o->settings);
            const int64_t total = o->steps > 0 ? o->steps : run.recipe().training.steps;
            if (o->steps > 0) run.plan_steps(total);
            if (total <= run.steps_done()) {
              std::cerr << "spar: " << o->folder << " has already done " << run.steps_done()
                        << " steps; ask for more with --steps\n";
              return 0;
            }
            return train_to(run, total, o->quiet);
          }};
}

struct DemoOptions {
  std::string out = "spar-demo";
  int64_t steps = 0;
  bool force = false, quiet = false;
};

Subcommand add_demo(CLI::App& parent) {
  auto o = std::make_shared<DemoOptions>();
  CLI::App* app = parent.add_subcommand(
      "demo",
      "Train the swatches preset (procedural fabric swatches, about three minutes on two\n"
      "cores) into ./spar-demo and say where the pictures are.\nExample: spar demo");
  app->add_option("--out", o->out, "Run folder to create (default ./spar-demo)");
  app->add_flag("--force", o->force,
                "Replace the run in an existing, non-empty folder (removes only the files a run "
                "writes)");
  add_integer_option(*app, "--steps", o->steps, "Generator steps (default: the preset's)", 1,
                     kMostSteps);
  add_threads_option(*app);
  app->add_flag("--quiet", o->quiet, "Print no progress");
  return {app, [o] {
            Recipe recipe = load_recipe("swatches");
            if (o->steps > 0) recipe.training.steps = o->steps;
            Run run = Run::start(o->out, recipe, o->force);
            if (!o->quiet)
              std::cerr << "spar demo: training on " << recipe.data.swatch_count
                        << " procedural fabric swatches for " << recipe.training.steps
                        << " steps into " << o->out << "/\n";
            const int code = train_to(run, recipe.training.steps, o->quiet);
            if (code == 0)
              std::cout << "Pictures: " << run.samples_path(run.steps_done())
                        << " (earlier steps beside it)\nCurves:   " << o->out
                        << "/curves.svg\nMore:     spar sample " << o->out
                        << " -n 64 -o more.png\n";
            return code;
          }};
}

}  // namespace

std::vector<Subcommand> add_training_commands(CLI::App& parent) {
  return {add_demo(parent), add_train(parent), add_resume(parent)};
}

}  // namespace cli
}  // namespace spar
