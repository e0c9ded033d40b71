// Recipe: everything that defines a training run (data, model, objective, optimisers, steps,
// outputs), read from a TOML file, and the preset recipes spar ships.
//
// Keys live in sections ("training.steps" is `steps` under `[training]`). Every key, its
// type, default and meaning is listed once, in recipe_keys() (recipe.cpp); the reader, the
// `--set` overrides, the resolved recipe.toml a run writes and docs/recipe-keys.md all come
// from that list, so they cannot disagree. A file may leave out any key (the default holds);
// an unknown key, a value of the wrong type or one outside its range is a kBadRecipe error
// "<file>: <key>: <why>" in one line, suggesting the nearest valid key for a typo.
//
// Thread safety: plain values and pure functions.
#pragma once

#include <cstdint>
#include <string>
#include <vector>

#include "recipes/image_files.h"

namespace spar {

// Each section of keys is a struct of its own and each key a field named as its leaf, so the
// key data.image_size is the field data.image_size.
struct Recipe {
  struct DataKeys {
    std::string source = "swatches";           // the data sources of recipes/data_sources.h
    std::string path;                          // images: folder; idx: image file; table: CSV file
    std::string labels;                        // idx: label file ("" for none)
    std::vector<std::string> class_names;      // idx, table: names for classes 0, 1, ...
    int64_t image_size = 32;                   // images, swatches: side in pixels
    int64_t channels = 3;                      // images: 1 (grayscale) or 3 (RGB)
    int64_t pixel_limit = kDefaultPixelLimit;  // images: refuse larger images before decoding
    int64_t swatch_count = 8192;               // swatches: how many to make
    bool labelled = false;                     // table: one column holds the class
    int64_t label_column = -1;  // table: that column (0-based, negative from the end)
    bool header = false;        // table: skip the first line
    double low = 0, high = 0;   // table: value range mapped to [−1, 1]; equal: own
    int64_t picture_width = 0;  // table: draw samples as pictures this wide; 0 none
  };
  struct ModelKeys {
    std::string kind = "dcgan";  // mlp or dcgan
    int64_t latent = 100;
    int64_t width = 64;  // mlp: units per hidden layer; dcgan: channels of the first convolution
    int64_t depth = 3;   // mlp: hidden layers per network
    bool spectral_normalisation = false;
    bool conditional = false;
  };
  struct ObjectiveKeys {
    std::string name = "non-saturating";  // the objectives of recipes/objectives.h
    double gradient_penalty = 0;
    double r1 = 0;
    int64_t critic_steps = 1;
    double least_squares_fake = -1, least_squares_real = 1, least_squares_generator = 0;
  };
  struct AdamKeys {  // [generator_optimiser], [critic_optimiser]
    double learning_rate = 2e-4, beta1 = 0.5, beta2 = 0.999, epsilon = 1e-8, weight_decay = 0;
  };
  struct TrainingKeys {
    int64_t steps = 5000;
    int64_t batch = 64;
    int64_t seed = 1;
    double average_decay = 0.999;
  };
  struct OutputKeys {
    int64_t log_every = 50;
    int64_t sample_every = 500;
    int64_t checkpoint_every = 1000;
    int64_t sample_count = 64;
  };

  DataKeys data;
  ModelKeys model;
  ObjectiveKeys objective;
  AdamKeys generator_optimiser, critic_optimiser;
  TrainingKeys training;
  OutputKeys output;
};

// One documented key. `type` is "string", "integer", "float", "boolean" or "list of strings".
struct RecipeKeyInfo {
  std::string name;  // "training.steps"
  std::string type;
  std::string default_value;  // as TOML text
  std::string about;
};
std::vector<RecipeKeyInfo> recipe_keys();

// Parses TOML text; `origin` names it in errors (a path, or "preset swatches"). A key under
// its old name (renamed since, as model.spectral_norm) is read as the new one, with a
// one-line note appended to `notes` when it is given; the same key under both names is an error.
Recipe parse_recipe(const std::string& text, const std::string& origin,
                    std::vector<std::string>* notes = nullptr);
// A preset name (see preset_names) or the path of a TOML file. Raises kBadRecipe for an
// unknown name that is not a file either, naming the presets.
Recipe load_recipe(const std::string& name_or_path, std::vector<std::string>* notes = nullptr);
// Applies "key=value" with value in TOML syntax; a bare word is taken as a string, so
// `--set objective.name=hinge` works unquoted. Raises kBadRecipe naming `origin` and the key.
// Returns the key's (current) name.
std::string apply_setting(Recipe& recipe, const std::string& assignment, const std::string& origin,
                          std::vector<std::string>* notes = nullptr);
// Every key with its value, by section, with each key's meaning as a comment; parse_recipe
// of the result gives `recipe` back.
std::string to_toml(const Recipe& recipe);
// FNV-1a 64-bit (engine/random.h) of a text, as 16 hex digits: a short name for it.
std::string text_hash(const std::string& text);
// text_hash of to_toml(recipe): the resolved recipe's name in run files and exported headers.
std::string recipe_hash(const Recipe& recipe);
// The keys whose values differ between two recipes, in key-list order, each as
// "key (A → B)" with the values as TOML text.
std::vector<std::string> differing_keys(const Recipe& a, const Recipe& b);
// docs/recipe-keys.md, generated from recipe_keys().
std::string recipe_keys_markdown();

std::vector<std::string> preset_names();
// The preset's TOML text; raises kBadRecipe for an unknown name, listing the presets.
const std::string& preset_text(const std::string& name);

// The edit distance (insertions, deletions, substitutions) between two names, for "did you
// mean" suggestions.
int edit_distance(const std::string& a, const std::string& b);

}  // namespace spar
