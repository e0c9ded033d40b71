// Runs in their folders: files written, determinism, exact resume, stopping, saved generators.
#include <unistd.h>

#include <catch2/catch.hpp>
#include <filesystem>
#include <fstream>
#include <sstream>

#include "recipes/run_folder.h"
#include "recipes/run_parts.h"
#include "recipes/saved_generator.h"
#include "recipes/swatches.h"
#include "tests/support.h"

namespace spar {
namespace {

using testing::error_kind_of;
using testing::read_bytes;
using testing::same_bits;
using testing::ScratchDir;
namespace fs = std::filesystem;

// An archive's bytes with the records that name the run and time it blanked, and its run id.
std::pair<std::string, std::string> records_but_id(const std::string& path) {
  Archive a = Archive::read_file(path);
  const std::string id = a.text("run.id");
  a.put_text("run.id", "");
  if (a.contains("elapsed_ms")) a.put_int("elapsed_ms", 0);
  return {a.to_bytes(), id};
}

// A ring8 recipe small enough for a unit test.
Recipe small_points() {
  Recipe r = load_recipe("ring8");
  r.model.width = 16;
  r.training.batch = 16;
  r.training.steps = 40;
  r.output.log_every = 5;
  r.output.sample_every = 10;
  r.output.checkpoint_every = 10;
  r.output.sample_count = 50;
  return r;
}

// A class-conditional DCGAN on a few swatches: data order, labels and batch normalisation
// all take part in the resume check.
Recipe small_images() {
  Recipe r = load_recipe("swatches-conditional");
  r.data.swatch_count = 40;
  r.model.width = 4;
  r.model.latent = 8;
  r.training.batch = 8;
  r.training.steps = 12;
  r.output.log_every = 2;
  r.output.sample_every = 4;
  r.output.checkpoint_every = 4;
  r.output.sample_count = 16;
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
  train(folder, r, r.training.steps);
  for (const char* name :
       {"recipe.toml", "log.csv", "curves.svg", "state.spar", "generator.spar",
        "samples/step-000000.png", "samples/step-000010.png", "samples/step-000040.png"})
    CHECK(fs::exists(fs::path(folder) / name));
  // The resolved recipe reads back as the recipe the run used.
  CHECK(to_toml(load_recipe(folder + "/recipe.toml")) == to_toml(r));
  // log.csv: a header and one row per 5 steps.
  std::stringstream log(read_bytes(folder + "/log.csv"));
  std::string line;
  int rows = -1;
  while (std::getline(log, line)) ++rows;
  CHECK(rows == 40 / 5);
  // An existing run folder is refused unless forced, and nothing in it changes.
  const std::string before = read_bytes(folder + "/generator.spar");
  std::string message;
  CHECK(error_kind_of([&] { Run::start(folder, r, false); }, &message) == ErrorKind::kBadArgument);
  CHECK(message.find(folder + ": is not empty") == 0);
  CHECK(read_bytes(folder + "/generator.spar") == before);
  Run::start(folder, r, true);
  CHECK_FALSE(fs::exists(fs::path(folder) / "samples/step-000040.png"));
}

TEST_CASE("the same seed gives the same generator, bit for bit", "[run]") {
  ScratchDir dir;
  const Recipe r = small_points();
  train(dir.folder("a"), r, 20);
  train(dir.folder("b"), r, 20);
  // Every record but the run's id is the same; the ids differ (two runs, one recipe).
  const auto a = records_but_id(dir.folder("a") + "/generator.spar");
  const auto b = records_but_id(dir.folder("b") + "/generator.spar");
  CHECK(a.first == b.first);
  CHECK(a.second != b.second);
  CHECK(a.second.size() == 16);
  Recipe other = r;
  other.training.seed = 2;
  train(dir.folder("c"), other, 20);
  CHECK(records_but_id(dir.folder("c") + "/generator.spar").first != a.first);
}

TEST_CASE("stopping and resuming equals running straight through", "[run]") {
  for (const Recipe& r : {small_points(), small_images()}) {
    INFO(r.data.source);
    ScratchDir dir;
    const int64_t total = r.training.steps, half = total / 2;
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
    CHECK(records_but_id(dir.folder("straight") + "/generator.spar").first ==
          records_but_id(dir.folder("stopped") + "/generator.spar").first);
    CHECK(records_but_id(dir.folder("straight") + "/state.spar").first ==
          records_but_id(dir.folder("stopped") + "/state.spar").first);
    CHECK(read_bytes(dir.folder("straight") + "/log.csv").size() ==
          read_bytes(dir.folder("stopped") + "/log.csv").size());
  }
}

TEST_CASE("a saved generator samples, one from another architecture is refused", "[run]") {
  ScratchDir dir;
  const Recipe r = small_images();
  train(dir.folder("run"), r, 4);
  SavedGenerator g = load_generator(dir.folder("run"));
  CHECK(g.step == 4);
  CHECK(g.class_names == swatch_families());
  const Tensor<float> samples = generate_samples(g, 5, 3, 2);
  CHECK(samples.shape() == Shape{5, 3, 32, 32});
  CHECK(same_bits(samples, generate_samples(g, 5, 3, 2)));  // the seed fixes the samples
  // The same from the latent vectors and labels given by hand (the in-process API).
  const Tensor<float> z = latent_vectors(g, 5, 3);
  CHECK(z.shape() == Shape{5, g.pair.latent});
  CHECK(same_bits(generate_from(g, z, {2, 2, 2, 2, 2}), samples));
  CHECK(same_bits(latent_vectors(g, 8, 3).leading_slice(0, 5), z));  // vector i: seed and i alone
  CHECK(error_kind_of([&] { generate_from(g, z, {2, 2}); }) == ErrorKind::kBadArgument);
  CHECK(error_kind_of([&] { generate_from(g, z, {2, 2, 2, 2, 99}); }) == ErrorKind::kBadArgument);
  CHECK(error_kind_of([&] {
          generate_from(g, latent_vectors(g, 5, 3).reshape({5, 1, g.pair.latent}), {2, 2, 2, 2, 2});
        }) == ErrorKind::kBadShape);
  CHECK(error_kind_of([&] {
          generate_samples(g, 5, 3, static_cast<int64_t>(swatch_families().size()));
        }) == ErrorKind::kBadArgument);

  // The same tensors under a recipe with wider networks: every shape disagrees.
  Archive a = Archive::read_file(dir.folder("run") + "/generator.spar");
  Recipe wider = r;
  wider.model.width = 8;
  a.put_text("recipe", to_toml(wider));
  a.write_file(dir.file("other.spar"));
  std::string message;
  CHECK(error_kind_of([&] { load_generator(dir.file("other.spar")); }, &message) ==
        ErrorKind::kCorruptCheckpoint);
  CHECK(message.find("generator/") != std::string::npos);

  // A file of a run format newer than this code knows is refused, naming the format.
  Archive newer = Archive::read_file(dir.folder("run") + "/generator.spar");
  CHECK(newer.integer("run.format") == kRunFormat);
  newer.put_int("run.format", kRunFormat + 1);
  newer.write_file(dir.file("newer.spar"));
  CHECK(error_kind_of([&] { load_generator(dir.file("newer.spar")); }, &message) ==
        ErrorKind::kCorruptCheckpoint);
  CHECK(message.find("run format " + std::to_string(kRunFormat + 1)) != std::string::npos);
}

// ---- What a run folder promises (docs/reliability.md) ----

void write_text(const std::string& path, const std::string& text) {
  std::ofstream out(path, std::ios::binary);
  out << text;
}

TEST_CASE("a forced start removes only what a run writes, stale temporaries go too", "[run]") {
  ScratchDir dir;
  const Recipe r = small_points();
  const std::string folder = dir.folder("run");
  train(folder, r, 10);
  write_text(folder + "/notes.txt", "mine");
  write_text(folder + "/samples/favourite.png", "mine too");
  write_text(folder + "/state.spar.tmp-12345", "left by a kill -9");
  write_text(folder + "/samples/step-000010.png.tmp-99", "left by a kill -9");
  write_text(folder + "/state.spar.tmp-old", "not ours: no process id");
  std::string message;
  CHECK(error_kind_of([&] { Run::start(folder, r, false); }, &message) == ErrorKind::kBadArgument);
  CHECK(message.find("--force removes only the files a run writes") != std::string::npos);
  Run::start(folder, r, true);
  CHECK(read_bytes(folder + "/notes.txt") == "mine");
  CHECK(read_bytes(folder + "/samples/favourite.png") == "mine too");
  CHECK(fs::exists(folder + "/state.spar.tmp-old"));
  CHECK_FALSE(fs::exists(folder + "/state.spar.tmp-12345"));
  CHECK_FALSE(fs::exists(folder + "/samples/step-000010.png.tmp-99"));
  CHECK_FALSE(fs::exists(folder + "/samples/step-000010.png"));  // the old run's picture
  CHECK(fs::exists(folder + "/samples/step-000000.png"));
}

TEST_CASE("reopen writes generator.spar again when a kill left it a checkpoint behind", "[run]") {
  // The kill between the two writes of a checkpoint (state.spar first): cli_kill_anywhere met
  // it at the last checkpoint, where resume has nothing left to train.
  ScratchDir dir;
  const std::string folder = dir.folder("run");
  std::string behind, current;
  {
    Run run = Run::start(folder, small_points(), false);
    REQUIRE(run.train_until(30, nullptr, nullptr).end == RunEnd::kFinished);
    behind = read_bytes(folder + "/generator.spar");  // step 30
    REQUIRE(run.train_until(40, nullptr, nullptr).end == RunEnd::kFinished);
    current = read_bytes(folder + "/generator.spar");  // step 40
  }
  REQUIRE(behind != current);
  for (const bool missing : {false, true}) {
    if (missing)
      fs::remove(folder + "/generator.spar");
    else
      write_text(folder + "/generator.spar", behind);
    Run run = Run::reopen(folder);
    CHECK(run.steps_done() == 40);
    CHECK(read_bytes(folder + "/generator.spar") == current);
  }
}

TEST_CASE("reopen removes stale temporaries and keeps the run's identity", "[run]") {
  ScratchDir dir;
  const std::string folder = dir.folder("run");
  train(folder, small_points(), 10);
  const std::string id = Archive::read_file(folder + "/state.spar").text("run.id");
  CHECK(read_bytes(folder + "/recipe.toml").rfind("# spar run " + id + ", recipe ", 0) == 0);
  write_text(folder + "/generator.spar.tmp-4242", "partial");
  {
    Run run = Run::reopen(folder);
    CHECK(run.run_id() == id);
    CHECK_FALSE(fs::exists(folder + "/generator.spar.tmp-4242"));
    // A longer plan written to recipe.toml, then a kill before the next checkpoint: the file
    // spar wrote lags nothing a user did, so the next resume is not refused.
    run.plan_steps(16);
  }
  Run again = Run::reopen(folder);
  CHECK(again.steps_done() == 10);
}

TEST_CASE("one writer per run folder", "[run]") {
  ScratchDir dir;
  const std::string folder = dir.folder("run");
  Run first = Run::start(folder, small_points(), false);
  std::string message;
  CHECK(error_kind_of([&] { Run::start(folder, small_points(), true); }, &message) ==
        ErrorKind::kBadArgument);
  CHECK(message.find("(process " + std::to_string(::getpid()) + ") is writing this run") !=
        std::string::npos);
  CHECK(error_kind_of([&] { Run::reopen(folder); }) == ErrorKind::kBadArgument);
  CHECK(fs::exists(folder + "/state.spar"));  // --force did not remove a held run
}

TEST_CASE("a foreign state.spar and an edited recipe.toml are refused on resume", "[run]") {
  ScratchDir dir;
  const std::string a = dir.folder("a"), b = dir.folder("b");
  train(a, small_points(), 10);
  train(b, small_points(), 10);  // the same recipe and seed: only the run ids tell them apart
  fs::copy_file(a + "/state.spar", b + "/state.spar", fs::copy_options::overwrite_existing);
  std::string message;
  CHECK(error_kind_of([&] { Run::reopen(b); }, &message) == ErrorKind::kBadArgument);
  const std::string id_a = Archive::read_file(a + "/state.spar").text("run.id");
  const std::string id_b = Archive::read_file(b + "/generator.spar").text("run.id");
  CHECK(message.find("belongs to run " + id_a) != std::string::npos);
  CHECK(message.find("holds run " + id_b) != std::string::npos);

  // An edit: refused naming the key and both values, unless asked for with a setting.
  std::string toml = read_bytes(a + "/recipe.toml");
  const std::string from = "learning_rate = 0.001", to = "learning_rate = 0.002";
  REQUIRE(toml.find(from) != std::string::npos);
  toml.replace(toml.find(from), from.size(), to);
  write_text(a + "/recipe.toml", toml);
  CHECK(error_kind_of([&] { Run::reopen(a); }, &message) == ErrorKind::kBadArgument);
  INFO(message);
  CHECK(message.find("edited since the run wrote it") != std::string::npos);
  CHECK(message.find("optimiser.learning_rate (0.001 → 0.002)") != std::string::npos);
  const std::string key =
      message.substr(message.find("it: ") + 4, message.find(" (") - message.find("it: ") - 4);
  Run changed = Run::reopen(a, {key + "=0.002"});
  CHECK(read_bytes(a + "/history.txt") ==
        "step 10: " + key + " (0.001 → 0.002), by spar resume --set\n");
  CHECK(changed.train_until(12, nullptr, nullptr).end == RunEnd::kFinished);
  // Keys that describe what was trained cannot change.
  CHECK(error_kind_of([&] { Run::reopen(b, {"model.width=32"}); }, &message) ==
        ErrorKind::kBadArgument);
}

TEST_CASE("a conditional model on a source without labels is refused naming the key", "[run]") {
  Recipe r = small_points();  // ring8: endless points, no classes
  r.model.conditional = true;
  std::string message;
  CHECK(error_kind_of([&] { make_data_source(r); }, &message) == ErrorKind::kBadRecipe);
  CHECK(message == "model.conditional: needs labelled data, and ring8 has no labels");
}

TEST_CASE("data paths are stored absolute, a moved data file names data.path", "[run]") {
  ScratchDir dir;
  const std::string data = dir.folder("data"), recipes = dir.folder("recipes");
  std::string rows;
  for (int i = 0; i < 40; ++i) rows += std::to_string(i % 7) + "," + std::to_string(i % 5) + "\n";
  write_text(data + "/points.csv", rows);
  write_text(recipes + "/table.toml",
             "[data]\nsource = \"table\"\npath = \"../data/points.csv\"\n"
             "[model]\nkind = \"mlp\"\nwidth = 8\nlatent = 4\n[training]\nbatch = 8\n");
  const Recipe r = load_recipe(recipes + "/table.toml");
  CHECK(fs::path(r.data.path).is_absolute());
  CHECK(fs::equivalent(r.data.path, data + "/points.csv"));
  train(dir.folder("run"), r, 4);
  fs::rename(data + "/points.csv", data + "/moved.csv");
  std::string message;
  CHECK(error_kind_of([&] { Run::reopen(dir.folder("run")); }, &message) == ErrorKind::kBadRecipe);
  CHECK(message.find("data.path") != std::string::npos);
  CHECK(message.find(r.data.path) != std::string::npos);
}

TEST_CASE("a non-finite loss stops the run naming it and the kept checkpoint's step", "[run]") {
  // Regression: least-squares targets of 1e30 logged an infinite critic loss on every row
  // and finished normally. ½(D(x) − 1e30)² overflows float32 (FLT_MAX ≈ 3.4e38).
  ScratchDir dir;
  Recipe r = small_points();
  r.objective.name = "least-squares";
  r.objective.least_squares_real = 1e30;
  r.output.checkpoint_every = 3;
  Run run = Run::start(dir.folder("run"), r, false);
  const RunResult result = run.train_until(20, nullptr, nullptr);
  CHECK(result.end == RunEnd::kNumericalFailure);
  INFO(result.message);
  CHECK(result.message.rfind("step 1: the critic loss is inf", 0) == 0);
  CHECK(result.step == 0);
  CHECK(Archive::read_file(dir.folder("run") + "/state.spar").integer("step") == 0);
}

}  // namespace
}  // namespace spar
