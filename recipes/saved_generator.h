// The saved generator (a run folder's generator.spar): loading it and drawing samples from
// it, and the records every run file holds about what its networks are for (the shape of a
// sample, the class names), shared with the run folder that writes them
// (recipes/run_folder.h). Record names and formats: docs/file-formats.md.
//
// Thread safety: a SavedGenerator belongs to one thread at a time; the functions on archives
// are pure.
#pragma once

#include <string>
#include <vector>

#include "engine/archive.h"
#include "recipes/architectures.h"
#include "recipes/recipe.h"

namespace spar {

constexpr const char* kGeneratorFile = "generator.spar";

struct SavedGenerator {
  Recipe recipe;
  int64_t step = 0;
  Shape sample_shape;
  std::vector<std::string> class_names;  // empty for an unconditional generator
  GanPair pair;                          // the critic is built but untrained
};
// Reads generator.spar (a run folder may be given for its generator.spar), of any run format
// (upgrade_run_records). Raises kCorruptCheckpoint for a damaged file or one whose tensors do
// not fit its recipe, before building networks larger than the file's own tensors.
SavedGenerator load_generator(const std::string& folder_or_file);
// n samples [n, ...] in [−1, 1] from latent vectors drawn from `seed`; for a conditional
// generator, of class `class_index` (−1: classes in turn, 0, 1, 2, ...).
Tensor<float> generate_samples(SavedGenerator& generator, int64_t n, uint64_t seed,
                               int64_t class_index);
// The latent vectors generate_samples draws for `seed`: [n, generator.pair.latent]. Vector i
// depends on the seed and i alone (Philox counters), so the first n of a larger draw are these.
Tensor<float> latent_vectors(const SavedGenerator& generator, int64_t n, uint64_t seed);
// Samples [n, ...] from given latent vectors z [n, generator.pair.latent] and, for a
// conditional generator, one class per sample in `labels` (empty otherwise). Raises
// kBadShape or kBadArgument naming what does not fit.
Tensor<float> generate_from(SavedGenerator& generator, const Tensor<float>& z,
                            const std::vector<int64_t>& labels);

// ---- The records that say what a run file's networks are for ----

// "sample.rank", "sample.dim0", ... and "classes" (one name per line).
void put_sample_records(Archive& archive, const Shape& sample_shape,
                        const std::vector<std::string>& class_names);
// The recorded shape of one sample, checked before anything is built from it: rank 1 (points,
// table rows) or 3 (images), every extent at least 1, and the count within the engine's
// limit; kCorruptCheckpoint naming the record otherwise.
Shape sample_shape_from(const Archive& archive);
std::vector<std::string> class_names_from(const Archive& archive);
// The recipe's networks for a file's sample shape, built under a budget of the file's own
// tensors: a crafted recipe (model.width 4096, model.depth 32) must not build gigabytes of
// network before its first tensor is found not to fit. Anything that does not fit is
// kCorruptCheckpoint naming the file.
GanPair build_networks_for_file(const Archive& archive, const Recipe& recipe,
                                const Shape& sample_shape, int64_t classes);
// Labels 0, 1, 2, ... in turn for n samples of a conditional generator; empty when classes is 0.
std::vector<int64_t> labels_in_turn(int64_t n, int64_t classes);

}  // namespace spar
