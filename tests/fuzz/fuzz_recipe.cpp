// Fuzz target: recipe TOML (recipes/recipe.h) through parse_recipe. The input is the text.
// An accepted recipe must also survive the round trip every run makes through its resolved
// recipe.toml: to_toml's text parses again and gives the same recipe (the same text back).
#include <string>

#include "fuzz_support.h"
#include "recipes/recipe.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  using namespace spar;
  const std::string text(reinterpret_cast<const char*>(data), size);
  Recipe recipe;
  if (!fuzz::run_reader("parse_recipe", [&] { recipe = parse_recipe(text, "fuzz input"); })) {
    return 0;
  }
  const std::string resolved = to_toml(recipe);
  Recipe again;
  if (!fuzz::run_reader("parse_recipe of to_toml",
                        [&] { again = parse_recipe(resolved, "resolved recipe"); })) {
    fuzz::finding("the resolved recipe (to_toml) of an accepted recipe does not parse");
  }
  if (to_toml(again) != resolved) {
    fuzz::finding("the resolved recipe does not read back to the same values");
  }
  return 0;
}
