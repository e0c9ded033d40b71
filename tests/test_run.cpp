// Runs in their folders: files written, determinism, exact resume, stopping, saved generators.
#include <catch2/catch.hpp>
#include <filesystem>
#include <fstream>
#include <sstream>

#include "recipes/run.h"
#include "recipes/swatches.h"
#include "tests/support.h"

namespace spar {
namespace {

using testing::error_kind_of;
using testing::same_bits;
using testing::ScratchDir;
namespace fs = std::filesystem;

std::string bytes_of(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  std::stringstream s;
  s << in.rdbuf();
  return s.str();
}

// A ring8 recipe small enough for a unit test.
Recipe small_points() {
  Recipe r = load_recipe("ring8");
  r.width = 16;
  r.batch = 16;
  r.steps = 40;
  r.log_every = 5;
  r.sample_every = 10;
  r.checkpoint_every = 10;
  r.sample_count = 50;
  return r;
}

// A class-conditional DCGAN on a few swatches: data order, labels and batch normalisation
// all take part in the resume check.
Recipe small_images() {
  Recipe r = load_recipe("swatches-conditional");
  r.swatch_count = 40;
  r.width = 4;
  r.latent = 8;
  r.batch = 8;
  r.steps = 12;
  r.log_every = 2;
  r.sample_every = 4;
  r.checkpoint_every = 4;
  r.sample_count = 16;
  return r;
}

void train(const std::string& folder, const Recipe& r, int64_t steps) {
  Run run = Run::start(folder, r, false);
  CHECK(run.train_until(steps, nullptr, nullptr).end == RunEnd::kFinished);
}

TEST_CASE("a run writes its folder: recipe, log, samples, curves, checkpoints", "[run]") {
  ScratchDir dir;
  const std::string folder = dir.folder("run");
  const Recipe r = small_points();
  train(folder, r, r.steps);
  for (const char* name :
       {"recipe.toml", "log.csv", "curves.svg", "state.spar", "generator.spar",
        "samples/step-000000.png", "samples/step-000010.png", "samples/step-000040.png"})
    CHECK(fs::exists(fs::path(folder) / name));
  // The resolved recipe reads back as the recipe the run used.
  CHECK(to_toml(load_recipe(folder + "/recipe.toml")) == to_toml(r));
  // log.csv: a header and one row per 5 steps.
  std::stringstream log(bytes_of(folder + "/log.csv"));
  std::string line;
  int rows = -1;
  while (std::getline(log, line)) ++rows;
  CHECK(rows == 40 / 5);
  // An existing run folder is refused unless forced, and nothing in it changes.
  const std::string before = bytes_of(folder + "/generator.spar");
  std::string message;
  CHECK(error_kind_of([&] { Run::start(folder, r, false); }, &message) == ErrorKind::kBadArgument);
  CHECK(message.find(folder + ": is not empty") == 0);
  CHECK(bytes_of(folder + "/generator.spar") == before);
  Run::start(folder, r, true);
  CHECK_FALSE(fs::exists(fs::path(folder) / "samples/step-000040.png"));
}

TEST_CASE("the same seed gives the same generator, bit for bit", "[run]") {
  ScratchDir dir;
  const Recipe r = small_points();
  train(dir.folder("a"), r, 20);
  train(dir.folder("b"), r, 20);
  CHECK(bytes_of(dir.folder("a") + "/generator.spar") ==
        bytes_of(dir.folder("b") + "/generator.spar"));
  Recipe other = r;
  other.seed = 2;
  train(dir.folder("c"), other, 20);
  CHECK(bytes_of(dir.folder("a") + "/generator.spar") !=
        bytes_of(dir.folder("c") + "/generator.spar"));
}

TEST_CASE("stopping and resuming equals running straight through", "[run]") {
  for (const Recipe& r : {small_points(), small_images()}) {
    INFO(r.data_source);
    ScratchDir dir;
    const int64_t total = r.steps, half = total / 2;
    train(dir.folder("straight"), r, total);
    {
      // Stop after `half` steps through the stop flag, as Ctrl-C does.
      Run run = Run::start(dir.folder("stopped"), r, false);
      std::atomic<bool> stop{false};
      const RunResult result = run.train_until(total, &stop, [&](const RunProgress& p) {
        if (p.step == half) stop = true;
      });
      CHECK(result.end == RunEnd::kInterrupted);
      CHECK(result.step == half);
    }
    Run resumed = Run::reopen(dir.folder("stopped"));
    CHECK(resumed.steps_done() == half);
    CHECK(resumed.train_until(total, nullptr, nullptr).end == RunEnd::kFinished);
    CHECK(bytes_of(dir.folder("straight") + "/generator.spar") ==
          bytes_of(dir.folder("stopped") + "/generator.spar"));
    CHECK(bytes_of(dir.folder("straight") + "/log.csv").size() ==
          bytes_of(dir.folder("stopped") + "/log.csv").size());
  }
}

TEST_CASE("a saved generator samples; one from another architecture is refused", "[run]") {
  ScratchDir dir;
  const Recipe r = small_images();
  train(dir.folder("run"), r, 4);
  SavedGenerator g = load_generator(dir.folder("run"));
  CHECK(g.step == 4);
  CHECK(g.class_names == swatch_families());
  const Tensor<float> samples = generate_samples(g, 5, 3, 2);
  CHECK(samples.shape() == Shape{5, 3, 32, 32});
  CHECK(same_bits(samples, generate_samples(g, 5, 3, 2)));  // the seed fixes the samples
  CHECK(error_kind_of([&] {
          generate_samples(g, 5, 3, static_cast<int64_t>(swatch_families().size()));
        }) == ErrorKind::kBadArgument);

  // The same tensors under a recipe with wider networks: every shape disagrees.
  Archive a = Archive::read_file(dir.folder("run") + "/generator.spar");
  Recipe wider = r;
  wider.width = 8;
  a.put_text("recipe", to_toml(wider));
  a.write_file(dir.file("other.spar"));
  std::string message;
  CHECK(error_kind_of([&] { load_generator(dir.file("other.spar")); }, &message) ==
        ErrorKind::kCorruptCheckpoint);
  CHECK(message.find("generator.") != std::string::npos);
}

}  // namespace
}  // namespace spar
