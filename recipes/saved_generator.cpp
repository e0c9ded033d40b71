#include "recipes/saved_generator.h"

#include <filesystem>
#include <sstream>

#include "engine/buffer_pool.h"
#include "engine/error.h"
#include "recipes/run_parts.h"

namespace spar {
namespace fs = std::filesystem;
namespace {

// The bytes of float tensors a file holds: what a network built from its recipe may take,
// with room for the initial weights drawn before the records replace them and for a critic
// of about the generator's size (built with it, never saved in generator.spar), plus 8 MiB
// for the pool's rounding of small blocks. (64 MiB let a tiny file with a sample shape of
// 16.7 million values draw that many initial weights: 0.2 s here, but over the fuzzer's
// 10 s under its instrumentation; regression generator/sample_dim0_16775426_initial_weights_slow.)
int64_t network_budget(const Archive& a) {
  int64_t bytes = 0;
  for (const std::string& name : a.names())
    if (a.kind(name) == RecordKind::kFloat32Tensor)
      bytes += a.tensor_shape(name).element_count() * static_cast<int64_t>(sizeof(float));
  return 4 * bytes + (int64_t{8} << 20);
}

}  // namespace

// Records describing what the networks are for: sample shape, classes and their names.
void put_sample_records(Archive& a, const Shape& shape, const std::vector<std::string>& names) {
  a.put_int("sample.rank", shape.rank());
  for (int i = 0; i < shape.rank(); ++i) a.put_int("sample.dim" + std::to_string(i), shape[i]);
  std::string joined;
  for (const std::string& n : names) joined += n + "\n";
  a.put_text("classes", joined);
}

// The recorded shape of one sample, checked before anything is built from it: rank 1 (points,
// table rows) or 3 (images), every extent at least 1, and the count within the engine's limit.
Shape sample_shape_from(const Archive& a) {
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

std::vector<std::string> class_names_from(const Archive& a) {
  std::vector<std::string> names;
  std::stringstream in(a.text("classes"));
  for (std::string line; std::getline(in, line);) names.push_back(line);
  return names;
}

std::vector<int64_t> labels_in_turn(int64_t n, int64_t classes) {
  std::vector<int64_t> labels;
  for (int64_t i = 0; i < n && classes > 0; ++i) labels.push_back(i % classes);
  return labels;
}

// The recipe's networks for a file's sample shape, built under a budget of the file's own
// tensors: a crafted recipe (model.width 4096, model.depth 32) must not build gigabytes of
// network before its first tensor is found not to fit. Anything that does not fit is
// kCorruptCheckpoint naming the file.
GanPair build_networks_for_file(const Archive& a, const Recipe& r, const Shape& shape,
                                int64_t classes) {
  const std::string what = a.source() + ": its recipe (model.kind " + r.model.kind +
                           ", model.width " + std::to_string(r.model.width) + ", model.depth " +
                           std::to_string(r.model.depth) + ", model.latent " +
                           std::to_string(r.model.latent) + ") and sample shape " + shape.str() +
                           " (records 'sample.rank', 'sample.dim0', ...)";
  try {
    PoolLimit limit(network_budget(a), ErrorKind::kCorruptCheckpoint,
                    what + " describe networks far larger than the tensors it holds");
    return make_gan_pair(r, shape, classes);
  } catch (const Error& e) {
    if (e.kind() == ErrorKind::kCorruptCheckpoint) throw;
    raise(ErrorKind::kCorruptCheckpoint, what + " do not fit: " + e.what());
  }
}

SavedGenerator load_generator(const std::string& folder_or_file) {
  std::string path = folder_or_file;
  if (fs::is_directory(path)) path = (fs::path(path) / kGeneratorFile).string();
  if (!fs::exists(path))
    raise(ErrorKind::kBadArgument,
          path + ": does not exist (give a run folder or its " + kGeneratorFile + ")");
  Archive a = Archive::read_file(path);
  if (!a.contains("kind") || a.kind("kind") != RecordKind::kText ||
      a.text("kind") != "spar generator")
    raise(ErrorKind::kCorruptCheckpoint,
          path + ": is not a saved generator (a run folder's " + kGeneratorFile + ")");
  upgrade_run_records(a);
  SavedGenerator g;
  g.recipe = parse_recipe(a.text("recipe"), path + " (its recipe)");
  g.step = a.integer("step");
  g.sample_shape = sample_shape_from(a);
  g.class_names = class_names_from(a);
  if (static_cast<int64_t>(g.class_names.size()) > kMaxClasses)
    raise(ErrorKind::kCorruptCheckpoint,
          path + ": record 'classes' names " + std::to_string(g.class_names.size()) +
              " classes (at most " + std::to_string(kMaxClasses) + ")");
  g.pair = build_networks_for_file(a, g.recipe, g.sample_shape,
                                   static_cast<int64_t>(g.class_names.size()));
  g.pair.generator->load(a, "generator");
  return g;
}

Tensor<float> latent_vectors(const SavedGenerator& g, int64_t n, uint64_t seed) {
  Rng rng(seed, derive_stream(seed, "sampling"));
  return rng.normal<float>({n, g.pair.latent});
}

Tensor<float> generate_from(SavedGenerator& g, const Tensor<float>& z,
                            const std::vector<int64_t>& labels) {
  if (z.shape().rank() != 2 || z.shape()[1] != g.pair.latent)
    raise(ErrorKind::kBadShape, "latent vectors of shape " + z.shape().str() + ", expected [n, " +
                                    std::to_string(g.pair.latent) + "]");
  const int64_t classes = g.pair.classes, n = z.shape()[0];
  if (classes > 0 && static_cast<int64_t>(labels.size()) != n)
    raise(ErrorKind::kBadArgument,
          std::to_string(labels.size()) + " labels for " + std::to_string(n) + " latent vectors");
  if (classes == 0 && !labels.empty())
    raise(ErrorKind::kBadArgument, "this generator is not class-conditional; pass no labels");
  for (int64_t label : labels)
    if (label < 0 || label >= classes)
      raise(ErrorKind::kBadArgument, "class " + std::to_string(label) +
                                         " does not exist; the generator has classes 0 to " +
                                         std::to_string(classes - 1));
  NoRecordScope sampling;
  Context<float> eval(nullptr, false);
  return run_generator(g.pair, Var<float>(z), labels, eval).value();
}

Tensor<float> generate_samples(SavedGenerator& g, int64_t n, uint64_t seed, int64_t class_index) {
  const int64_t classes = g.pair.classes;
  if (class_index >= classes && classes > 0)
    raise(ErrorKind::kBadArgument, "class " + std::to_string(class_index) +
                                       " does not exist; the generator has classes 0 to " +
                                       std::to_string(classes - 1));
  if (class_index >= 0 && classes == 0)
    raise(ErrorKind::kBadArgument, "this generator is not class-conditional; leave out the class");
  std::vector<int64_t> labels = labels_in_turn(n, classes);
  if (class_index >= 0) labels.assign(static_cast<size_t>(n), class_index);
  return generate_from(g, latent_vectors(g, n, seed), labels);
}

}  // namespace spar
