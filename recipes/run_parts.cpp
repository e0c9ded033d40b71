#include "recipes/run_parts.h"

#include "engine/error.h"
#include "recipes/data_sources.h"

namespace spar {
namespace {

[[noreturn]] void bad_recipe(const std::string& key, const std::string& why) {
  raise(ErrorKind::kBadRecipe, key + ": " + why);
}

}  // namespace

Dataset load_dataset(const Recipe& r) {
  const DataSourceInfo& source = data_source_of(r);
  if (source.endless())
    bad_recipe("data.source", "\"" + r.data.source + "\" draws endless points, not a data set");
  return source.load(r);
}

std::unique_ptr<DataSource> make_data_source(const Recipe& r) {
  const uint64_t seed = static_cast<uint64_t>(r.training.seed);
  const DataSourceInfo& source = data_source_of(r);
  if (source.endless()) {
    if (r.model.conditional)
      bad_recipe("model.conditional",
                 "needs labelled data, and " + std::string(source.name) + " has no labels");
    return std::make_unique<MixtureSource>(source.mixture(), seed);
  }
  Dataset data = source.load(r);
  if (r.model.conditional && data.classes() == 0)
    bad_recipe("model.conditional",
               "needs labelled data, and " + data.origin + " has no labels" +
                   (source.labels_from ? " (" + std::string(source.labels_from) + ")" : ""));
  if (!r.model.conditional) {  // an unconditional model ignores the labels
    data.labels.clear();
    data.class_names.clear();
  }
  return std::make_unique<DatasetSource>(std::move(data), seed);
}

GanPair make_gan_pair(const Recipe& r, const Shape& shape, int64_t classes) {
  const uint64_t seed = static_cast<uint64_t>(r.training.seed);
  Rng rng(seed, derive_stream(seed, "initialisation"));
  const int64_t conditioned = r.model.conditional ? classes : 0;
  if (r.model.kind == "mlp") {
    if (shape.rank() != 1)
      bad_recipe("model.kind", "mlp takes points or table rows, but the data are " + shape.str() +
                                   " images; use \"dcgan\"");
    MlpPairOptions o;
    o.latent = r.model.latent;
    o.data = shape[0];
    o.width = r.model.width;
    o.depth = static_cast<int>(r.model.depth);
    o.spectral_normalisation = r.model.spectral_normalisation;
    o.classes = conditioned;
    return make_mlp_pair(o, rng);
  }
  if (shape.rank() != 3 || shape[1] != shape[2])
    bad_recipe("model.kind", "dcgan takes square images, but the samples have shape " +
                                 shape.str() + "; use \"mlp\"");
  DcganPairOptions o;
  o.image_size = shape[1];
  o.channels = shape[0];
  o.latent = r.model.latent;
  o.width = r.model.width;
  o.spectral_normalisation = r.model.spectral_normalisation;
  o.classes = conditioned;
  try {
    return make_dcgan_pair(o, rng);
  } catch (const Error& e) {  // the options come from the data: name the key that shaped it
    bad_recipe(o.channels == 1 || o.channels == 3 ? "data.image_size" : "data.channels", e.what());
  }
}

TrainingOptions training_options(const Recipe& r) {
  TrainingOptions o;
  o.objective = objective_named(r.objective.name).objective;
  o.least_squares.fake = r.objective.least_squares_fake;
  o.least_squares.real = r.objective.least_squares_real;
  o.least_squares.generator = r.objective.least_squares_generator;
  o.gradient_penalty = r.objective.gradient_penalty;
  o.r1 = r.objective.r1;
  o.critic_steps = static_cast<int>(r.objective.critic_steps);
  o.batch = r.training.batch;
  auto adam = [](const Recipe::AdamKeys& k) {
    AdamOptions a;
    a.learning_rate = k.learning_rate;
    a.beta1 = k.beta1;
    a.beta2 = k.beta2;
    a.epsilon = k.epsilon;
    a.decoupled_weight_decay = k.weight_decay;
    return a;
  };
  o.generator_optimiser = adam(r.generator_optimiser);
  o.critic_optimiser = adam(r.critic_optimiser);
  o.average_decay = r.training.average_decay;
  o.seed = static_cast<uint64_t>(r.training.seed);
  return o;
}

}  // namespace spar
