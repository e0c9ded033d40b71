#include "recipes/data_sources.h"

#include <filesystem>

#include "engine/error.h"
#include "recipes/swatches.h"

namespace spar {
namespace {

[[noreturn]] void bad_recipe(const std::string& key, const std::string& why) {
  raise(ErrorKind::kBadRecipe, key + ": " + why);
}

void require_path(const Recipe& r) {
  if (r.data.path.empty())
    bad_recipe("data.path", "required when data.source is \"" + r.data.source + "\"");
  std::error_code ignored;
  if (!std::filesystem::exists(r.data.path, ignored))
    bad_recipe("data.path", "\"" + r.data.path + "\" does not exist (moved or removed?)");
}

Dataset swatch_data(const Recipe& r) {
  SwatchOptions o;
  o.count = r.data.swatch_count;
  o.size = r.data.image_size;
  o.seed = static_cast<uint64_t>(r.training.seed);
  return make_swatches(o);
}

Dataset image_data(const Recipe& r) {
  require_path(r);
  if (r.data.channels == 2) bad_recipe("data.channels", "must be 1 or 3, not 2");
  ImageLoadOptions o;
  o.size = r.data.image_size;
  o.channels = r.data.channels;
  o.pixel_limit = r.data.pixel_limit;
  return load_images(r.data.path, o);
}

Dataset idx_data(const Recipe& r) {
  require_path(r);
  if (!r.data.class_names.empty() && r.data.labels.empty())
    bad_recipe("data.class_names", "names classes, but data.labels gives no label file");
  return load_idx_dataset(r.data.path, r.data.labels, r.data.class_names);
}

Dataset table_data(const Recipe& r) {
  require_path(r);
  TableOptions o;
  o.label_column = r.data.labelled ? r.data.label_column : TableOptions::kNoLabel;
  o.low = r.data.low;
  o.high = r.data.high;
  o.header = r.data.header;
  Dataset data = load_table(r.data.path, o);
  if (!r.data.class_names.empty()) {
    if (static_cast<int64_t>(r.data.class_names.size()) != data.classes())
      bad_recipe("data.class_names", std::to_string(r.data.class_names.size()) +
                                         " names for the table's " +
                                         std::to_string(data.classes()) + " classes");
    data.class_names = r.data.class_names;
  }
  return data;
}

}  // namespace

const std::vector<DataSourceInfo>& data_sources() {
  static const std::vector<DataSourceInfo> all = {
      {"ring8", "the built-in ring of 8 Gaussians in the plane of Lin et al. 2018", ring_of_8,
       nullptr, nullptr},
      {"grid25", "the built-in grid of 25 Gaussians in the plane of Lin et al. 2018", grid_of_25,
       nullptr, nullptr},
      {"swatches", "the built-in procedural fabric swatches", nullptr,
       "the swatch families are the classes", swatch_data},
      {"images", "a folder of PNG, JPEG or BMP images at data.path", nullptr,
       "put each class in its own sub-folder", image_data},
      {"idx", "IDX files such as Fashion-MNIST's at data.path and data.labels", nullptr,
       "give the label file as data.labels", idx_data},
      {"table", "a numeric CSV table at data.path", nullptr,
       "set data.labelled and data.label_column", table_data},
  };
  return all;
}

const DataSourceInfo& data_source_of(const Recipe& r) {
  std::string names;
  for (const DataSourceInfo& s : data_sources()) {
    if (r.data.source == s.name) return s;
    names += std::string(names.empty() ? "" : ", ") + s.name;
  }
  bad_recipe("data.source", "\"" + r.data.source + "\" is not one of " + names);
}

}  // namespace spar
