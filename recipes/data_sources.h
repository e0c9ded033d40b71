// The data sources a recipe can name (`data.source`), declared once: each source's name, what
// it is, whether it is endless, how it gets labels, and how it is loaded. The recipe reader
// (the key's accepted values and its documentation), the run (recipes/run_parts.h), the
// sample pictures and `spar evaluate` all read this list, so a new source is one entry in
// data_sources.cpp plus its loader and test.
//
// Thread safety: the list is constant; loaders are as thread-safe as the loaders they call.
#pragma once

#include <memory>
#include <string>
#include <vector>

#include "recipes/datasets.h"
#include "recipes/mixtures.h"
#include "recipes/recipe.h"

namespace spar {

struct DataSourceInfo {
  const char* name;   // the value of data.source: "swatches"
  const char* about;  // a phrase for the documentation, without parentheses
  // Endless sources draw fresh samples for ever (the 2-D mixtures): this gives their
  // mixture, nullptr for a finite data set served in epochs.
  Mixture (*mixture)();
  // How the source's samples get class labels, for a message when a conditional model has
  // none ("put each class in its own sub-folder"); nullptr when the source has no labels.
  const char* labels_from;
  // Finite sources: the data the recipe describes, with its labels when it has any. Raises
  // kBadRecipe for an inconsistent recipe (naming the key) and kBadInputFile for data that
  // cannot be read (naming the file). nullptr for endless sources.
  Dataset (*load)(const Recipe& recipe);

  bool endless() const { return mixture != nullptr; }
};

// Every source, in the order the documentation lists them.
const std::vector<DataSourceInfo>& data_sources();
// The source `recipe.data_source` names; raises kBadRecipe naming data.source otherwise.
const DataSourceInfo& data_source_of(const Recipe& recipe);

}  // namespace spar
