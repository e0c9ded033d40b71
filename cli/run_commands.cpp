// `spar sample`, `spar evaluate` and `spar inspect`: use and examine what a run saved.
#include <CLI/CLI.hpp>
#include <algorithm>
#include <cmath>
#include <filesystem>
#include <iostream>
#include <limits>

#include "cli/commands.h"
#include "cli/output.h"
#include "engine/error.h"
#include "recipes/data_sources.h"
#include "recipes/evaluation.h"
#include "recipes/mixtures.h"
#include "recipes/pictures.h"
#include "recipes/run_parts.h"
#include "recipes/sample_writers.h"
#include "recipes/saved_generator.h"

namespace spar {
namespace cli {
namespace {
namespace fs = std::filesystem;

bool ends_with(const std::string& s, const std::string& tail) {
  return s.size() >= tail.size() && s.compare(s.size() - tail.size(), tail.size(), tail) == 0;
}

// A class given by number or by name; −1 for none.
int64_t class_index(const SavedGenerator& g, const std::string& given) {
  if (given.empty()) return -1;
  for (size_t i = 0; i < g.class_names.size(); ++i)
    if (g.class_names[i] == given) return static_cast<int64_t>(i);
  char* end = nullptr;
  const long long v = std::strtoll(given.c_str(), &end, 10);
  if (end && *end == '\0' && v >= 0) return v;
  std::string names;
  for (const std::string& n : g.class_names) names += (names.empty() ? "" : ", ") + n;
  raise(ErrorKind::kBadArgument,
        "--class " + given + ": no such class" +
            (names.empty() ? " (the generator is not class-conditional)" : "; classes: " + names));
}

constexpr int64_t kLargestSeed = std::numeric_limits<int64_t>::max();

// Refuses, before anything is loaded or written, an -o that names a folder and an --into that
// names something else.
void check_sample_destination(const std::string& output, const std::string& into) {
  std::error_code ec;
  if (!output.empty() && (output.back() == '/' || fs::is_directory(output, ec)))
    raise(ErrorKind::kBadArgument, output +
                                       ": names a folder; pass a file such as grid.png to -o, or "
                                       "use --into to write one picture per sample into a folder");
  if (!into.empty() && fs::exists(into, ec) && !fs::is_directory(into, ec))
    raise(ErrorKind::kBadArgument,
          into + ": exists and is not a folder; --into needs a folder (made if missing)");
}

struct SampleOptions {
  std::string source, output, into, class_name;
  int64_t count = 64, seed = 1;
};

int run_sample(const SampleOptions& o) {
  check_sample_destination(o.into.empty() && o.output.empty() ? "samples.png" : o.output, o.into);
  SavedGenerator g = load_generator(o.source);
  const int64_t c = class_index(g, o.class_name);
  const Tensor<float> samples = generate_samples(g, o.count, static_cast<uint64_t>(o.seed), c);
  const bool pictures = has_pictures(g.recipe, g.sample_shape);
  if (!o.into.empty()) {
    std::error_code ec;
    fs::create_directories(o.into, ec);
    if (ec)
      raise(ec == std::errc::not_a_directory ? ErrorKind::kBadArgument : ErrorKind::kIo,
            o.into + ": cannot make the folder: " + ec.message());
    if (!pictures || g.sample_shape.rank() == 1) {
      const std::string path = (fs::path(o.into) / "samples.csv").string();
      write_samples_table(samples, path);
      std::cout << "wrote " << o.count << " samples to " << path << "\n";
      return 0;
    }
    for (int64_t i = 0; i < o.count; ++i) {
      char name[32];
      std::snprintf(name, sizeof name, "sample-%05lld.png", static_cast<long long>(i));
      write_png((fs::path(o.into) / name).string(),
                tile_pictures(samples.leading_slice(i, i + 1), 1, 0));
    }
    std::cout << "wrote " << o.count << " pictures to " << o.into << "/\n";
    return 0;
  }
  const std::string out = o.output.empty() ? "samples.png" : o.output;
  if (ends_with(out, ".csv") || !pictures) {
    if (!ends_with(out, ".csv"))
      raise(ErrorKind::kBadArgument, out + ": samples of this table are numbers; name a .csv file");
    write_samples_table(samples, out);
  } else {
    if (!ends_with(out, ".png"))
      raise(ErrorKind::kBadArgument, out + ": pictures are PNG; name a .png file");
    // One column per class when the classes come in turn, as in the run folder's pictures.
    const int64_t classes = c >= 0 ? 0 : static_cast<int64_t>(g.class_names.size());
    write_samples_picture(g.recipe, samples, grid_columns(o.count, classes), out);
  }
  std::cout << "wrote " << o.count << " samples (step " << g.step << ") to " << out << "\n";
  return 0;
}

Subcommand add_sample(CLI::App& parent) {
  auto o = std::make_shared<SampleOptions>();
  CLI::App* app = parent.add_subcommand(
      "sample",
      "Generate new samples with a run's weight-averaged generator: a grid picture, or one\n"
      "file per sample.\nExample: spar sample trained/swatches -n 64 -o new.png --seed 7");
  app->add_option("source", o->source, "Run folder or generator.spar file")->required();
  add_integer_option(*app, "-n,--count", o->count, "How many samples (default 64)", 1, 100000);
  auto* output = app->add_option("-o,--output", o->output,
                                 "Grid picture to write (.png), or .csv for numbers "
                                 "(default: samples.png)");
  app->add_option("--into", o->into, "Folder to write one picture per sample into")
      ->excludes(output);
  add_integer_option(*app, "--seed", o->seed, "Seed of the latent vectors (default 1)", 0,
                     kLargestSeed);
  app->add_option("--class", o->class_name,
                  "Class to generate (name or number), for class-conditional runs");
  add_threads_option(*app);
  return {app, [o] { return run_sample(*o); }};
}

struct EvaluateOptions {
  std::string folder;
  int64_t count = 2500, seed = 1;
  bool json = false;
};

int run_evaluate(const EvaluateOptions& o) {
  SavedGenerator g = load_generator(o.folder);
  const Recipe& r = g.recipe;
  std::vector<std::pair<std::string, std::string>> figures;  // (name, JSON value)
  std::vector<std::vector<std::string>> table;
  if (const DataSourceInfo& source = data_source_of(r); source.endless()) {
    // Srivastava et al. 2017 (VEEGAN): 2,500 samples, high quality within 3σ of a mode.
    const Tensor<float> points = generate_samples(g, o.count, static_cast<uint64_t>(o.seed), -1);
    const ModeCoverage m = mode_coverage(source.mixture(), points);
    figures = {{"modes_captured", std::to_string(m.modes_captured)},
               {"modes_total", std::to_string(m.modes_total)},
               {"high_quality_fraction", json_number(m.high_quality_fraction)}};
    table = {{"modes captured",
              std::to_string(m.modes_captured) + " of " + std::to_string(m.modes_total)},
             {"high-quality samples", format_number(100 * m.high_quality_fraction, 3) + "%"}};
  } else {
    const Dataset data = load_dataset(r);
    const int64_t classes = static_cast<int64_t>(g.class_names.size());
    const Tensor<float> samples = generate_samples(g, o.count, static_cast<uint64_t>(o.seed), -1);
    if (data.classes() > 0) {
      const NearestMatch match = nearest_training_samples(data, samples);
      std::vector<int64_t> counts(static_cast<size_t>(data.classes()), 0);
      int64_t agree = 0;
      for (int64_t i = 0; i < o.count; ++i) {
        ++counts[static_cast<size_t>(match.labels[static_cast<size_t>(i)])];
        agree += classes > 0 && match.labels[static_cast<size_t>(i)] == i % classes;
      }
      std::string json_counts = "{";
      for (int64_t k = 0; k < data.classes(); ++k) {
        const std::string& name = data.class_names[static_cast<size_t>(k)];
        table.push_back({"nearest class " + name, std::to_string(counts[static_cast<size_t>(k)])});
        json_counts += (k ? ", " : "") + json_string(name) + ": " +
                       std::to_string(counts[static_cast<size_t>(k)]);
      }
      figures.push_back({"nearest_class_counts", json_counts + "}"});
      if (classes > 0) {
        const double share = static_cast<double>(agree) / static_cast<double>(o.count);
        figures.push_back({"requested_class_agreement", json_number(share)});
        table.push_back(
            {"nearest sample has the requested class", format_number(100 * share, 3) + "%"});
      }
    } else {
      table.push_back({"(unlabelled data: no class balance to measure yet)", ""});
    }
  }
  if (o.json) {
    std::cout << "{\"step\": " << g.step << ", \"samples\": " << o.count;
    for (const auto& [name, value] : figures) std::cout << ", \"" << name << "\": " << value;
    std::cout << "}\n";
    return 0;
  }
  std::cout << o.folder << ": step " << g.step << ", " << o.count << " samples (seed " << o.seed
            << ")\n\n";
  print_table({"measure", "value"}, table);
  return 0;
}

Subcommand add_evaluate(CLI::App& parent) {
  auto o = std::make_shared<EvaluateOptions>();
  CLI::App* app = parent.add_subcommand(
      "evaluate",
      "Judge a run's generator. 2-D mixtures: modes captured and the share of high-quality\n"
      "samples (Srivastava et al. 2017). Labelled data: how generated samples spread over\n"
      "the classes of their nearest training samples.\nExample: spar evaluate trained/ring8 "
      "--json");
  app->add_option("folder", o->folder, "Run folder or generator.spar file")->required();
  add_integer_option(*app, "-n,--count", o->count, "Samples to judge (default 2500)", 1, 1000000);
  add_integer_option(*app, "--seed", o->seed, "Seed of the latent vectors (default 1)", 0,
                     kLargestSeed);
  app->add_flag("--json", o->json, "Print the figures as JSON");
  add_threads_option(*app);
  return {app, [o] { return run_evaluate(*o); }};
}

struct InspectOptions {
  std::string file;
  bool recipe = false;
};

int run_inspect(const InspectOptions& o) {
  std::string path = o.file;
  if (fs::is_directory(path)) path = (fs::path(path) / "state.spar").string();
  if (!fs::exists(path)) raise(ErrorKind::kBadArgument, path + ": does not exist");
  Archive a = Archive::read_file(path);
  const int64_t format = upgrade_run_records(a);
  const auto text_of = [&](const char* name) {
    return a.contains(name) && a.kind(name) == RecordKind::kText ? a.text(name) : std::string();
  };
  std::cout << path << ": " << fs::file_size(path) << " bytes, " << a.size() << " records";
  if (!text_of("kind").empty()) std::cout << ", " << text_of("kind");
  if (a.contains("step") && a.kind("step") == RecordKind::kInteger)
    std::cout << ", step " << a.integer("step");
  std::cout << "\n";
  if (format < kRunFormat)
    std::cout << "written in run format " << format << "; records are shown under the names "
              << "they have now (docs/file-formats.md)\n";
  const std::string recipe_text = text_of("recipe");
  if (!recipe_text.empty()) {
    const Recipe r = parse_recipe(recipe_text, path + " (its recipe)");
    std::cout << "recipe: data " << r.data.source << ", model " << r.model.kind
              << (r.model.conditional ? " (conditional)" : "") << ", objective " << r.objective.name
              << ", " << r.training.steps << " steps of batch " << r.training.batch << ", seed "
              << r.training.seed << "\n";
    if (o.recipe) std::cout << "\n" << recipe_text << "\n";
  }
  std::vector<std::vector<std::string>> rows;
  int64_t parameters = 0;
  for (const std::string& name : a.names()) {
    const RecordKind kind = a.kind(name);
    std::string shape = "", value = "";
    if (kind == RecordKind::kFloat32Tensor) {
      const Shape s = a.tensor_shape(name);
      shape = s.str();
      if (name.rfind("generator/", 0) == 0 || name.rfind("critic/", 0) == 0)
        parameters += s.element_count();
    } else if (kind == RecordKind::kFloat64Tensor) {
      shape = a.tensor_shape(name).str();
    } else if (kind == RecordKind::kInteger) {
      value = std::to_string(a.integer(name));
    } else {
      value = std::to_string(a.text(name).size()) + " bytes of text";
    }
    rows.push_back({name, to_string(kind), shape, value});
  }
  std::cout << "\n";
  print_table({"record", "kind", "shape", "value"}, rows);
  std::cout << "\nnetwork tensors: " << parameters << " values\n";
  return 0;
}

Subcommand add_inspect(CLI::App& parent) {
  auto o = std::make_shared<InspectOptions>();
  CLI::App* app = parent.add_subcommand(
      "inspect",
      "Show what a checkpoint holds: recipe, step, every record's name, kind and shape.\n"
      "Example: spar inspect trained/swatches/generator.spar");
  app->add_option("file", o->file, "A .spar file, or a run folder (for its state.spar)")
      ->required();
  app->add_flag("--recipe", o->recipe, "Also print the whole recipe");
  return {app, [o] { return run_inspect(*o); }};
}

}  // namespace

std::vector<Subcommand> add_run_commands(CLI::App& parent) {
  return {add_sample(parent), add_evaluate(parent), add_inspect(parent)};
}

}  // namespace cli
}  // namespace spar
