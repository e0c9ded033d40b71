#include "recipes/recipe.h"

#include <toml++/toml.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <limits>
#include <sstream>
#include <type_traits>

#include "engine/archive.h"
#include "engine/error.h"
#include "engine/random.h"
#include "recipes/data_sources.h"
#include "recipes/objectives.h"

namespace spar {
namespace detail {
// Defined in the file CMake generates from recipes/presets/*.toml: (name, text) pairs.
const std::vector<std::pair<std::string, std::string>>& embedded_presets();
}  // namespace detail

namespace {

enum class Type { kString, kInteger, kFloat, kBoolean, kStrings };

template <class M>
constexpr Type type_of() {
  if constexpr (std::is_same_v<M, std::string>) return Type::kString;
  if constexpr (std::is_same_v<M, int64_t>) return Type::kInteger;
  if constexpr (std::is_same_v<M, double>) return Type::kFloat;
  if constexpr (std::is_same_v<M, bool>) return Type::kBoolean;
  if constexpr (std::is_same_v<M, std::vector<std::string>>) return Type::kStrings;
}

const char* type_name(Type t) {
  switch (t) {
    case Type::kString:
      return "string";
    case Type::kInteger:
      return "integer";
    case Type::kFloat:
      return "float";
    case Type::kBoolean:
      return "boolean";
    case Type::kStrings:
      return "list of strings";
  }
  return "?";
}

constexpr double kInf = std::numeric_limits<double>::infinity();

// One key: its dotted name, where its value lives in a Recipe, and what values it accepts.
struct Key {
  const char* name;
  Type type;
  void* (*slot)(Recipe&);
  const char* about;
  const char* choices = nullptr;  // strings: "a|b|c"; nullptr accepts any
  double low = -kInf;             // numbers: the accepted closed range [low, high] ...
  double high = kInf;
  bool low_open = false;  // ... or (low, high] when set
};

// The key section.leaf is the field section.leaf of a Recipe: one spelling for both.
#define SPAR_SLOT(member) +[](Recipe& r) -> void* { return &r.member; }
#define SPAR_KEY(section, leaf, ...)                                                           \
  Key {                                                                                        \
#section "." #leaf, type_of < decltype(Recipe{}.section.leaf)>(), SPAR_SLOT(section.leaf), \
        __VA_ARGS__                                                                            \
  }

// The accepted values of a key listed in a table of its own (data sources, objectives), as
// "a|b|c", and the key's documentation, "<lead>: a (about a), b (about b), ...".
template <class Info>
std::pair<std::string, std::string> choices_from(const std::vector<Info>& table,
                                                 const std::string& lead) {
  std::string choices, about = lead + ": ";
  for (const Info& i : table) {
    choices += (choices.empty() ? "" : "|") + std::string(i.name);
    about += (&i == &table.front() ? "" : ", ") + std::string(i.name) + " (" + i.about + ")";
  }
  return {choices, about};
}

const std::vector<Key>& keys() {
  static const std::vector<Key> all = [] {
    // Kept for the program's life: the keys point into them.
    static const auto sources = choices_from(data_sources(), "where samples come from");
    static const auto objective_names = choices_from(objectives(), "the adversarial objective");
    std::vector<Key> k = {
        SPAR_KEY(data, source, sources.second.c_str(), sources.first.c_str()),
        SPAR_KEY(data, path,
                 "images: the folder (sub-folders become classes); idx: the image file; "
                 "table: the CSV file. Relative paths are taken from the recipe file's folder"),
        SPAR_KEY(data, labels, "idx: the label file, or \"\" for none"),
        SPAR_KEY(data, class_names,
                 "idx, table: names for classes 0, 1, ... (default: the numbers)"),
        SPAR_KEY(data, image_size,
                 "images, swatches: side of the square images in pixels (28, 32 or 64 for the "
                 "dcgan model)",
                 nullptr, 8, 256),
        SPAR_KEY(data, channels, "images: 1 (grayscale) or 3 (RGB)", nullptr, 1, 3),
        SPAR_KEY(data, pixel_limit,
                 "images: an image with more pixels is refused from its header, before it is "
                 "decoded",
                 nullptr, 1, 1e10),
        SPAR_KEY(data, swatch_count, "swatches: how many to make", nullptr, 2, 1e7),
        SPAR_KEY(data, labelled, "table: one column holds the class label"),
        SPAR_KEY(data, label_column,
                 "table: the label's column, 0-based; negative counts from the end (-1: last)"),
        SPAR_KEY(data, header, "table: skip the first line"),
        SPAR_KEY(data, low,
                 "table: the value mapped to -1; when low equals high, the table's minimum"),
        SPAR_KEY(data, high,
                 "table: the value mapped to +1; when low equals high, the table's maximum"),
        SPAR_KEY(data, picture_width,
                 "table: draw samples as grayscale pictures this many values wide (8 for the "
                 "digits table); 0 for none",
                 nullptr, 0, 4096),
        SPAR_KEY(model, kind,
                 "mlp: dense networks for points and tables; dcgan: convolutional networks "
                 "for images (Radford et al. 2015)",
                 "mlp|dcgan"),
        SPAR_KEY(model, latent, "size of the generator's latent vector", nullptr, 1, 4096),
        SPAR_KEY(model, width,
                 "mlp: units per hidden layer; dcgan: channels of the critic's first "
                 "convolution, doubled at each halving (the generator mirrors it)",
                 nullptr, 1, 4096),
        SPAR_KEY(model, depth, "mlp: hidden layers in each network", nullptr, 1, 32),
        SPAR_KEY(model, spectral_normalisation,
                 "critic: spectral normalisation of every weight (Miyato et al. 2018); for "
                 "dcgan it replaces the critic's batch normalisation"),
        SPAR_KEY(model, conditional,
                 "class-conditional networks (Mirza and Osindero 2014); needs labelled data"),
        SPAR_KEY(objective, name, objective_names.second.c_str(), objective_names.first.c_str()),
        SPAR_KEY(objective, gradient_penalty,
                 "weight of the gradient penalty (Gulrajani et al. 2017 use 10); 0 off", nullptr,
                 0),
        SPAR_KEY(objective, r1,
                 "weight gamma of the R1 penalty on real data (Mescheder et al. 2018); 0 off",
                 nullptr, 0),
        SPAR_KEY(objective, critic_steps,
                 "critic steps per generator step (k in Goodfellow et al. 2014, Algorithm 1)",
                 nullptr, 1, 100),
        SPAR_KEY(objective, least_squares_fake,
                 "least-squares: the critic's target a for generated samples"),
        SPAR_KEY(objective, least_squares_real,
                 "least-squares: the critic's target b for real samples"),
        SPAR_KEY(objective, least_squares_generator,
                 "least-squares: the value c the generator wants the critic to give"),
    };
    for (int side = 0; side < 2; ++side) {
      const bool g = side == 0;
#define SPAR_ADAM(field, about, ...)                                                            \
  k.push_back(Key{g ? "generator_optimiser." #field : "critic_optimiser." #field, Type::kFloat, \
                  g ? SPAR_SLOT(generator_optimiser.field) : SPAR_SLOT(critic_optimiser.field), \
                  about, __VA_ARGS__})
      SPAR_ADAM(learning_rate, "Adam's step size alpha (Kingma and Ba 2015)", nullptr, 0, 1, true);
      SPAR_ADAM(beta1, "Adam's decay of the first moment", nullptr, 0, 0.999999);
      SPAR_ADAM(beta2, "Adam's decay of the second moment", nullptr, 0, 0.999999);
      SPAR_ADAM(epsilon, "Adam's epsilon", nullptr, 0, 1, true);
      SPAR_ADAM(weight_decay,
                "decoupled weight decay, scaled by the learning rate (Loshchilov and Hutter "
                "2019); 0 off",
                nullptr, 0, 1);
#undef SPAR_ADAM
    }
    const std::vector<Key> rest = {
        SPAR_KEY(training, steps, "generator steps in the whole run", nullptr, 1, 1e12),
        SPAR_KEY(training, batch, "samples per batch, real and generated alike", nullptr, 2, 1e6),
        SPAR_KEY(training, seed,
                 "the run seed: initial weights, data order, latent draws all derive from it",
                 nullptr, 0, 9.0e18),
        SPAR_KEY(training, average_decay,
                 "decay of the moving average of the generator's weights used for samples "
                 "(Yazici et al. 2019), warmed up as min(decay, (1 + t)/(10 + t)) at step t; "
                 "0 off",
                 nullptr, 0, 0.999999),
        SPAR_KEY(output, log_every, "steps between rows of log.csv", nullptr, 1, 1e12),
        SPAR_KEY(output, sample_every, "steps between sample pictures in samples/", nullptr, 1,
                 1e12),
        SPAR_KEY(output, checkpoint_every, "steps between saves of state.spar and generator.spar",
                 nullptr, 1, 1e12),
        SPAR_KEY(output, sample_count,
                 "samples in each picture (2-D data: points in each scatter plot)", nullptr, 1,
                 1e5),
    };
    k.insert(k.end(), rest.begin(), rest.end());
    return k;
  }();
  return all;
}

#undef SPAR_KEY
#undef SPAR_SLOT

std::string section_of(const std::string& name) {
  return name.substr(0, name.find('.'));
}
std::string leaf_of(const std::string& name) {
  return name.substr(name.find('.') + 1);
}

// Shortest decimal text that reads back as the same double, always with a '.' or an
// exponent so TOML reads a float.
std::string float_text(double v) {
  if (std::isinf(v)) return v > 0 ? "inf" : "-inf";
  if (std::isnan(v)) return "nan";
  char buf[32];
  for (int precision = 1; precision <= 17; ++precision) {
    std::snprintf(buf, sizeof buf, "%.*g", precision, v);
    if (std::strtod(buf, nullptr) == v) break;
  }
  std::string s = buf;
  if (s.find_first_of(".en") == std::string::npos) s += ".0";
  return s;
}

// A TOML basic string (TOML 1.0, "Basic strings"): quotes, backslashes and every control
// character escaped, so any UTF-8 text reads back as itself.
std::string toml_string(const std::string& s) {
  std::string out = "\"";
  for (unsigned char c : s) {
    switch (c) {
      case '"':
        out += "\\\"";
        break;
      case '\\':
        out += "\\\\";
        break;
      case '\n':
        out += "\\n";
        break;
      case '\t':
        out += "\\t";
        break;
      case '\r':
        out += "\\r";
        break;
      default:
        if (c < 0x20 || c == 0x7F) {
          char code[8];
          std::snprintf(code, sizeof code, "\\u%04X", c);
          out += code;
        } else {
          out += static_cast<char>(c);
        }
    }
  }
  return out + "\"";
}

std::string value_text(const Key& key, Recipe& r) {
  void* p = key.slot(r);
  switch (key.type) {
    case Type::kString:
      return toml_string(*static_cast<std::string*>(p));
    case Type::kInteger:
      return std::to_string(*static_cast<int64_t*>(p));
    case Type::kFloat:
      return float_text(*static_cast<double*>(p));
    case Type::kBoolean:
      return *static_cast<bool*>(p) ? "true" : "false";
    case Type::kStrings: {
      std::string out = "[";
      for (const std::string& s : *static_cast<std::vector<std::string>*>(p))
        out += (out.size() > 1 ? ", " : "") + toml_string(s);
      return out + "]";
    }
  }
  return "";
}

const Key* find_key(const std::string& name) {
  for (const Key& k : keys())
    if (name == k.name) return &k;
  return nullptr;
}

// Keys renamed since they were first written, as (old name, new name). A recipe may still use
// the old name, read as the new one with a note; recipes spar writes use the new one.
const std::pair<const char*, const char*> kRenamedKeys[] = {
    {"model.spectral_norm", "model.spectral_normalisation"},
};

// The key `name` stands for, following a rename (with a note into `notes`, when given);
// nullptr for an unknown name.
const Key* find_current_key(const std::string& name, const std::string& origin,
                            std::vector<std::string>* notes) {
  for (const auto& [old_name, new_name] : kRenamedKeys)
    if (name == old_name) {
      if (notes)
        notes->push_back(origin + ": " + old_name + " is now called " + new_name +
                         "; the old name is still read, for now");
      return find_key(new_name);
    }
  return find_key(name);
}

// "; did you mean 'training.steps'?" for a near miss, else a list of the section's keys.
std::string suggestion(const std::string& name) {
  const Key* best = nullptr;
  int best_distance = std::numeric_limits<int>::max();
  for (const Key& k : keys()) {
    int d = edit_distance(name, k.name);
    // A right leaf under the wrong section ("training.kind") also counts as near.
    if (leaf_of(name) == leaf_of(k.name)) d = std::min(d, 2);
    if (d < best_distance) best_distance = d, best = &k;
  }
  const int tolerance = std::max<int>(2, static_cast<int>(name.size()) / 3);
  if (best && best_distance <= tolerance)
    return "; did you mean '" + std::string(best->name) + "'?";
  return "; see docs/recipe-keys.md for the valid keys";
}

std::string describe_node(const toml::node& node) {
  std::ostringstream out;
  switch (node.type()) {
    case toml::node_type::string:
      return "the string " + toml_string(*node.value<std::string>());
    case toml::node_type::integer:
      return "the integer " + std::to_string(*node.value<int64_t>());
    case toml::node_type::floating_point:
      return "the float " + float_text(*node.value<double>());
    case toml::node_type::boolean:
      return std::string("the boolean ") + (*node.value<bool>() ? "true" : "false");
    case toml::node_type::array:
      return "a list";
    case toml::node_type::table:
      return "a table";
    default:
      return "a date or time";
  }
}

[[noreturn]] void bad_key(const std::string& origin, const toml::node* node,
                          const std::string& name, const std::string& why) {
  std::string where = origin;
  if (node && node->source().begin.line > 0)
    where += ":" + std::to_string(node->source().begin.line);
  raise(ErrorKind::kBadRecipe, where + ": " + name + ": " + why);
}

void check_range(const Key& key, double v, const std::string& origin, const toml::node& node) {
  const bool below = key.low_open ? !(v > key.low) : !(v >= key.low);
  if (below || !(v <= key.high)) {
    std::string range;
    if (key.high == kInf)
      range =
          key.low_open ? "greater than " + float_text(key.low) : "at least " + float_text(key.low);
    else
      range = std::string(key.low_open ? "in (" : "in [") + float_text(key.low) + ", " +
              float_text(key.high) + "]";
    if (key.type == Type::kInteger && !key.low_open && key.high != kInf)
      range = "from " + std::to_string(static_cast<int64_t>(key.low)) + " to " +
              std::to_string(static_cast<int64_t>(key.high));
    bad_key(origin, &node, key.name, describe_node(node) + " is out of range: must be " + range);
  }
}

void assign(const Key& key, const toml::node& node, Recipe& recipe, const std::string& origin) {
  void* p = key.slot(recipe);
  auto wrong_type = [&] {
    bad_key(origin, &node, key.name,
            std::string("must be ") + (key.type == Type::kInteger ? "an " : "a ") +
                type_name(key.type) + ", not " + describe_node(node));
  };
  switch (key.type) {
    case Type::kString: {
      if (!node.is_string()) wrong_type();
      const std::string v = *node.value<std::string>();
      if (!is_valid_utf8(v))
        bad_key(origin, &node, key.name,
                "is not valid UTF-8 text (a file name in another encoding?)");
      if (key.choices) {
        const std::string choices = key.choices;
        bool found = false;
        std::stringstream parts(choices);
        std::string part, listed;
        while (std::getline(parts, part, '|')) {
          found |= part == v;
          listed += (listed.empty() ? "" : ", ") + part;
        }
        if (!found) {
          std::string near;
          int best = 3;
          std::stringstream again(choices);
          while (std::getline(again, part, '|'))
            if (edit_distance(v, part) < best) best = edit_distance(v, part), near = part;
          bad_key(origin, &node, key.name,
                  toml_string(v) + " is not one of " + listed +
                      (near.empty() ? "" : "; did you mean " + toml_string(near) + "?"));
        }
      }
      *static_cast<std::string*>(p) = v;
      return;
    }
    case Type::kInteger: {
      if (!node.is_integer()) wrong_type();
      const int64_t v = *node.value<int64_t>();
      check_range(key, static_cast<double>(v), origin, node);
      *static_cast<int64_t*>(p) = v;
      return;
    }
    case Type::kFloat: {
      if (!node.is_number()) wrong_type();
      const double v = *node.value<double>();
      if (!std::isfinite(v)) bad_key(origin, &node, key.name, "must be finite");
      check_range(key, v, origin, node);
      *static_cast<double*>(p) = v;
      return;
    }
    case Type::kBoolean:
      if (!node.is_boolean()) wrong_type();
      *static_cast<bool*>(p) = *node.value<bool>();
      return;
    case Type::kStrings: {
      const toml::array* list = node.as_array();
      if (!list) wrong_type();
      std::vector<std::string> v;
      for (const toml::node& item : *list) {
        if (!item.is_string())
          bad_key(origin, &item, key.name,
                  "every item must be a string, not " + describe_node(item));
        v.push_back(*item.value<std::string>());
        if (!is_valid_utf8(v.back()))
          bad_key(origin, &item, key.name, "an item is not valid UTF-8 text");
      }
      *static_cast<std::vector<std::string>*>(p) = v;
      return;
    }
  }
}

toml::table parse_toml(const std::string& text, const std::string& origin) {
  try {
    return toml::parse(text, origin);
  } catch (const toml::parse_error& e) {
    raise(ErrorKind::kBadRecipe, origin + ":" + std::to_string(e.source().begin.line) +
                                     ": not valid TOML: " + std::string(e.description()));
  }
}

}  // namespace

std::vector<RecipeKeyInfo> recipe_keys() {
  Recipe defaults;
  std::vector<RecipeKeyInfo> out;
  for (const Key& k : keys())
    out.push_back({k.name, type_name(k.type), value_text(k, defaults), k.about});
  return out;
}

Recipe parse_recipe(const std::string& text, const std::string& origin,
                    std::vector<std::string>* notes) {
  const toml::table root = parse_toml(text, origin);
  Recipe recipe;
  std::vector<const Key*> given;  // to refuse a key given under both its names
  for (const auto& [section, content] : root) {
    const std::string section_name(section.str());
    const toml::table* table = content.as_table();
    if (!table)
      bad_key(origin, &content, section_name,
              "unknown key (every key belongs to a section such as [training])" +
                  suggestion(section_name));
    for (const auto& [leaf, node] : *table) {
      const std::string name = section_name + "." + std::string(leaf.str());
      const Key* key = find_current_key(name, origin, notes);
      if (!key) bad_key(origin, &node, name, "unknown key" + suggestion(name));
      if (std::find(given.begin(), given.end(), key) != given.end())
        bad_key(origin, &node, name,
                std::string("given twice, as ") + key->name + " and under its old name; keep one");
      given.push_back(key);
      assign(*key, node, recipe, origin);
    }
  }
  return recipe;
}

Recipe load_recipe(const std::string& name_or_path, std::vector<std::string>* notes) {
  for (const auto& [name, text] : detail::embedded_presets())
    if (name == name_or_path) return parse_recipe(text, "preset " + name, notes);
  std::ifstream in(name_or_path, std::ios::binary);
  if (!in) {
    std::string names;
    for (const std::string& n : preset_names()) names += (names.empty() ? "" : ", ") + n;
    raise(ErrorKind::kBadRecipe,
          name_or_path + ": neither a preset (" + names + ") nor a readable recipe file");
  }
  std::stringstream text;
  text << in.rdbuf();
  Recipe recipe = parse_recipe(text.str(), name_or_path, notes);
  // Data paths in a file are relative to the file's folder, so recipes travel with their data;
  // they are stored absolute, so a run can be resumed or judged from any directory.
  const std::filesystem::path folder = std::filesystem::path(name_or_path).parent_path();
  for (std::string* p : {&recipe.data.path, &recipe.data.labels})
    if (!p->empty() && std::filesystem::path(*p).is_relative())
      *p = std::filesystem::absolute(folder / *p).lexically_normal().string();
  return recipe;
}

std::string apply_setting(Recipe& recipe, const std::string& assignment, const std::string& origin,
                          std::vector<std::string>* notes) {
  const size_t eq = assignment.find('=');
  if (eq == std::string::npos || eq == 0)
    raise(ErrorKind::kBadRecipe, origin + ": " + toml_string(assignment) + " is not key=value");
  std::string name = assignment.substr(0, eq);
  name.erase(name.find_last_not_of(' ') + 1);
  const std::string value = assignment.substr(eq + 1);
  const Key* key = find_current_key(name, origin, notes);
  if (!key) bad_key(origin, nullptr, name, "unknown key" + suggestion(name));
  toml::table parsed;
  try {
    parsed = toml::parse("v = " + value, origin);
  } catch (const toml::parse_error&) {
    // A bare word: read it as a string (objective.name=hinge).
    parsed = toml::table{{"v", value}};
  }
  assign(*key, *parsed.get("v"), recipe, origin);
  return key->name;
}

std::string text_hash(const std::string& text) {
  const uint64_t h = detail::fnv1a_64(
      detail::kFnv64Offset, reinterpret_cast<const unsigned char*>(text.data()), text.size());
  char out[24];
  std::snprintf(out, sizeof out, "%016llx", static_cast<unsigned long long>(h));
  return out;
}

std::string recipe_hash(const Recipe& recipe) {
  return text_hash(to_toml(recipe));
}

std::vector<std::string> differing_keys(const Recipe& a, const Recipe& b) {
  Recipe x = a, y = b;
  std::vector<std::string> out;
  for (const Key& k : keys()) {
    const std::string va = value_text(k, x), vb = value_text(k, y);
    if (va != vb) out.push_back(std::string(k.name) + " (" + va + " → " + vb + ")");
  }
  return out;
}

std::string to_toml(const Recipe& recipe) {
  Recipe copy = recipe;
  std::string out, section;
  for (const Key& k : keys()) {
    if (section_of(k.name) != section) {
      section = section_of(k.name);
      out += (out.empty() ? "[" : "\n[") + section + "]\n";
    }
    out +=
        "# " + std::string(k.about) + "\n" + leaf_of(k.name) + " = " + value_text(k, copy) + "\n";
  }
  return out;
}

std::string recipe_keys_markdown() {
  std::string out =
      "# Recipe keys\n\n"
      "<!-- Generated from recipe_keys() in recipes/recipe.cpp by `spar_recipe_keys_doc`; "
      "the test recipe_keys_doc fails when this file and the code disagree. -->\n\n"
      "A recipe is a TOML file of sections. Every key may be left out; its default then "
      "holds. An unknown key, a value of the wrong type or one out of range stops spar with "
      "a one-line error naming the file, the line and the key. `spar train RECIPE --set "
      "key=value` overrides one key (a bare word is read as a string). A run writes the "
      "resolved recipe, every key with its value, to `recipe.toml` in its folder.\n";
  std::string section;
  for (const RecipeKeyInfo& k : recipe_keys()) {
    if (section_of(k.name) != section) {
      section = section_of(k.name);
      out += "\n## [" + section + "]\n\n| key | type | default | meaning |\n|---|---|---|---|\n";
    }
    std::string about = k.about;
    std::string choices;
    if (const Key* key = find_key(k.name); key && key->choices) {
      for (const char* c = key->choices; *c; ++c)
        choices += *c == '|' ? std::string(", ") : std::string(1, *c);
      about += ". One of: " + choices;
    }
    out += "| `" + leaf_of(k.name) + "` | " + k.type + " | `" + k.default_value + "` | " + about +
           " |\n";
  }
  out +=
      "\n## Renamed keys\n\nA recipe may still use a key's old name: it is read as the new "
      "one, with a one-line note. Recipes spar writes use the new names.\n\n"
      "| old name | new name |\n|---|---|\n";
  for (const auto& [old_name, new_name] : kRenamedKeys)
    out += "| `" + std::string(old_name) + "` | `" + new_name + "` |\n";
  return out;
}

std::vector<std::string> preset_names() {
  std::vector<std::string> names;
  for (const auto& p : detail::embedded_presets()) names.push_back(p.first);
  std::sort(names.begin(), names.end());
  return names;
}

const std::string& preset_text(const std::string& name) {
  for (const auto& p : detail::embedded_presets())
    if (p.first == name) return p.second;
  std::string names;
  for (const std::string& n : preset_names()) names += (names.empty() ? "" : ", ") + n;
  raise(ErrorKind::kBadRecipe, "preset '" + name + "' does not exist; presets: " + names);
}

int edit_distance(const std::string& a, const std::string& b) {
  std::vector<int> row(b.size() + 1);
  for (size_t j = 0; j <= b.size(); ++j) row[j] = static_cast<int>(j);
  for (size_t i = 1; i <= a.size(); ++i) {
    int diagonal = row[0];
    row[0] = static_cast<int>(i);
    for (size_t j = 1; j <= b.size(); ++j) {
      const int substitute = diagonal + (a[i - 1] != b[j - 1]);
      diagonal = row[j];
      row[j] = std::min({row[j] + 1, row[j - 1] + 1, substitute});
    }
  }
  return row[b.size()];
}

}  // namespace spar
