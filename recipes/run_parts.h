// From a recipe to the pieces of a run: its data, its networks and its training options.
// recipes/run_folder.h puts them to work in a run folder; benchmarks and tests build runs
// from them directly.
//
// Thread safety: pure functions of the recipe (and the data files it names).
#pragma once

#include <memory>

#include "recipes/architectures.h"
#include "recipes/datasets.h"
#include "recipes/recipe.h"
#include "recipes/training.h"

namespace spar {

// Loads or makes the data a finite source describes (data_sources.h), with its labels when it
// has any. Raises kBadRecipe for an endless source (a 2-D mixture has no data set) or an
// inconsistent recipe, naming the key, and kBadInputFile for data that cannot be read.
Dataset load_dataset(const Recipe& recipe);
// The source a run trains on: a mixture's endless draws, or load_dataset's data shuffled
// from the run seed (without labels unless the recipe is conditional).
std::unique_ptr<DataSource> make_data_source(const Recipe& recipe);
// The recipe's networks for samples of `sample_shape`, with `classes` classes when the
// recipe is conditional; initial weights from the run seed.
GanPair make_gan_pair(const Recipe& recipe, const Shape& sample_shape, int64_t classes);
TrainingOptions training_options(const Recipe& recipe);

}  // namespace spar
