// Recipe files: presets, errors that name the file, line and key, overrides, round trips.
#include <catch2/catch.hpp>

#include "engine/error.h"
#include "recipes/recipe.h"
#include "tests/support.h"

namespace spar {
namespace {

// The message of the kBadRecipe error `f` raises; fails the test when it raises nothing or
// another kind.
template <class F>
std::string recipe_error(F&& f) {
  try {
    f();
  } catch (const Error& e) {
    CHECK(e.kind() == ErrorKind::kBadRecipe);
    return e.what();
  }
  FAIL("no error raised");
  return "";
}

bool contains(const std::string& text, const std::string& part) {
  return text.find(part) != std::string::npos;
}

TEST_CASE("every preset parses and survives a round trip through to_toml", "[recipe]") {
  const std::vector<std::string> expected = {
      "digits", "fashion",  "fashion-conditional", "folder", "grid25",
      "ring8",  "swatches", "swatches-conditional"};
  CHECK(preset_names() == expected);
  for (const std::string& name : preset_names()) {
    INFO(name);
    const Recipe r = parse_recipe(preset_text(name), name);
    const std::string text = to_toml(r);
    CHECK(to_toml(parse_recipe(text, "round trip")) == text);
  }
  CHECK(load_recipe("swatches-conditional").model.conditional);
  CHECK_FALSE(load_recipe("swatches").model.conditional);
}

TEST_CASE("the resolved recipe is valid TOML for any UTF-8 path, other bytes are refused",
          "[recipe]") {
  // Regression: a path with a control character trained, but its recipe.toml did not parse
  // again (TOML 1.0 basic strings must escape U+0000 to U+001F and U+007F).
  Recipe r;
  std::string odd = "fold\x01er/\x1f\x7f\ttab\rcr\nnl\"q\\b/\xc3\xa9t\xc3\xa9/\xf0\x9f\xa7\xb5";
  for (int c = 0; c < 0x20; ++c) odd.push_back(static_cast<char>(c == 0 ? 1 : c));
  r.data.path = odd;
  r.data.class_names = {"a\x02b", "\x7f"};
  const Recipe back = parse_recipe(to_toml(r), "round trip");
  CHECK(back.data.path == odd);
  CHECK(back.data.class_names == r.data.class_names);
  // Regression: a non-UTF-8 file name given with --set was accepted and failed only at the
  // first checkpoint, after the run folder was made.
  Recipe s;
  const std::string message =
      recipe_error([&] { apply_setting(s, "data.path=/data/caf\xe9", "--set data.path=..."); });
  CHECK(contains(message, "data.path: is not valid UTF-8"));
  CHECK(contains(recipe_error([&] { apply_setting(s, "data.class_names=[\"\xff\"]", "--set"); }),
                 "data.class_names"));
  CHECK(contains(
      recipe_error([&] { parse_recipe("[data]\nclass_names = [\"\xff\"]\n", "bad.toml"); }),
      "bad.toml"));
}

TEST_CASE("an empty recipe holds every default", "[recipe]") {
  const Recipe r = parse_recipe("", "empty");
  CHECK(to_toml(r) == to_toml(Recipe{}));
  // Each documented default is the value an empty recipe gets.
  Recipe defaults;
  for (const RecipeKeyInfo& k : recipe_keys()) {
    INFO(k.name);
    Recipe changed = defaults;
    apply_setting(changed, k.name + "=" + k.default_value, "test");
    CHECK(to_toml(changed) == to_toml(defaults));
  }
}

TEST_CASE("an unknown key names the file, the line and the nearest valid key", "[recipe]") {
  const std::string m =
      recipe_error([] { parse_recipe("[training]\nbatch = 8\nstpes = 10\n", "my.toml"); });
  CHECK(m == "my.toml:3: training.stpes: unknown key; did you mean 'training.steps'?");
  // A right key under the wrong section.
  CHECK(contains(recipe_error([] { parse_recipe("[model]\nsteps = 10\n", "r.toml"); }),
                 "did you mean 'training.steps'?"));
  // A key outside every section.
  CHECK(contains(recipe_error([] { parse_recipe("steps = 10\n", "r.toml"); }), "r.toml:1: steps"));
  // Far from every key: no guess, a pointer to the documentation.
  CHECK(contains(recipe_error([] { parse_recipe("[data]\nzzzzzzzzzzzz = 1\n", "r.toml"); }),
                 "docs/recipe-keys.md"));
}

TEST_CASE("a value of the wrong type or out of range is refused with the key", "[recipe]") {
  CHECK(recipe_error([] { parse_recipe("[training]\nsteps = \"many\"\n", "r.toml"); }) ==
        "r.toml:2: training.steps: must be an integer, not the string \"many\"");
  CHECK(recipe_error([] { parse_recipe("[training]\nbatch = 1\n", "r.toml"); }) ==
        "r.toml:2: training.batch: the integer 1 is out of range: must be from 2 to 1000000");
  CHECK(contains(
      recipe_error([] { parse_recipe("[generator_optimiser]\nlearning_rate = 0\n", "r"); }),
      "the integer 0 is out of range: must be in (0.0, 1.0]"));
  CHECK(contains(recipe_error([] { parse_recipe("[model]\nconditional = 1\n", "r"); }),
                 "must be a boolean, not the integer 1"));
  // Integers are accepted where a float is asked for (TOML has both; 1 means 1.0).
  CHECK(parse_recipe("[objective]\ngradient_penalty = 10\n", "r").objective.gradient_penalty ==
        10.0);
  CHECK(recipe_error([] { parse_recipe("[objective]\nname = \"hinje\"\n", "r.toml"); }) ==
        "r.toml:2: objective.name: \"hinje\" is not one of minimax, non-saturating, "
        "least-squares, hinge, wasserstein; did you mean \"hinge\"?");
  CHECK(contains(recipe_error([] { parse_recipe("[data\nsource = 1\n", "bad.toml"); }),
                 "bad.toml:1: not valid TOML"));
}

TEST_CASE("settings from the command line use TOML values, bare words as strings", "[recipe]") {
  Recipe r;
  apply_setting(r, "objective.name=hinge", "--set");
  apply_setting(r, "training.steps=250", "--set");
  apply_setting(r, "generator_optimiser.learning_rate=1e-3", "--set");
  apply_setting(r, "data.class_names=[\"a\", \"b\"]", "--set");
  apply_setting(r, "model.conditional=true", "--set");
  CHECK(r.objective.name == "hinge");
  CHECK(r.training.steps == 250);
  CHECK(r.generator_optimiser.learning_rate == 1e-3);
  CHECK(r.data.class_names == std::vector<std::string>{"a", "b"});
  CHECK(r.model.conditional);
  CHECK(recipe_error([&] { apply_setting(r, "training.step=5", "--set training.step=5"); }) ==
        "--set training.step=5: training.step: unknown key; did you mean 'training.steps'?");
  CHECK(contains(recipe_error([&] { apply_setting(r, "training.steps", "--set"); }),
                 "is not key=value"));
  CHECK(contains(recipe_error([&] { apply_setting(r, "training.steps=ten", "--set"); }),
                 "must be an integer, not the string \"ten\""));
}

TEST_CASE("a key under its old name is read as the new one, with a note", "[recipe]") {
  std::vector<std::string> notes;
  const Recipe r = parse_recipe("[model]\nspectral_norm = true\n", "old.toml", &notes);
  CHECK(r.model.spectral_normalisation);
  REQUIRE(notes.size() == 1);
  CHECK(notes[0] ==
        "old.toml: model.spectral_norm is now called model.spectral_normalisation; the old name "
        "is still read, for now");
  CHECK(parse_recipe("[model]\nspectral_norm = true\n", "old.toml").model.spectral_normalisation);
  Recipe s;
  notes.clear();
  CHECK(apply_setting(s, "model.spectral_norm=true", "--set", &notes) ==
        "model.spectral_normalisation");
  CHECK(s.model.spectral_normalisation);
  CHECK(notes.size() == 1);
  // The resolved recipe uses the new name only.
  CHECK(contains(to_toml(s), "\nspectral_normalisation = true\n"));
  CHECK_FALSE(contains(to_toml(s), "spectral_norm ="));
  CHECK(contains(recipe_error([] {
                   parse_recipe("[model]\nspectral_norm = true\nspectral_normalisation = false\n",
                                "both.toml");
                 }),
                 "both.toml:3: model.spectral_normalisation: given twice"));
}

TEST_CASE("load_recipe names the presets when given neither a preset nor a file", "[recipe]") {
  const std::string m = recipe_error([] { load_recipe("/no/such/recipe.toml"); });
  CHECK(contains(m, "/no/such/recipe.toml: neither a preset ("));
  CHECK(contains(m, "swatches"));
}

TEST_CASE("edit distance", "[recipe]") {
  // Levenshtein's distance; "kitten" → "sitting" needs 3 edits (common practice example).
  CHECK(edit_distance("kitten", "sitting") == 3);
  CHECK(edit_distance("", "abc") == 3);
  CHECK(edit_distance("steps", "steps") == 0);
  CHECK(edit_distance("stpes", "steps") == 2);
}

}  // namespace
}  // namespace spar
