#include "recipes/run_folder.h"

#include <fcntl.h>
#include <sys/file.h>
#include <unistd.h>

#include <algorithm>
#include <cerrno>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <set>
#include <sstream>

#include "engine/atomic_file.h"
#include "engine/error.h"
#include "recipes/plots.h"
#include "recipes/run_parts.h"
#include "recipes/sample_writers.h"
#include "recipes/saved_generator.h"

namespace spar {
namespace fs = std::filesystem;
namespace {

const char* const kStateFile = "state.spar";
const char* const kRecipeFile = "recipe.toml";
const char* const kLogFile = "log.csv";
const char* const kCurvesFile = "curves.svg";
const char* const kHistoryFile = "history.txt";
const char* const kLockFile = "run.lock";
// Every file a run writes in its folder, besides samples/step-*.{png,csv} and run.lock.
const char* const kRunFiles[] = {kRecipeFile, kLogFile,       kCurvesFile,
                                 kStateFile,  kGeneratorFile, kHistoryFile};
const char* const kLogHeader = "step,seconds,critic_loss,generator_loss,real_score,fake_score";
// recipe.toml's first line names the run: "# spar run <id>, recipe <hash>: ..." (recipe_file_text).
const std::string kRecipeHeader = "# spar run ";

std::string path_in(const std::string& folder, const std::string& name) {
  return (fs::path(folder) / name).string();
}

bool all_digits(const std::string& s) {
  return !s.empty() && std::all_of(s.begin(), s.end(), [](char c) { return c >= '0' && c <= '9'; });
}

// samples/step-NNNNNN.png or .csv
bool is_sample_file(const std::string& name) {
  if (name.size() < 9 || name.rfind("step-", 0) != 0) return false;
  const std::string tail = name.substr(name.size() - 4);
  return (tail == ".png" || tail == ".csv") && all_digits(name.substr(5, name.size() - 9));
}
bool is_run_file(const std::string& name) {
  return std::find_if(std::begin(kRunFiles), std::end(kRunFiles),
                      [&](const char* f) { return name == f; }) != std::end(kRunFiles);
}
// "<file a run writes>.tmp-<pid>": what write_file_atomically leaves when it is killed.
bool is_stale_temporary(const std::string& name, bool in_samples) {
  const size_t at = name.rfind(".tmp-");
  if (at == std::string::npos || !all_digits(name.substr(at + 5))) return false;
  const std::string base = name.substr(0, at);
  return in_samples ? is_sample_file(base) : is_run_file(base);
}

// Removes what a run wrote in `folder` (with its stale temporaries when `everything`, or only
// those), and nothing else; samples/ goes only when nothing else is left in it.
void remove_run_files(const std::string& folder, bool everything) {
  std::error_code ignored;
  for (const bool in_samples : {false, true}) {
    const fs::path where = in_samples ? fs::path(folder) / "samples" : fs::path(folder);
    std::vector<fs::path> doomed;
    for (fs::directory_iterator it(where, ignored), end; !ignored && it != end;
         it.increment(ignored)) {
      const std::string name = it->path().filename().string();
      if (is_stale_temporary(name, in_samples) ||
          (everything && (in_samples ? is_sample_file(name) : is_run_file(name))))
        doomed.push_back(it->path());
    }
    ignored.clear();
    for (const fs::path& p : doomed) fs::remove(p, ignored);
  }
  if (everything && fs::is_empty(fs::path(folder) / "samples", ignored))
    fs::remove(fs::path(folder) / "samples", ignored);
}

// Whether `folder` holds anything but a lock file.
bool occupied(const std::string& folder) {
  std::error_code ignored;
  for (fs::directory_iterator it(folder, ignored), end; !ignored && it != end;
       it.increment(ignored))
    if (it->path().filename() != kLockFile) return true;
  return false;
}

// Takes the folder's writer lock (flock on run.lock, which then holds our process id), or
// raises kBadArgument naming the process that holds it.
std::shared_ptr<void> lock_folder(const std::string& folder) {
  const std::string path = path_in(folder, kLockFile);
  const int fd = ::open(path.c_str(), O_RDWR | O_CREAT | O_CLOEXEC, 0644);
  if (fd < 0) raise(ErrorKind::kIo, path + ": cannot open the run's lock: " + std::strerror(errno));
  if (::flock(fd, LOCK_EX | LOCK_NB) != 0) {
    const int err = errno;
    char holder[32] = {0};
    const ssize_t got = ::pread(fd, holder, sizeof holder - 1, 0);
    ::close(fd);
    std::string pid = got > 0 ? std::string(holder, static_cast<size_t>(got)) : "";
    pid.erase(std::remove(pid.begin(), pid.end(), '\n'), pid.end());
    if (err != EWOULDBLOCK) raise(ErrorKind::kIo, path + ": cannot lock: " + std::strerror(err));
    raise(ErrorKind::kBadArgument,
          folder + ": another spar" + (all_digits(pid) ? " (process " + pid + ")" : "") +
              " is writing this run; wait for it to finish or stop it first");
  }
  const std::string me = std::to_string(static_cast<long>(::getpid())) + "\n";
  if (::ftruncate(fd, 0) != 0 || ::pwrite(fd, me.data(), me.size(), 0) < 0) {
    // The lock holds without the note; a refused writer then names no process.
  }
  return std::shared_ptr<void>(new int(fd), [](void* p) {
    ::close(*static_cast<int*>(p));
    delete static_cast<int*>(p);
  });
}

// A random id for a new run (16 hex digits); it labels files and never reaches the numbers.
std::string new_run_id() {
  uint64_t bits = 0;
  std::FILE* f = std::fopen("/dev/urandom", "rb");
  if (!f || std::fread(&bits, sizeof bits, 1, f) != 1)
    bits = static_cast<uint64_t>(std::chrono::steady_clock::now().time_since_epoch().count()) ^
           (static_cast<uint64_t>(::getpid()) << 32);
  if (f) std::fclose(f);
  char text[24];
  std::snprintf(text, sizeof text, "%016llx", static_cast<unsigned long long>(bits));
  return text;
}

// recipe.toml as spar writes it: two comment lines, the first "# spar run <id>, recipe
// <hash>: ...", then to_toml of the recipe, whose text_hash is <hash>. So a file spar wrote
// and nobody edited is told from an edited one: its body still has the hash its header says.
std::string recipe_file_text(const std::string& id, const Recipe& r) {
  const std::string body = to_toml(r);
  return kRecipeHeader + id + ", recipe " + text_hash(body) +
         ": the resolved recipe, every key with its value.\n"
         "# To change a key of this run on purpose: spar resume FOLDER --set key=value.\n" +
         body;
}
struct RecipeFile {
  std::string id;      // "" when the header is missing (an older run, or removed)
  bool edited = true;  // false when the body is exactly what spar wrote
};
RecipeFile read_recipe_header(const std::string& text) {
  RecipeFile f;
  if (text.rfind(kRecipeHeader, 0) != 0) return f;
  const size_t comma = text.find(", recipe ", kRecipeHeader.size());
  const size_t line_end = text.find('\n');
  if (comma == std::string::npos || comma > line_end) return f;
  f.id = text.substr(kRecipeHeader.size(), comma - kRecipeHeader.size());
  const std::string hash = text.substr(comma + 9, 16);
  const size_t second_end = text.find('\n', line_end + 1);
  if (second_end != std::string::npos) f.edited = text_hash(text.substr(second_end + 1)) != hash;
  return f;
}

std::string read_whole(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  std::stringstream text;
  text << in.rdbuf();
  return text.str();
}

// Keys that describe what a run trained on: a resume cannot change them.
bool describes_the_training(const std::string& key) {
  return key.rfind("data.", 0) == 0 || key.rfind("model.", 0) == 0 || key == "training.seed";
}

// Relative data paths, taken from the current directory, made absolute.
void make_data_paths_absolute(Recipe& r) {
  for (std::string* p : {&r.data.path, &r.data.labels})
    if (!p->empty() && fs::path(*p).is_relative())
      *p = fs::absolute(*p).lexically_normal().string();
}

// The latent vectors (and labels) every sample picture of a run is drawn from.
Tensor<float> preview_latents(const Recipe& r, int64_t latent) {
  Rng rng(static_cast<uint64_t>(r.training.seed),
          derive_stream(static_cast<uint64_t>(r.training.seed), "preview"));
  return rng.normal<float>({r.output.sample_count, latent});
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

// The step a run folder's generator.spar holds, or −1 when it is missing, damaged or of
// another run.
int64_t saved_generator_step(const std::string& path, const std::string& run_id) {
  std::error_code ignored;
  if (!fs::exists(path, ignored)) return -1;
  try {
    const Archive a = Archive::read_file(path);
    if (!a.contains("run.id") || a.kind("run.id") != RecordKind::kText ||
        a.text("run.id") != run_id)
      return -1;
    return a.integer("step");
  } catch (const Error&) {
    return -1;
  }
}

}  // namespace

Run::Run(std::string folder, Recipe recipe, const Archive* state)
    : folder_(std::move(folder)), recipe_(std::move(recipe)) {
  std::unique_ptr<DataSource> data = make_data_source(recipe_);
  sample_shape_ = data->sample_shape();
  if (auto* set = dynamic_cast<DatasetSource*>(data.get()))
    class_names_ = set->dataset().class_names;
  GanPair pair = state ? build_networks_for_file(*state, recipe_, sample_shape_, data->classes())
                       : make_gan_pair(recipe_, sample_shape_, data->classes());
  trainer_ =
      std::make_unique<TrainingRun>(std::move(pair), std::move(data), training_options(recipe_));
}

Run Run::start(const std::string& folder, const Recipe& given, bool force) {
  std::error_code error;
  if (fs::exists(folder) && !fs::is_directory(folder))
    raise(ErrorKind::kBadArgument, folder + ": exists and is not a folder");
  const auto refuse_occupied = [&] {
    raise(ErrorKind::kBadArgument,
          folder +
              ": is not empty; choose another folder, or pass --force to replace the run in "
              "it (--force removes only the files a run writes)");
  };
  if (fs::exists(folder) && occupied(folder) && !force) refuse_occupied();
  Recipe recipe = given;
  make_data_paths_absolute(recipe);
  // Load the data and build the networks before touching the disk, so a recipe or data error
  // leaves an earlier run in the folder as it was.
  Run run(folder, recipe);
  fs::create_directories(folder, error);
  if (error) raise(ErrorKind::kIo, folder + ": cannot be created: " + error.message());
  run.lock_ = lock_folder(folder);
  if (!force && occupied(folder)) refuse_occupied();  // another spar got here first
  remove_run_files(folder, force);
  fs::create_directories(fs::path(folder) / "samples", error);
  if (error) raise(ErrorKind::kIo, folder + "/samples: cannot be created: " + error.message());
  run.run_id_ = new_run_id();
  run.write_recipe_file();
  write_text_atomically(path_in(folder, kLogFile), std::string(kLogHeader) + "\n");
  // The picture before the checkpoint: a state.spar at a picture's step promises the picture.
  run.write_samples();
  run.save_checkpoints();
  return run;
}

Run Run::reopen(const std::string& folder, const std::vector<std::string>& settings) {
  const std::string state_path = path_in(folder, kStateFile);
  if (!fs::exists(state_path))
    raise(ErrorKind::kBadArgument, folder + ": holds no " + kStateFile + " (not a run folder?)");
  std::shared_ptr<void> lock = lock_folder(folder);
  remove_run_files(folder, false);  // stale temporaries of an interrupted write
  Archive state = Archive::read_file(state_path);
  upgrade_run_records(state);
  const Recipe saved = parse_recipe(state.text("recipe"), state_path + " (its recipe)");
  const std::string id = state.contains("run.id") ? state.text("run.id") : "";

  // recipe.toml as the folder has it: the same run, and unedited unless asked for.
  const std::string recipe_path = path_in(folder, kRecipeFile);
  Recipe on_disk = saved;
  if (fs::exists(recipe_path)) {
    const std::string text = read_whole(recipe_path);
    const RecipeFile file = read_recipe_header(text);
    const std::string& file_id = file.id;
    if (!id.empty() && file_id != id)
      raise(ErrorKind::kBadArgument,
            state_path + ": belongs to run " + id + ", but " + folder + " holds run " +
                (file_id.empty() ? "(unnamed)" : file_id) +
                " (recipe.toml); a state.spar continues only the run that wrote it");
    // A file as spar wrote it may lag the state by a step's change (a kill between the two
    // writes): the state holds. Only an edit by hand must be asked for.
    if (file.edited) on_disk = parse_recipe(text, recipe_path);
  }
  Recipe wanted = saved;
  std::set<std::string> asked;
  for (const std::string& setting : settings) {
    const std::string key = apply_setting(wanted, setting, "--set " + setting);
    if (describes_the_training(key))
      raise(ErrorKind::kBadArgument, "--set " + key +
                                         ": describes what the run trained on and cannot "
                                         "change on resume; start a new run for that");
    asked.insert(key);
  }
  std::string unasked;
  for (const std::string& change : differing_keys(saved, on_disk))
    if (!asked.count(change.substr(0, change.find(' '))))
      unasked += (unasked.empty() ? "" : ", ") + change;
  if (!unasked.empty())
    raise(ErrorKind::kBadArgument,
          recipe_path + ": edited since the run wrote it: " + unasked +
              "; to change a key on purpose, resume with --set key=value; otherwise undo the "
              "edit");

  Run run(folder, wanted, &state);
  run.lock_ = std::move(lock);
  run.run_id_ = id.empty() ? new_run_id() : id;  // runs from before ids get one now
  run.trainer_->load(state);
  run.checkpoint_step_ = run.steps_done();
  // A kill between the two writes of a checkpoint leaves generator.spar one checkpoint
  // behind state.spar (or missing): write it again from the state, so that both hold the
  // step the run continues from, as an uninterrupted run's would.
  if (saved_generator_step(path_in(folder, kGeneratorFile), run.run_id_) != run.steps_done())
    run.save_generator();
  run.elapsed_before_ = static_cast<double>(state.integer("elapsed_ms")) / 1000;
  run.elapsed_ = run.elapsed_before_;
  run.history_ = fs::exists(path_in(folder, kHistoryFile))
                     ? read_whole(path_in(folder, kHistoryFile))
                     : std::string();
  run.note_changes(saved, "spar resume --set");
  run.write_recipe_file();
  // Rows logged after the checkpoint belong to steps that will be redone: drop them.
  const std::string log_path = path_in(folder, kLogFile);
  std::string text = std::string(kLogHeader) + "\n";
  for (const LogRow& row : read_log(log_path))
    if (row.step <= run.steps_done()) text += log_line(row) + "\n";
  write_text_atomically(log_path, text);
  fs::create_directories(fs::path(folder) / "samples");
  // A kill between a checkpoint and its step's picture (runs from before the picture came
  // first) leaves the picture missing; it is drawn from the state, so it is the same one.
  const int64_t step = run.steps_done();
  if ((step % run.recipe_.output.sample_every == 0) && !fs::exists(run.samples_path(step)) &&
      !fs::exists(fs::path(run.samples_path(step)).replace_extension(".csv")))
    run.write_samples();
  return run;
}

void Run::write_recipe_file() {
  write_text_atomically(path_in(folder_, kRecipeFile), recipe_file_text(run_id_, recipe_));
}

void Run::note_changes(const Recipe& before, const std::string& how) {
  const std::vector<std::string> changes = differing_keys(before, recipe_);
  if (changes.empty()) return;
  for (const std::string& c : changes)
    history_ += "step " + std::to_string(steps_done()) + ": " + c + ", by " + how + "\n";
  write_text_atomically(path_in(folder_, kHistoryFile), history_);
}

void Run::plan_steps(int64_t total) {
  const Recipe before = recipe_;
  recipe_.training.steps = total;
  write_recipe_file();
  note_changes(before, "spar resume --steps");
}

std::string Run::samples_path(int64_t step) const {
  return (fs::path(folder_) / "samples" / step_name(step)).string();
}

void Run::save_checkpoints() {
  save_state();
  save_generator();
}

Archive Run::checkpoint_header(const char* kind) const {
  Archive a;
  a.put_text("kind", kind);
  a.put_text("run.id", run_id_);
  a.put_text("run.recipe_hash", recipe_hash(recipe_));
  a.put_text("recipe", to_toml(recipe_));
  put_sample_records(a, sample_shape_, class_names_);
  return a;
}

void Run::save_state() {
  Archive state = checkpoint_header("spar training state");
  state.put_int("elapsed_ms", static_cast<int64_t>(std::llround(elapsed_ * 1000)));
  trainer_->save(state);
  state.write_file(path_in(folder_, kStateFile));
  checkpoint_step_ = steps_done();
}

void Run::save_generator() {
  Archive generator = checkpoint_header("spar generator");
  generator.put_int("step", steps_done());
  trainer_->save_generator(generator);
  generator.write_file((fs::path(folder_) / kGeneratorFile).string());
}

void Run::write_log_row(const StepReport& s) {
  std::ofstream out(path_in(folder_, kLogFile), std::ios::app);
  out << log_line({s.step, elapsed_, s.critic_loss, s.generator_loss, s.real_score, s.fake_score})
      << "\n";
  out.flush();
  if (!out)
    raise(ErrorKind::kIo,
          path_in(folder_, kLogFile) + ": cannot be appended to: " + std::strerror(errno));
}

void Run::write_samples() {
  const int64_t classes = static_cast<int64_t>(class_names_.size());
  const Tensor<float> z = preview_latents(recipe_, trainer_->pair().latent);
  const Tensor<float> samples =
      trainer_->generate(z, labels_in_turn(recipe_.output.sample_count, classes));
  if (!has_pictures(recipe_, sample_shape_)) {
    write_samples_table(samples, fs::path(samples_path(steps_done())).replace_extension(".csv"));
    return;
  }
  write_samples_picture(recipe_, samples, grid_columns(recipe_.output.sample_count, classes),
                        samples_path(steps_done()));
}

void Run::write_curves() {
  const std::vector<LogRow> rows = read_log(path_in(folder_, kLogFile));
  PlotSeries critic{"critic loss", {}, {}}, generator{"generator loss", {}, {}};
  PlotSeries real{"on real samples", {}, {}}, fake{"on generated samples", {}, {}};
  for (const LogRow& r : rows) {
    const double x = static_cast<double>(r.step);
    critic.x.push_back(x), critic.y.push_back(r.critic_loss);
    generator.x.push_back(x), generator.y.push_back(r.generator_loss);
    real.x.push_back(x), real.y.push_back(r.real_score);
    fake.x.push_back(x), fake.y.push_back(r.fake_score);
  }
  const bool logistic = objective_named(recipe_.objective.name).logistic;
  const std::vector<PlotPanel> panels = {
      {"losses", "loss", {critic, generator}},
      {logistic ? "critic scores: the mean probability of \"real\" it gives each kind"
                : "critic scores: the mean score it gives each kind",
       logistic ? "probability" : "score",
       {real, fake}},
  };
  write_svg(path_in(folder_, kCurvesFile), line_chart_svg(panels, "generator step"));
}

std::string Run::divergence(const StepReport& r) {
  if (warned_) return "";
  const double size = std::max(std::abs(r.critic_loss), std::abs(r.generator_loss));
  if (r.step <= 100) early_loss_size_ = std::max(early_loss_size_, size);
  const bool huge = size > 1e6;
  const bool grown =
      r.step > 100 && early_loss_size_ > 0 && size > 1000 * std::max(1.0, early_loss_size_);
  if (!huge && !grown) return "";
  warned_ = true;
  char text[200];
  std::snprintf(text, sizeof text,
                "step %lld: the critic loss is %.3g and the generator loss %.3g (%s); training "
                "looks divergent: a learning rate too high?",
                static_cast<long long>(r.step), r.critic_loss, r.generator_loss,
                huge ? "above 1e6" : "a thousand times their size in the first 100 steps");
  return text;
}

RunResult Run::train_until(int64_t total_steps, const std::atomic<bool>* stop,
                           const std::function<void(const RunProgress&)>& on_step) {
  using Clock = std::chrono::steady_clock;
  const Clock::time_point begin = Clock::now();
  RunProgress progress;
  progress.total_steps = total_steps;
  RunResult result;
  try {
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
        result.step = checkpoint_step_;  // the last checkpoint is left as it was
        return result;
      }
      const double seconds = std::chrono::duration<double>(Clock::now() - begin).count();
      elapsed_ = elapsed_before_ + seconds;
      const int64_t step = steps_done();
      if (step % recipe_.output.log_every == 0 || step == total_steps) write_log_row(report);
      if (step % recipe_.output.sample_every == 0 || step == total_steps) {
        write_samples();
        write_curves();
      }
      if (step % recipe_.output.checkpoint_every == 0) save_checkpoints();
      progress.step = step;
      progress.seconds = seconds;
      progress.steps_this_call += 1;
      progress.last = report;
      progress.warning = divergence(report);
      if (on_step) on_step(progress);
    }
    // At the end, and when stopped: the checkpoints hold the latest step.
    save_checkpoints();
    write_curves();
  } catch (const Error& e) {
    if (e.kind() != ErrorKind::kIo) throw;
    raise(ErrorKind::kIo, std::string(e.what()) + "; the last complete checkpoint (step " +
                              std::to_string(checkpoint_step_) + ") is kept in " + folder_);
  }
  result.step = steps_done();
  return result;
}

}  // namespace spar
