#include "recipes/run.h"

#include <chrono>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <sstream>

#include "engine/buffer_pool.h"
#include "engine/error.h"
#include "recipes/mixtures.h"
#include "recipes/pictures.h"
#include "recipes/plots.h"
#include "recipes/swatches.h"

namespace spar {
namespace fs = std::filesystem;
namespace {

const char* const kStateFile = "state.spar";
const char* const kGeneratorFile = "generator.spar";
const char* const kLogHeader = "step,seconds,critic_loss,generator_loss,real_score,fake_score";

bool is_mixture(const Recipe& r) {
  return r.data_source == "ring8" || r.data_source == "grid25";
}

[[noreturn]] void bad_recipe(const std::string& key, const std::string& why) {
  raise(ErrorKind::kBadRecipe, key + ": " + why);
}

void require_path(const Recipe& r) {
  if (r.data_path.empty())
    bad_recipe("data.path", "required when data.source is \"" + r.data_source + "\"");
}

// Records describing what the networks are for: sample shape, classes and their names.
void put_shape_and_classes(Archive& a, const Shape& shape, const std::vector<std::string>& names) {
  a.put_int("sample.rank", shape.rank());
  for (int i = 0; i < shape.rank(); ++i) a.put_int("sample.dim" + std::to_string(i), shape[i]);
  std::string joined;
  for (const std::string& n : names) joined += n + "\n";
  a.put_text("classes", joined);
}

// The recorded shape of one sample, checked before anything is built from it: rank 1 (points,
// table rows) or 3 (images), every extent at least 1, and the count within the engine's limit.
Shape shape_from(const Archive& a) {
  const int64_t rank = a.integer("sample.rank");
  if (rank != 1 && rank != 3)
    raise(ErrorKind::kCorruptCheckpoint,
          a.source() + ": record 'sample.rank' is " + std::to_string(rank) + " (1 or 3 expected)");
  std::vector<int64_t> dims;
  for (int64_t i = 0; i < rank; ++i) {
    const std::string name = "sample.dim" + std::to_string(i);
    dims.push_back(a.integer(name));
    if (dims.back() < 1)
      raise(ErrorKind::kCorruptCheckpoint,
            a.source() + ": record '" + name + "' is " + std::to_string(dims.back()));
  }
  if (checked_element_count(dims.data(), dims.size()) < 0)
    raise(ErrorKind::kCorruptCheckpoint, a.source() +
                                             ": records 'sample.dim*' describe more than " +
                                             std::to_string(kMaxElements) + " values per sample");
  return Shape(dims.begin(), dims.end());
}

// The bytes of float tensors a file holds: what a network built from its recipe may take,
// with room for the initial weights drawn before the records replace them and for a critic
// of about the generator's size (built with it, never saved in generator.spar).
int64_t network_budget(const Archive& a) {
  int64_t bytes = 0;
  for (const std::string& name : a.names())
    if (a.kind(name) == RecordKind::kFloat32Tensor)
      bytes += a.tensor_shape(name).numel() * static_cast<int64_t>(sizeof(float));
  return 4 * bytes + (int64_t{64} << 20);
}

std::vector<std::string> classes_from(const Archive& a) {
  std::vector<std::string> names;
  std::stringstream in(a.text("classes"));
  for (std::string line; std::getline(in, line);) names.push_back(line);
  return names;
}

// The latent vectors (and labels) every sample picture of a run is drawn from.
Tensor<float> preview_latents(const Recipe& r, int64_t latent) {
  Rng rng(static_cast<uint64_t>(r.seed), derive_stream(static_cast<uint64_t>(r.seed), "preview"));
  return rng.normal<float>({r.sample_count, latent});
}
std::vector<int64_t> labels_in_turn(int64_t n, int64_t classes) {
  std::vector<int64_t> labels;
  for (int64_t i = 0; i < n && classes > 0; ++i) labels.push_back(i % classes);
  return labels;
}

// Columns of a sample grid: one per class for a conditional run with few classes (so each
// column is a class), otherwise about square.
int64_t grid_columns(int64_t n, int64_t classes) {
  if (classes > 0 && classes <= 16) return classes;
  return std::max<int64_t>(1, static_cast<int64_t>(std::ceil(std::sqrt(static_cast<double>(n)))));
}

std::string step_name(int64_t step) {
  char buf[32];
  std::snprintf(buf, sizeof buf, "step-%06lld.png", static_cast<long long>(step));
  return buf;
}

struct LogRow {
  int64_t step;
  double seconds, critic_loss, generator_loss, real_score, fake_score;
};

std::vector<LogRow> read_log(const std::string& path) {
  std::vector<LogRow> rows;
  std::ifstream in(path);
  std::string line;
  std::getline(in, line);  // header
  while (std::getline(in, line)) {
    LogRow r{};
    long long step = 0;
    if (std::sscanf(line.c_str(), "%lld,%lf,%lf,%lf,%lf,%lf", &step, &r.seconds, &r.critic_loss,
                    &r.generator_loss, &r.real_score, &r.fake_score) == 6) {
      r.step = step;
      rows.push_back(r);
    }
  }
  return rows;
}

std::string log_line(const LogRow& r) {
  char buf[256];
  std::snprintf(buf, sizeof buf, "%lld,%.3f,%.6g,%.6g,%.6g,%.6g", static_cast<long long>(r.step),
                r.seconds, r.critic_loss, r.generator_loss, r.real_score, r.fake_score);
  return buf;
}

void write_text_atomically(const std::string& path, const std::string& text) {
  write_file_atomically(path, text.data(), text.size());
}

}  // namespace

bool has_pictures(const Recipe& r, const Shape& sample_shape) {
  return sample_shape.rank() != 1 || is_mixture(r) || r.picture_width > 0;
}

void write_samples_table(const Tensor<float>& samples, const std::string& path) {
  std::string text;
  const int64_t n = samples.shape()[0], width = samples.numel() / std::max<int64_t>(1, n);
  char buf[32];
  for (int64_t i = 0; i < n; ++i)
    for (int64_t j = 0; j < width; ++j) {
      std::snprintf(buf, sizeof buf, "%.6g", static_cast<double>(samples.data()[i * width + j]));
      text += buf;
      text += j + 1 < width ? "," : "\n";
    }
  write_text_atomically(path, text);
}

// ---- From a recipe to the pieces of a run ----

Dataset load_dataset(const Recipe& r) {
  const uint64_t seed = static_cast<uint64_t>(r.seed);
  Dataset data;
  if (r.data_source == "swatches") {
    SwatchOptions o;
    o.count = r.swatch_count;
    o.size = r.image_size;
    o.seed = seed;
    data = make_swatches(o);
  } else if (r.data_source == "images") {
    require_path(r);
    ImageFolderOptions o;
    o.size = r.image_size;
    o.channels = r.channels;
    o.pixel_limit = r.pixel_limit;
    if (o.channels == 2) bad_recipe("data.channels", "must be 1 or 3, not 2");
    data = load_image_folder(r.data_path, o);
  } else if (r.data_source == "idx") {
    require_path(r);
    if (!r.class_names.empty() && r.data_labels.empty())
      bad_recipe("data.class_names", "names classes, but data.labels gives no label file");
    data = load_idx_dataset(r.data_path, r.data_labels, r.class_names);
  } else if (r.data_source == "table") {
    require_path(r);
    TableOptions o;
    o.label_column = r.table_labelled ? r.label_column : TableOptions::kNoLabel;
    o.low = r.table_low;
    o.high = r.table_high;
    o.header = r.table_header;
    data = load_table(r.data_path, o);
    if (!r.class_names.empty()) {
      if (static_cast<int64_t>(r.class_names.size()) != data.classes())
        bad_recipe("data.class_names", std::to_string(r.class_names.size()) +
                                           " names for the table's " +
                                           std::to_string(data.classes()) + " classes");
      data.class_names = r.class_names;
    }
  } else {
    bad_recipe("data.source", "\"" + r.data_source + "\" is not a dataset");
  }
  return data;
}

std::unique_ptr<DataSource> make_data_source(const Recipe& r) {
  const uint64_t seed = static_cast<uint64_t>(r.seed);
  if (is_mixture(r)) return std::make_unique<MixtureSource>(mixture_by_name(r.data_source), seed);
  Dataset data = load_dataset(r);
  if (r.conditional && data.classes() == 0)
    bad_recipe("model.conditional",
               "needs labelled data, and " + data.origin + " has no labels" +
                   (r.data_source == "images" ? " (put each class in its own sub-folder)" : ""));
  if (!r.conditional) {  // an unconditional model ignores the labels
    data.labels.clear();
    data.class_names.clear();
  }
  return std::make_unique<DatasetSource>(std::move(data), seed);
}

GanPair make_gan_pair(const Recipe& r, const Shape& shape, int64_t classes) {
  const uint64_t seed = static_cast<uint64_t>(r.seed);
  Rng rng(seed, derive_stream(seed, "initialisation"));
  const int64_t conditioned = r.conditional ? classes : 0;
  if (r.model == "mlp") {
    if (shape.rank() != 1)
      bad_recipe("model.kind", "mlp takes points or table rows, but the data are " + shape.str() +
                                   " images; use \"dcgan\"");
    MlpPairOptions o;
    o.latent = r.latent;
    o.data = shape[0];
    o.width = r.width;
    o.depth = static_cast<int>(r.depth);
    o.spectral_norm = r.spectral_norm;
    o.classes = conditioned;
    return make_mlp_pair(o, rng);
  }
  if (shape.rank() != 3 || shape[1] != shape[2])
    bad_recipe("model.kind", "dcgan takes square images, but the samples have shape " +
                                 shape.str() + "; use \"mlp\"");
  DcganPairOptions o;
  o.image_size = shape[1];
  o.channels = shape[0];
  o.latent = r.latent;
  o.width = r.width;
  o.spectral_norm = r.spectral_norm;
  o.classes = conditioned;
  try {
    return make_dcgan_pair(o, rng);
  } catch (const Error& e) {
    bad_recipe("data.image_size", e.what());
  }
}

TrainingOptions training_options(const Recipe& r) {
  TrainingOptions o;
  o.objective = objective_from_string(r.objective);
  o.least_squares = {r.least_squares_fake, r.least_squares_real, r.least_squares_generator};
  o.gradient_penalty = r.gradient_penalty;
  o.r1 = r.r1;
  o.critic_steps = static_cast<int>(r.critic_steps);
  o.batch = r.batch;
  auto adam = [](const Recipe::AdamKeys& k) {
    return AdamOptions{k.learning_rate, k.beta1, k.beta2, k.epsilon, k.weight_decay};
  };
  o.generator_optimiser = adam(r.generator_optimiser);
  o.critic_optimiser = adam(r.critic_optimiser);
  o.average_decay = r.average_decay;
  o.seed = static_cast<uint64_t>(r.seed);
  return o;
}

// ---- A run in its folder ----

Run::Run(std::string folder, Recipe recipe)
    : folder_(std::move(folder)), recipe_(std::move(recipe)) {
  std::unique_ptr<DataSource> data = make_data_source(recipe_);
  sample_shape_ = data->sample_shape();
  if (auto* set = dynamic_cast<DatasetSource*>(data.get()))
    class_names_ = set->dataset().class_names;
  trainer_ = std::make_unique<TrainingRun>(make_gan_pair(recipe_, sample_shape_, data->classes()),
                                           std::move(data), training_options(recipe_));
}

Run Run::start(const std::string& folder, const Recipe& recipe, bool force) {
  std::error_code error;
  if (fs::exists(folder) && !fs::is_directory(folder))
    raise(ErrorKind::kBadArgument, folder + ": exists and is not a folder");
  const bool occupied = fs::exists(folder) && !fs::is_empty(folder);
  if (occupied && !force)
    raise(
        ErrorKind::kBadArgument,
        folder + ": is not empty; choose another folder, or pass --force to replace the run in it");
  // Load the data and build the networks before touching the disk, so a recipe or data error
  // leaves an earlier run in the folder as it was.
  Run run(folder, recipe);
  if (occupied) {
    for (const char* name : {"recipe.toml", "log.csv", "curves.svg", kStateFile, kGeneratorFile})
      fs::remove(fs::path(folder) / name, error);
    fs::remove_all(fs::path(folder) / "samples", error);
  }
  fs::create_directories(fs::path(folder) / "samples", error);
  if (error) raise(ErrorKind::kIo, folder + ": cannot be created: " + error.message());
  write_text_atomically((fs::path(folder) / "recipe.toml").string(), to_toml(recipe));
  write_text_atomically((fs::path(folder) / "log.csv").string(), std::string(kLogHeader) + "\n");
  run.save_checkpoints();
  run.write_samples();
  return run;
}

Run Run::reopen(const std::string& folder) {
  const std::string state_path = (fs::path(folder) / kStateFile).string();
  if (!fs::exists(state_path))
    raise(ErrorKind::kBadArgument, folder + ": holds no " + kStateFile + " (not a run folder?)");
  const Archive state = Archive::read_file(state_path);
  Run run(folder, parse_recipe(state.text("recipe"), state_path + " (its recipe)"));
  run.trainer_->load(state);
  run.elapsed_before_ = static_cast<double>(state.integer("elapsed_ms")) / 1000;
  run.elapsed_ = run.elapsed_before_;
  // Rows logged after the checkpoint belong to steps that will be redone: drop them.
  const std::string log_path = (fs::path(folder) / "log.csv").string();
  std::string text = std::string(kLogHeader) + "\n";
  for (const LogRow& row : read_log(log_path))
    if (row.step <= run.steps_done()) text += log_line(row) + "\n";
  write_text_atomically(log_path, text);
  fs::create_directories(fs::path(folder) / "samples");
  return run;
}

void Run::plan_steps(int64_t total) {
  recipe_.steps = total;
  write_text_atomically((fs::path(folder_) / "recipe.toml").string(), to_toml(recipe_));
}

std::string Run::samples_path(int64_t step) const {
  return (fs::path(folder_) / "samples" / step_name(step)).string();
}

void Run::save_checkpoints() {
  Archive state;
  state.put_text("kind", "spar training state");
  state.put_text("recipe", to_toml(recipe_));
  put_shape_and_classes(state, sample_shape_, class_names_);
  state.put_int("elapsed_ms", static_cast<int64_t>(std::llround(elapsed_ * 1000)));
  trainer_->save(state);
  state.write_file((fs::path(folder_) / kStateFile).string());

  Archive generator;
  generator.put_text("kind", "spar generator");
  generator.put_text("recipe", to_toml(recipe_));
  put_shape_and_classes(generator, sample_shape_, class_names_);
  generator.put_int("step", steps_done());
  trainer_->save_generator(generator);
  generator.write_file((fs::path(folder_) / kGeneratorFile).string());
}

void Run::write_log_row(const StepReport& s) {
  std::ofstream out((fs::path(folder_) / "log.csv").string(), std::ios::app);
  out << log_line({s.step, elapsed_, s.critic_loss, s.generator_loss, s.real_score, s.fake_score})
      << "\n";
  if (!out) raise(ErrorKind::kIo, folder_ + "/log.csv: cannot be appended to");
}

void Run::write_samples() {
  const int64_t classes = static_cast<int64_t>(class_names_.size());
  const Tensor<float> z = preview_latents(recipe_, trainer_->pair().latent);
  const Tensor<float> samples =
      trainer_->generate(z, labels_in_turn(recipe_.sample_count, classes));
  if (!has_pictures(recipe_, sample_shape_)) {
    write_samples_table(samples, fs::path(samples_path(steps_done())).replace_extension(".csv"));
    return;
  }
  write_samples_picture(recipe_, samples, grid_columns(recipe_.sample_count, classes),
                        samples_path(steps_done()));
}

void Run::write_curves() {
  const std::vector<LogRow> rows = read_log((fs::path(folder_) / "log.csv").string());
  PlotSeries critic{"critic loss", {}, {}}, generator{"generator loss", {}, {}};
  PlotSeries real{"on real samples", {}, {}}, fake{"on generated samples", {}, {}};
  for (const LogRow& r : rows) {
    const double x = static_cast<double>(r.step);
    critic.x.push_back(x), critic.y.push_back(r.critic_loss);
    generator.x.push_back(x), generator.y.push_back(r.generator_loss);
    real.x.push_back(x), real.y.push_back(r.real_score);
    fake.x.push_back(x), fake.y.push_back(r.fake_score);
  }
  const bool logistic = recipe_.objective == "minimax" || recipe_.objective == "non-saturating";
  const std::vector<PlotPanel> panels = {
      {"losses", "loss", {critic, generator}},
      {logistic ? "critic outputs: mean D(x) and D(G(z)), the probability of \"real\""
                : "critic outputs: mean score",
       logistic ? "probability" : "score",
       {real, fake}},
  };
  write_svg((fs::path(folder_) / "curves.svg").string(), line_chart_svg(panels, "generator step"));
}

RunResult Run::train_until(int64_t total_steps, const std::atomic<bool>* stop,
                           const std::function<void(const RunProgress&)>& on_step) {
  using Clock = std::chrono::steady_clock;
  const Clock::time_point begin = Clock::now();
  RunProgress progress;
  progress.total_steps = total_steps;
  RunResult result;
  while (steps_done() < total_steps) {
    if (stop && stop->load()) {
      result.end = RunEnd::kInterrupted;
      break;
    }
    StepReport report;
    try {
      report = trainer_->step();
    } catch (const Error& e) {
      if (e.kind() != ErrorKind::kNumericalFailure) throw;
      result.end = RunEnd::kNumericalFailure;
      result.message = e.what();
      result.step = steps_done();  // the last checkpoint is left as it was
      return result;
    }
    const double seconds = std::chrono::duration<double>(Clock::now() - begin).count();
    elapsed_ = elapsed_before_ + seconds;
    const int64_t step = steps_done();
    if (step % recipe_.log_every == 0 || step == total_steps) write_log_row(report);
    if (step % recipe_.sample_every == 0 || step == total_steps) {
      write_samples();
      write_curves();
    }
    if (step % recipe_.checkpoint_every == 0) save_checkpoints();
    progress.step = step;
    progress.seconds = seconds;
    progress.steps_this_call += 1;
    progress.last = report;
    if (on_step) on_step(progress);
  }
  // At the end, and when stopped: the checkpoints hold the latest step.
  save_checkpoints();
  write_curves();
  result.step = steps_done();
  return result;
}

// ---- The saved generator ----

SavedGenerator load_generator(const std::string& folder_or_file) {
  std::string path = folder_or_file;
  if (fs::is_directory(path)) path = (fs::path(path) / kGeneratorFile).string();
  if (!fs::exists(path))
    raise(ErrorKind::kBadArgument,
          path + ": does not exist (give a run folder or its " + kGeneratorFile + ")");
  const Archive a = Archive::read_file(path);
  if (!a.contains("kind") || a.kind("kind") != RecordKind::kText ||
      a.text("kind") != "spar generator")
    raise(ErrorKind::kCorruptCheckpoint,
          path + ": is not a saved generator (a run folder's " + kGeneratorFile + ")");
  SavedGenerator g;
  g.recipe = parse_recipe(a.text("recipe"), path + " (its recipe)");
  g.step = a.integer("step");
  g.sample_shape = shape_from(a);
  g.class_names = classes_from(a);
  if (static_cast<int64_t>(g.class_names.size()) > kMaxClasses)
    raise(ErrorKind::kCorruptCheckpoint,
          path + ": record 'classes' names " + std::to_string(g.class_names.size()) +
              " classes (at most " + std::to_string(kMaxClasses) + ")");
  {
    // A crafted recipe (model.width 4096, model.depth 32) must not build gigabytes of network
    // before its first tensor is found not to fit: the networks may take only what the file's
    // tensors could fill.
    PoolLimit limit(network_budget(a), ErrorKind::kCorruptCheckpoint,
                    path +
                        ": its recipe describes networks far larger than the tensors it holds "
                        "(model.width " +
                        std::to_string(g.recipe.width) + ", model.depth " +
                        std::to_string(g.recipe.depth) + ", model.latent " +
                        std::to_string(g.recipe.latent) + ")");
    g.pair = make_gan_pair(g.recipe, g.sample_shape, static_cast<int64_t>(g.class_names.size()));
  }
  g.pair.generator->load(a, "generator");
  return g;
}

Tensor<float> generate_samples(SavedGenerator& g, int64_t n, uint64_t seed, int64_t class_index) {
  const int64_t classes = g.pair.classes;
  if (class_index >= classes && classes > 0)
    raise(ErrorKind::kBadArgument, "class " + std::to_string(class_index) +
                                       " does not exist; the generator has classes 0 to " +
                                       std::to_string(classes - 1));
  if (class_index >= 0 && classes == 0)
    raise(ErrorKind::kBadArgument, "this generator is not class-conditional; leave out the class");
  Rng rng(seed, derive_stream(seed, "sampling"));
  const Tensor<float> z = rng.normal<float>({n, g.pair.latent});
  std::vector<int64_t> labels = labels_in_turn(n, classes);
  if (class_index >= 0) labels.assign(static_cast<size_t>(n), class_index);
  NoRecordScope sampling;
  Context<float> eval(nullptr, false);
  return run_generator(g.pair, Var<float>(z), labels, eval).value();
}

void write_samples_picture(const Recipe& r, const Tensor<float>& samples, int64_t columns,
                           const std::string& path) {
  if (is_mixture(r)) {
    const Mixture m = mixture_by_name(r.data_source);
    double extent = 0;
    for (const auto& [x, y] : m.means) extent = std::max({extent, std::abs(x), std::abs(y)});
    write_png(path, scatter_picture(samples, m.means, extent * 1.5, 512));
    return;
  }
  Tensor<float> images = samples;
  // Small images are enlarged (pixels repeated) to at least 64 pixels a side, to be seen.
  int64_t zoom = samples.shape().rank() == 4 ? std::max<int64_t>(1, 64 / samples.shape()[3]) : 1;
  if (samples.shape().rank() == 2) {  // table rows, drawn as pictures when asked
    const int64_t features = samples.shape()[1];
    const int64_t w = r.picture_width;
    if (w <= 0 || features % w != 0)
      raise(ErrorKind::kBadRecipe, "data.picture_width: " + std::to_string(w) +
                                       " does not divide the " + std::to_string(features) +
                                       " features; samples of tables need a picture width");
    images = samples.reshape({samples.shape()[0], 1, features / w, w});
    zoom = std::max<int64_t>(1, 64 / w);
  }
  write_png(path, tile_pictures(images, columns, 2, zoom));
}

}  // namespace spar
